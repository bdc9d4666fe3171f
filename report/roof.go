package report

import (
	"fmt"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"liftyard/estimate"
	"liftyard/rig"
)

// roofRow is one zone in one block, rounded to text.
type roofRow struct {
	Index, Zone, Start, Dir, Q, Cp, RMS, Peak, Uplift, Design, En, Agrees string
	Disagree                                                              bool
}

// roofRows lists the roof segments in stored order (block by block, zone
// by zone); rows without a zone are skipped. The values come through the
// result column table (estimate.NewRow), as in the exports and the API.
func (r *Report) roofRows() []roofRow {
	var out []roofRow
	for _, s := range r.Segments {
		if !zoneRow(&s) {
			continue
		}
		row := estimate.NewRow(r.Run.ID, rig.KindRoof, &s)
		f := row.Float
		rr := roofRow{
			Index: blockNo(&s), Zone: s.Zone, Start: when(s.TStart),
			Q:  pm(f("q_pa"), f("q_u95_pa"), 1),
			Cp: pm(f("cp_mean"), f("cp_u95"), 2), RMS: fix(f("cp_rms"), 2), Peak: fix(f("cp_peak"), 2) + " / " + fix(f("cp_peak_max"), 2),
			Dir:    direction(row),
			Uplift: pm(f("uplift_n"), f("uplift_u95_n"), 0),
			Design: pm(f("design_cp"), f("design_cp_u95"), 2), En: fix(f("en"), 2), Agrees: dash,
		}
		if a, ok := row.Value("agrees"); ok {
			rr.Agrees = "yes"
			if !a.(bool) {
				rr.Agrees, rr.Disagree = "no", true
			}
		}
		out = append(out, rr)
	}
	return out
}

// sectorRow is one zone in one direction sector, rounded to text.
type sectorRow struct {
	Sector, Zone, Blocks, Left, CpMean, CpRange, Peak string
}

// sectorRows sums the run's zone rows by direction sector
// (estimate.RoofSectors); nil when no block has a direction.
func (r *Report) sectorRows() []sectorRow {
	var out []sectorRow
	vane := false
	for _, g := range estimate.RoofSectors(r.Segments) {
		sector := "no vane"
		if finite(g.SectorRad) {
			sector, vane = fix(rig.Deg(g.SectorRad), 0), true
		}
		out = append(out, sectorRow{
			Sector: sector, Zone: g.Zone, Blocks: fmt.Sprint(g.Blocks), Left: fmt.Sprint(g.Left),
			CpMean:  fix(g.CpMean, 2),
			CpRange: fix(g.CpMeanLo, 2) + " … " + fix(g.CpMeanHi, 2),
			Peak:    fix(g.CpPeak, 2) + " / " + fix(g.CpPeakMax, 2),
		})
	}
	if !vane {
		return nil
	}
	return out
}

// direction is a row's mean direction ± its spread in whole degrees, with
// a flag when the block wandered out of its sector; a dash without a vane.
func direction(row estimate.Row) string {
	d, sp := row.Float("direction_deg"), row.Float("direction_spread_deg")
	if !finite(d) {
		return dash
	}
	out := fix(d, 0) + " ± " + fix(sp, 0)
	if v, ok := row.Value("sector_left"); ok && v.(bool) {
		out += " (left its sector)"
	}
	return out
}

// zoneRow reports whether s is a roof zone row (not a per-tap row, not a
// force-balance row).
func zoneRow(s *estimate.Segment) bool { return s.Zone != "" && s.Tap == "" }

// blockNo is a roof row's block number for display, from 1; rows stored
// before blocks were numbered show their row number with a "#".
func blockNo(s *estimate.Segment) string {
	if s.Block < 0 {
		return fmt.Sprintf("#%d", s.Index)
	}
	return fmt.Sprint(s.Block + 1)
}

