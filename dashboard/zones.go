package dashboard

import (
	"bytes"
	"fmt"
	"math"
	"net/http"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Roof returns the roof part of a segment row, nil on a force-balance row
// (for the templates: {{with .Roof}}).
func (s segmentJSON) Roof() *roofView { return s.roof }

// AgreesText is "yes" when |En| ≤ 1, "no" when not, "—" without a design
// value (for the templates).
func (r roofView) AgreesText() string {
	switch {
	case r.Agrees == nil:
		return "—"
	case *r.Agrees:
		return "yes"
	}
	return "no"
}

// zonePlot draws a roof run's zones: each block's net Cp mean of each zone
// with its U95 (one dot per block, spread a little within the zone's
// column), and the zone's design net Cp with its expanded uncertainty.
// Rows without a zone or without a Cp mean are left out and counted in the
// caption. Blocks are not averaged: their U95 share calibration errors, so
// a plain combination would claim too much.
func zonePlot(runID uint64, segs []segmentJSON) ([]byte, error) {
	p := plot.New()
	p.Title.Text = "Run " + strconv.FormatUint(runID, 10) + ": net pressure coefficient per zone (negative = uplift)"
	p.Y.Label.Text = "net Cp"
	p.Add(plotter.NewGrid())

	var zones []string
	col := map[string]int{}
	perZone := map[string]int{}
	var meas, design clU95
	designDone := map[string]bool{}
	dropped := 0
	for _, s := range segs {
		r := s.Roof()
		if r == nil || !finite(r.CpMean) {
			dropped++
			continue
		}
		i, ok := col[r.Zone]
		if !ok {
			i = len(zones)
			col[r.Zone] = i
			zones = append(zones, r.Zone)
		}
		k := perZone[r.Zone]
		perZone[r.Zone]++
		// Spread the blocks over ±0.25 of the column, cycling after 10.
		off := -0.25 + 0.05*float64(k%11)
		u := 0.0
		if finite(r.CpU95) {
			u = float64(r.CpU95)
		}
		meas.XYs = append(meas.XYs, plotter.XY{X: float64(i) + off, Y: float64(r.CpMean)})
		meas.YErrors = append(meas.YErrors, struct{ Low, High float64 }{u, u})
		if !designDone[r.Zone] && finite(r.DesignCp) {
			designDone[r.Zone] = true
			du := 0.0
			if finite(r.DesignCpU95) {
				du = float64(r.DesignCpU95)
			}
			design.XYs = append(design.XYs, plotter.XY{X: float64(i) + 0.35, Y: float64(r.DesignCp)})
			design.YErrors = append(design.YErrors, struct{ Low, High float64 }{du, du})
		}
	}
	xLabel := "zone"
	if dropped > 0 {
		xLabel += fmt.Sprintf(" — %d row(s) without a zone Cp not shown", dropped)
	}
	if len(zones) == 0 {
		xLabel = "zone — no roof blocks yet"
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, -1, 0
	} else {
		p.NominalX(zones...)
		padAxes(p, design, nil)
		lo, hi := p.Y.Min, p.Y.Max
		padAxes(p, meas, nil)
		if len(design.XYs) > 0 {
			p.Y.Min, p.Y.Max = math.Min(lo, p.Y.Min), math.Max(hi, p.Y.Max)
		}
		p.X.Min, p.X.Max = -0.6, float64(len(zones))-0.4
	}
	p.X.Label.Text = xLabel
	for _, set := range []struct {
		pts   clU95
		label string
		shape draw.GlyphDrawer
	}{
		{meas, "block mean, bars ± U95", draw.CircleGlyph{}},
		{design, "design value, bars ± its expanded uncertainty", draw.SquareGlyph{}},
	} {
		if len(set.pts.XYs) == 0 {
			continue
		}
		sc, err := plotter.NewScatter(set.pts)
		if err != nil {
			return nil, fmt.Errorf("zone points: %w", err)
		}
		sc.GlyphStyle.Shape = set.shape
		eb, err := plotter.NewYErrorBars(set.pts)
		if err != nil {
			return nil, fmt.Errorf("zone error bars: %w", err)
		}
		p.Add(sc, eb)
		p.Legend.Add(set.label, sc)
	}
	p.Legend.Top = false
	p.Legend.Left = true
	wt, err := p.WriterTo(7*vg.Inch, 4.5*vg.Inch, "svg")
	if err != nil {
		return nil, fmt.Errorf("zone svg: %w", err)
	}
	var buf bytes.Buffer
	if _, err := wt.WriteTo(&buf); err != nil {
		return nil, fmt.Errorf("zone svg: %w", err)
	}
	return buf.Bytes(), nil
}

// zonesSVG serves GET /runs/{id}/zones.svg, the roof counterpart of the
// polar plot. Not cached: a roof run has few rows (zones × blocks).
func (s *Server) zonesSVG(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	_, segs, err := s.run(id)
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	b, err := zonePlot(id, segs)
	if err != nil {
		s.fail(w, r, fmt.Errorf("run %d: %w", id, err), false)
		return
	}
	w.Header().Set("Content-Type", "image/svg+xml")
	w.Header().Set("Cache-Control", "no-store")
	w.Write(b)
}
