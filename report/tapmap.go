package report

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// tapMean is one tap's mean net Cp over the run's blocks.
type tapMean struct {
	tap    rig.Tap
	cp     float64
	blocks int
}

// tapMeans averages each tap's per-block cp_mean over the run (a plain mean
// of the blocks, for the map's colours only: the table and export keep the
// blocks apart). Taps without a row are left out.
func tapMeans(rg *rig.Rig, segs []estimate.Segment) []tapMean {
	sum, n := map[string]float64{}, map[string]int{}
	for _, s := range segs {
		if s.Tap != "" && measured(s.CpMean) {
			sum[s.Tap] += s.CpMean.X
			n[s.Tap]++
		}
	}
	var out []tapMean
	for _, t := range rg.Taps {
		if n[t.Name] == 0 {
			continue
		}
		out = append(out, tapMean{tap: t, cp: sum[t.Name] / float64(n[t.Name]), blocks: n[t.Name]})
	}
	return out
}

// cpColour maps a net Cp to our map's colour scale: deep red for the most
// suction (Cp ≤ lo), through pale yellow, to blue for the most positive.
func cpColour(cp, lo, hi float64) color.RGBA {
	f := 0.5
	if hi > lo {
		f = (cp - lo) / (hi - lo)
	}
	f = math.Max(0, math.Min(1, f))
	type rgb struct{ r, g, b float64 }
	stops := []rgb{{0xa5, 0x1c, 0x1c}, {0xf2, 0xc8, 0x5b}, {0xf7, 0xf4, 0xe3}, {0x3f, 0x7c, 0xbf}}
	x := f * float64(len(stops)-1)
	i := min(int(x), len(stops)-2)
	t := x - float64(i)
	a, b := stops[i], stops[i+1]
	mix := func(p, q float64) uint8 { return uint8(math.Round(p + t*(q-p))) }
	return color.RGBA{R: mix(a.r, b.r), G: mix(a.g, b.g), B: mix(a.b, b.b), A: 0xff}
}

// drawTapMap builds the plan of the roof: each tap at its x_m, y_m as a
// disc coloured by its mean net Cp over the blocks, labelled with its name,
// and a legend of five steps of the colour scale. nil when no tap has a
// per-tap row.
func drawTapMap(rg *rig.Rig, segs []estimate.Segment) *plot.Plot {
	if rg == nil {
		return nil
	}
	taps := tapMeans(rg, segs)
	if len(taps) == 0 {
		return nil
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, t := range taps {
		lo, hi = math.Min(lo, t.cp), math.Max(hi, t.cp)
	}
	p := newPlot("Tap map: mean net Cp of each tap", "x [m]", "y [m]")
	p.Legend.Top, p.Legend.Left = false, false
	var xs, ys []float64
	labels := plotter.XYLabels{}
	for _, t := range taps {
		xy, err := plotter.NewScatter(plotter.XYs{{X: t.tap.XM, Y: t.tap.YM}})
		if err != nil {
			continue
		}
		xy.GlyphStyle = draw.GlyphStyle{Shape: draw.CircleGlyph{}, Radius: vg.Points(9), Color: cpColour(t.cp, lo, hi)}
		ring, _ := plotter.NewScatter(plotter.XYs{{X: t.tap.XM, Y: t.tap.YM}})
		ring.GlyphStyle = draw.GlyphStyle{Shape: draw.RingGlyph{}, Radius: vg.Points(9), Color: colPoints}
		p.Add(xy, ring)
		xs, ys = append(xs, t.tap.XM), append(ys, t.tap.YM)
		labels.XYs = append(labels.XYs, plotter.XY{X: t.tap.XM, Y: t.tap.YM})
		labels.Labels = append(labels.Labels, fmt.Sprintf("%s %.2f", t.tap.Name, t.cp))
	}
	if l, err := plotter.NewLabels(labels); err == nil {
		for i := range l.TextStyle {
			l.TextStyle[i].Font = sans(8)
			l.Offset = vg.Point{X: vg.Points(11), Y: vg.Points(-3)}
		}
		p.Add(l)
	}
	for k := range 5 {
		v := lo + float64(k)/4*(hi-lo)
		sw, err := plotter.NewScatter(plotter.XYs{})
		if err != nil {
			continue
		}
		sw.GlyphStyle = draw.GlyphStyle{Shape: draw.CircleGlyph{}, Radius: vg.Points(5), Color: cpColour(v, lo, hi)}
		p.Legend.Add(fmt.Sprintf("Cp %.2f", v), sw)
	}
	xlo, xhi := minMax(xs)
	ylo, yhi := minMax(ys)
	p.X.Min, p.X.Max = pad(xlo, xhi+0.35*(xhi-xlo+1))
	p.Y.Min, p.Y.Max = pad(ylo, yhi)
	return p
}

func minMax(v []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, x := range v {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	return lo, hi
}

// tapMap is the report's figure of the tap map; nil without per-tap rows
// or a stored rig file (older runs).
func (r *Report) tapMap() (*figure, error) {
	p := drawTapMap(r.Rig, r.Segments)
	if p == nil {
		return nil, nil
	}
	svg, err := svgOf(p)
	if err != nil {
		return nil, fmt.Errorf("tap map: %w", err)
	}
	return &figure{SVG: svg, Alt: "plan of the roof with each pressure tap at its position, coloured by its mean net pressure coefficient",
		Caption: "Each tap at its x_m, y_m from the rig file, coloured by its net Cp on the block's mean q, averaged over the blocks (red = most suction). Per-block tap values are in the export."}, nil
}

// TapMapSVG renders the tap map of a roof run as a standalone SVG (the
// dashboard serves it): rg is the run's rig (rig.Parse of run.RigTOML).
// Without per-tap rows the map is an empty frame that says so.
func TapMapSVG(run storage.Run, rg *rig.Rig, segs []estimate.Segment) ([]byte, error) {
	p := drawTapMap(rg, segs)
	if p == nil {
		p = emptyPlot("Tap map", "x [m] — no per-tap results in this run", "y [m]")
	}
	p.Title.Text = fmt.Sprintf("Run %d: %s", run.ID, p.Title.Text)
	return standaloneSVG(p)
}