// roofSummary is the roof part of the summary: how many blocks and zones,
// and how many zone-blocks agree with their design values.
func (r *Report) roofSummary() []string {
	zones := map[string]bool{}
	var rows, agree, compared int
	worst, worstZone := math.Inf(1), ""
	for _, s := range r.Segments {
		if !zoneRow(&s) {
			continue
		}
		rows++
		zones[s.Zone] = true
		if a, ok := estimate.Agrees(s.En); ok && measured(s.DesignCp) {
			compared++
			if a {
				agree++
			}
		}
		if finite(s.CpPeak) && s.CpPeak < worst {
			worst, worstZone = s.CpPeak, s.Zone
		}
	}
	if rows == 0 {
		return []string{"No complete block was recorded in this run, so there are no pressure coefficients to report."}
	}
	out := []string{fmt.Sprintf("%s over %s (net pressure coefficients; negative = uplift).",
		plural(rows, "zone result", "zone results"), plural(len(zones), "zone", "zones"))}
	if worstZone != "" {
		out = append(out, fmt.Sprintf("The most negative expected block peak is %s, in zone %s.", fix(worst, 2), worstZone))
	}
	if compared > 0 {
		out = append(out, fmt.Sprintf("Agrees with the design value at %d of %s.", agree, plural(compared, "compared zone result", "compared zone results")))
	} else {
		out = append(out, "No zone has a design value ([[zone]] design_cp): no design comparison.")
	}
	return out
}

// zonePlot draws each zone's net Cp mean per block with U95 bars (blocks
// spread within the zone's column, not averaged: they share calibration
// errors) and the zone's design value with its expanded uncertainty.
func (r *Report) zonePlot() (*figure, error) {
	p, _, err := r.drawZones()
	if p == nil || err != nil {
		return nil, err
	}
	svg, err := svgOf(p)
	if err != nil {
		return nil, fmt.Errorf("zone plot: %w", err)
	}
	return &figure{SVG: svg, Alt: "net pressure coefficient per roof zone, each block with U95 bars, beside the design value",
		Caption: "Net Cp (external − internal, area-weighted over the zone's taps) of each block, bars ± U95, and the zone's design value (square) with its expanded uncertainty."}, nil
}

// drawZones builds the zone plot and counts the rows left out (no zone or
// no Cp mean). The plot is nil when no row has both.
func (r *Report) drawZones() (p *plot.Plot, left int, err error) {
	var zones []string
	col := map[string]int{}
	count := map[string]int{}
	var meas, design errPts
	done := map[string]bool{}
	for _, s := range r.Segments {
		if s.Tap != "" {
			continue // per-tap rows are in the tap map
		}
		if s.Zone == "" || !measured(s.CpMean) {
			left++
			continue
		}
		i, ok := col[s.Zone]
		if !ok {
			i = len(zones)
			col[s.Zone] = i
			zones = append(zones, s.Zone)
		}
		off := -0.25 + 0.05*float64(count[s.Zone]%11)
		count[s.Zone]++
		meas.add(float64(i)+off, s.CpMean.X, 0, u95Of(s.CpMean))
		if !done[s.Zone] && measured(s.DesignCp) {
			done[s.Zone] = true
			design.add(float64(i)+0.35, s.DesignCp.X, 0, s.DesignCp.U95())
		}
	}
	if len(zones) == 0 {
		return nil, left, nil
	}
	p = newPlot("Net pressure coefficient per zone", "zone", "net Cp (negative = uplift)")
	p.NominalX(zones...)
	_, _, ymin, ymax := meas.bounds()
	if len(design.XYs) > 0 {
		_, _, dlo, dhi := design.bounds()
		ymin, ymax = math.Min(ymin, dlo), math.Max(ymax, dhi)
	}
	p.X.Min, p.X.Max = -0.6, float64(len(zones))-0.4
	p.Y.Min, p.Y.Max = padY(ymin, ymax)
	if err := addPoints(p, &meas, false, "block mean ± U95"); err != nil {
		return nil, left, fmt.Errorf("zone plot: %w", err)
	}
	if len(design.XYs) > 0 {
		sc, err := plotter.NewScatter(design.XYs)
		if err != nil {
			return nil, left, fmt.Errorf("zone plot: %w", err)
		}
		sc.GlyphStyle.Color, sc.GlyphStyle.Shape, sc.GlyphStyle.Radius = colDesign, draw.BoxGlyph{}, vg.Points(3)
		eb, err := plotter.NewYErrorBars(struct {
			plotter.XYs
			plotter.YErrors
		}{design.XYs, design.YErrors})
		if err != nil {
			return nil, left, fmt.Errorf("zone plot: %w", err)
		}
		eb.LineStyle.Color = colDesign
		p.Add(eb, sc)
		p.Legend.Add("design value ± its expanded uncertainty", sc)
	}
	p.Legend.Top = false
	return p, left, nil
}
