package report

import (
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	"liftyard/estimate"
	"liftyard/rig"
)

// The rotor section (issue 12): C_L, C_D and L/D against the spin ratio
// S = ωR/V, the fitted C_L(S) with its U95 band and the design values.

// fitSpin fits C_L(S) for a rotor run (estimate.FitSpinCurve).
func (r *Report) fitSpin() {
	if !r.section().spin {
		return
	}
	c, err := estimate.FitSpinCurve(r.Segments)
	if err != nil {
		r.SpinCurveProblem = "no C_L(S) curve: " + err.Error()
		r.Notes = append(r.Notes, r.SpinCurveProblem)
		return
	}
	r.SpinCurve = &c
}

// loadSpinDesign reads a rotor's design against the spin ratio (the
// [lift] design CSV, relative to rigDir).
func (r *Report) loadSpinDesign(rigDir string) {
	d := r.Rig.Lift.Design
	f, err := rig.OpenInDir(rigDir, d)
	if err != nil {
		r.DesignProblem = fmt.Sprintf("the design curve %q named in the rig file cannot be read (%v); give the rig file's folder with --rig-dir", d, unwrapPath(err))
		return
	}
	defer f.Close()
	c, err := estimate.ParseSpinDesignCurve(f, d)
	if err != nil {
		r.DesignProblem = "the design curve cannot be used: " + err.Error()
		return
	}
	r.SpinDesign = c
}

// drawSpinExtras adds the fitted C_L(S) with its U95 band and the design
// values against S to a rotor's lift plot.
func (r *Report) drawSpinExtras(p *plot.Plot, caption []string) ([]string, error) {
	if c := r.SpinCurve; c != nil {
		var mid, lo, hi plotter.XYs
		const n = 60
		for i := range n + 1 {
			s := c.SpinMin + (c.SpinMax-c.SpinMin)*float64(i)/n
			v, ok := c.At(s)
			if !ok {
				continue
			}
			u := v.U95()
			mid = append(mid, plotter.XY{X: s, Y: v.X})
			lo = append(lo, plotter.XY{X: s, Y: v.X - u})
			hi = append(hi, plotter.XY{X: s, Y: v.X + u})
		}
		if err := addCurve(p, mid, colFit, nil, "fitted C_L(S)"); err != nil {
			return caption, err
		}
		dots := []vg.Length{vg.Points(1.5), vg.Points(2)}
		if err := addCurve(p, lo, colFit, dots, "fit ± U95"); err != nil {
			return caption, err
		}
		if err := addCurve(p, hi, colFit, dots, ""); err != nil {
			return caption, err
		}
		caption = append(caption, "Solid line: "+c.Describe()+"; dotted: its U95 band (docs/physics.md \"Spin ratio\").")
	}
	if d := r.SpinDesign; d != nil {
		var line plotter.XYs
		for i, s := range d.SpinRatio {
			line = append(line, plotter.XY{X: s, Y: d.CL[i]})
		}
		if err := addCurve(p, line, colDesign, []vg.Length{vg.Points(5), vg.Points(3)}, "design"); err != nil {
			return caption, err
		}
		caption = append(caption, "Dashed line: the design values against S ("+d.Describe()+").")
	}
	return caption, nil
}

// spinDragPlot draws C_D against the spin ratio with U95 bars.
func (r *Report) spinDragPlot() (*figure, error) {
	var pts errPts
	for _, s := range r.Segments {
		if !measured(s.CD) || !finite(s.SpinRatio) {
			continue
		}
		pts.add(s.SpinRatio, s.CD.X, spinU95(&s), u95Of(s.CD))
	}
	return r.spinPlot(&pts, "Drag coefficient", "C_D", "measured C_D ± U95", "Points: segment means; bars: ± U95 of C_D and of S.")
}

// liftDragPlot draws L/D = C_L/C_D against the spin ratio; its U95 is
// propagated from C_L and C_D as independent (an upper bound: their
// common q and area errors cancel in the ratio).
func (r *Report) liftDragPlot() (*figure, error) {
	var pts errPts
	for _, s := range r.Segments {
		if !measured(s.CD) || !measured(s.CL) || !finite(s.SpinRatio) || s.CD.X == 0 {
			continue
		}
		ld := s.CL.X / s.CD.X
		u := math.Abs(ld) * math.Hypot(u95Of(s.CL)/s.CL.X, u95Of(s.CD)/s.CD.X)
		if s.CL.X == 0 {
			u = u95Of(s.CL) / math.Abs(s.CD.X)
		}
		pts.add(s.SpinRatio, ld, spinU95(&s), u)
	}
	return r.spinPlot(&pts, "Lift-to-drag ratio", "L/D", "measured L/D ± U95",
		"Points: C_L/C_D of each segment; bars: U95 from those of C_L and C_D taken as independent (their common q and area errors cancel in the ratio, so the bars are an upper bound).")
}

// spinPlot draws pts against the spin ratio.
func (r *Report) spinPlot(pts *errPts, title, yLabel, legend, caption string) (*figure, error) {
	if len(pts.XYs) == 0 {
		return nil, nil
	}
	p := newPlot(title, "spin ratio S = ωR/V", yLabel)
	xmin, xmax, ymin, ymax := pts.bounds()
	p.X.Min, p.X.Max = pad(xmin, xmax)
	p.Y.Min, p.Y.Max = padY(ymin, ymax)
	if err := addPoints(p, pts, true, legend); err != nil {
		return nil, fmt.Errorf("%s plot: %w", strings.ToLower(title), err)
	}
	svg, err := svgOf(p)
	if err != nil {
		return nil, fmt.Errorf("%s plot: %w", strings.ToLower(title), err)
	}
	return &figure{SVG: svg, Caption: caption, Alt: strings.ToLower(title) + " against spin ratio with U95 error bars"}, nil
}

// rotorCount opens the summary of a rotor run: how many steady segments
// have C_L, over which spin ratios, the fitted curve and how the points
// compare with the design values against S.
func rotorCount(r *Report) []string {
	if len(r.Segments) == 0 {
		return []string{noSegments}
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	agree, compared := 0, 0
	for _, s := range r.Segments {
		if measured(s.CL) && finite(s.SpinRatio) {
			lo, hi = math.Min(lo, s.SpinRatio), math.Max(hi, s.SpinRatio)
		}
		if ok, done := estimate.Agrees(s.En); done {
			compared++
			if ok {
				agree++
			}
		}
	}
	n := r.withCL()
	out := []string{fmt.Sprintf("%s with C_L.", plural(n, "steady segment", "steady segments"))}
	if n > 0 {
		out[0] = fmt.Sprintf("%s with C_L, at spin ratios S = %s to %s.", plural(n, "steady segment", "steady segments"), fix(lo, 2), fix(hi, 2))
	}
	if c := r.SpinCurve; c != nil {
		out = append(out, "C_L(S) fitted by a "+c.Describe()+".")
	}
	if compared > 0 {
		out = append(out, fmt.Sprintf("%d of %d compared segments agree with the design at their spin ratio (|En| ≤ 1).", agree, compared))
	}
	return out
}

// spinU95 is the U95 of a segment's spin ratio, 0 when none was computed
// (rows stored before issue 12).
func spinU95(s *estimate.Segment) float64 {
	if !(s.SpinRatioU > 0) {
		return 0
	}
	return s.SpinRatioValue().U95()
}

// spinDesignView fills the design comparison of a rotor: each segment is
// compared with the design at its own spin ratio (En in the segment
// table), and the verdict counts them.
func (r *Report) spinDesignView(v *view) {
	agree, disagree, outside := 0, 0, 0
	for _, s := range r.Segments {
		if !measured(s.CL) {
			continue
		}
		switch ok, done := estimate.Agrees(s.En); {
		case !done:
			outside++
		case ok:
			agree++
		default:
			disagree++
		}
	}
	verdict := estimate.VerdictNone
	switch {
	case disagree > 0:
		verdict = estimate.VerdictDisagrees
	case agree > 0:
		verdict = estimate.VerdictAgrees
	}
	v.DesignDesc = r.SpinDesign.Describe() + ", compared at each segment's spin ratio"
	v.Verdict = fmt.Sprintf("%s (%d points agree, %d disagree, %d outside the design's range)", verdict, agree, disagree, outside)
	v.VerdictClass = strings.ReplaceAll(verdict, " ", "-")
	v.Reasons = []string{"U_d includes the spin ratio's U95 through the design's slope dC_L/dS (estimate.SpinDesignAt); a design is not extrapolated beyond its spin ratios."}
}
