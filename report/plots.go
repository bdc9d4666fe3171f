package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// Plot size: fits the text width of A4 and Letter with 15 mm margins.
const (
	plotW = 6.8 * vg.Inch
	plotH = 3.6 * vg.Inch
)

// Colours of the series (our own choice; dark enough to print in grey).
var (
	colPoints = color.RGBA{R: 0x1f, G: 0x3a, B: 0x93, A: 0xff} // measured points
	colFit    = color.RGBA{R: 0xb3, G: 0x40, B: 0x00, A: 0xff} // fitted line
	colDesign = color.RGBA{R: 0x2e, G: 0x7d, B: 0x32, A: 0xff} // design curve
	colBand   = color.RGBA{R: 0xdd, G: 0xee, B: 0xdd, A: 0xff} // |En| ≤ 1 band
	colGrid   = color.RGBA{R: 0xd8, G: 0xd8, B: 0xd8, A: 0xff}
)

// measured reports whether v holds a measurement: the zero Value means "not
// measured" (calibrate.Value) and NaN "could not be computed".
func measured(v calibrate.Value) bool {
	return v != (calibrate.Value{}) && finite(v.X)
}

// u95Of returns the expanded uncertainty of v, NaN when v is not measured.
func u95Of(v calibrate.Value) float64 {
	if !measured(v) {
		return math.NaN()
	}
	return v.U95()
}

// errPts is points with error bars in x and y (Low/High are offsets).
type errPts struct {
	plotter.XYs
	plotter.XErrors
	plotter.YErrors
}

func (e *errPts) add(x, y, ux, uy float64) {
	if !finite(ux) {
		ux = 0
	}
	if !finite(uy) {
		uy = 0
	}
	e.XYs = append(e.XYs, plotter.XY{X: x, Y: y})
	e.XErrors = append(e.XErrors, struct{ Low, High float64 }{ux, ux})
	e.YErrors = append(e.YErrors, struct{ Low, High float64 }{uy, uy})
}

// bounds returns the extent of the points including their bars.
func (e *errPts) bounds() (xmin, xmax, ymin, ymax float64) {
	xmin, xmax, ymin, ymax = math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	for i, p := range e.XYs {
		xmin, xmax = min(xmin, p.X-e.XErrors[i].Low), max(xmax, p.X+e.XErrors[i].High)
		ymin, ymax = min(ymin, p.Y-e.YErrors[i].Low), max(ymax, p.Y+e.YErrors[i].High)
	}
	return
}

// newPlot makes a plot with our fonts, grid and legend placement. Titles
// and labels are our own words: no user string goes into a plot.
func newPlot(title, xLabel, yLabel string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = xLabel
	p.Y.Label.Text = yLabel
	g := plotter.NewGrid()
	g.Vertical.Color, g.Horizontal.Color = colGrid, colGrid
	p.Add(g)
	p.Legend.Top = true
	p.Legend.Left = true
	// Sans-serif throughout, like the page; the SVG names the font and the
	// viewer substitutes its own sans-serif when Liberation is missing.
	p.Title.TextStyle.Font = sans(12)
	p.X.Label.TextStyle.Font, p.Y.Label.TextStyle.Font = sans(11), sans(11)
	p.X.Tick.Label.Font, p.Y.Tick.Label.Font = sans(9.5), sans(9.5)
	p.Legend.TextStyle.Font = sans(10)
	p.Legend.Padding = vg.Points(3) // room between entries for a subscript
	return p
}

func sans(pt float64) font.Font {
	return font.Font{Typeface: "Liberation", Variant: "Sans", Size: vg.Points(pt)}
}

// pad sets an axis range to lo..hi plus 6 % on each side.
func pad(lo, hi float64) (float64, float64) {
	m := 0.06 * (hi - lo)
	if !(m > 0) {
		m = 0.5 * max(math.Abs(lo), 1)
	}
	return lo - m, hi + m
}

// padY is pad with room at the top for the legend (top left), so no
// legend line covers a point.
func padY(lo, hi float64) (float64, float64) {
	l, h := pad(lo, hi)
	return l, h + 0.22*(h-l)
}

// addPoints draws points with error bars (x bars only when xBars).
func addPoints(p *plot.Plot, pts *errPts, xBars bool, legend string) error {
	return drawPoints(p, pts, xBars, colPoints, draw.CircleGlyph{}, vg.Points(2.5), legend)
}

// drawPoints draws points in colour col with glyph shape, their U95 bars
// in y (and in x when xBars), and a legend entry.
func drawPoints(p *plot.Plot, pts *errPts, xBars bool, col color.Color, shape draw.GlyphDrawer, radius vg.Length, legend string) error {
	sc, err := plotter.NewScatter(pts.XYs)
	if err != nil {
		return err
	}
	sc.GlyphStyle.Color, sc.GlyphStyle.Shape, sc.GlyphStyle.Radius = col, shape, radius
	yb, err := plotter.NewYErrorBars(struct {
		plotter.XYs
		plotter.YErrors
	}{pts.XYs, pts.YErrors})
	if err != nil {
		return err
	}
	yb.LineStyle.Color = col
	p.Add(yb)
	if xBars {
		xb, err := plotter.NewXErrorBars(struct {
			plotter.XYs
			plotter.XErrors
		}{pts.XYs, pts.XErrors})
		if err != nil {
			return err
		}
		xb.LineStyle.Color = col
		p.Add(xb)
	}
	p.Add(sc)
	p.Legend.Add(legend, sc)
	noteData(p, pts.XYs)
	return nil
}

// addCurve draws a line through xys, split where a value is missing.
func addCurve(p *plot.Plot, xys plotter.XYs, c color.Color, dashes []vg.Length, legend string) error {
	var run plotter.XYs
	first := true
	flush := func() error {
		if len(run) < 2 {
			run = nil
			return nil
		}
		l, err := plotter.NewLine(run)
		if err != nil {
			return err
		}
		l.LineStyle.Color = c
		l.LineStyle.Width = vg.Points(1.2)
		l.LineStyle.Dashes = dashes
		p.Add(l)
		noteData(p, run)
		if first && legend != "" {
			p.Legend.Add(legend, l)
			first = false
		}
		run = nil
		return nil
	}
	for _, xy := range xys {
		if !finite(xy.X) || !finite(xy.Y) {
			if err := flush(); err != nil {
				return err
			}
			continue
		}
		run = append(run, xy)
	}
	return flush()
}

// svgOf renders p to SVG without the XML prolog, ready to inline.
func svgOf(p *plot.Plot) (string, error) {
	placeLegend(p)
	wt, err := p.WriterTo(plotW, plotH, "svg")
	if err != nil {
		return "", err
	}
	var buf bytes.Buffer
	if _, err := wt.WriteTo(&buf); err != nil {
		return "", err
	}
	s := typeset(buf.String())
	if i := strings.Index(s, "<svg"); i >= 0 {
		s = s[i:]
	}
	return s, nil
}

// figure is one rendered plot with its caption.
type figure struct {
	SVG     string // inline SVG (our labels only; see newPlot)
	Caption string
	Alt     string
}

// liftPlot draws C_L against α (or S for a rotor) with U95 bars, the lift
// line over the linear range and the design curve.
func (r *Report) liftPlot() (*figure, error) {
	p, caption, _, err := r.drawLift()
	if p == nil || err != nil {
		return nil, err
	}
	svg, err := svgOf(p)
	if err != nil {
		return nil, fmt.Errorf("lift plot: %w", err)
	}
	return &figure{SVG: svg, Caption: strings.Join(caption, " "), Alt: "lift coefficient against " + p.X.Label.Text + " with U95 error bars"}, nil
}

// drawLift builds the lift plot and its caption sentences, and counts the
// segments left out (no C_L or no abscissa). The plot is nil when no
// segment has both.
func (r *Report) drawLift() (p *plot.Plot, caption []string, left int, err error) {
	spin := r.section().spin
	xLabel := "angle of attack α [°]"
	if spin {
		xLabel = "spin ratio S = ωR/V"
	}
	var pts errPts
	for _, s := range r.Segments {
		xv, ux := rig.Deg(s.AlphaRad.X), rig.Deg(u95Of(s.AlphaRad))
		if spin {
			xv, ux = s.SpinRatio, spinU95(&s)
		}
		if !finite(xv) || !measured(s.CL) {
			left++
			continue
		}
		pts.add(xv, s.CL.X, ux, u95Of(s.CL))
	}
	if len(pts.XYs) == 0 {
		return nil, nil, left, nil
	}
	p = newPlot("Lift coefficient", xLabel, "C_L")
	xmin, xmax, ymin, ymax := pts.bounds()
	p.X.Min, p.X.Max = pad(xmin, xmax)
	p.Y.Min, p.Y.Max = padY(ymin, ymax)
	caption = append(caption, "Points: segment means; bars: ± U95 of C_L (and of α).")
	if err := addPoints(p, &pts, true, "measured C_L ± U95"); err != nil {
		return nil, nil, left, fmt.Errorf("lift plot: %w", err)
	}
	if spin {
		caption[0] = "Points: segment means; bars: ± U95 of C_L and of S."
		if caption, err = r.drawSpinExtras(p, caption); err != nil {
			return nil, nil, left, fmt.Errorf("lift plot: %w", err)
		}
	}
	if pl := r.Polar; pl != nil {
		line := plotter.XYs{}
		for _, a := range []float64{pl.LinearMinRad, pl.LinearMaxRad} {
			line = append(line, plotter.XY{X: rig.Deg(a), Y: pl.CLAtZeroAlpha.X + pl.SlopePerRad.X*a})
		}
		if err := addCurve(p, line, colFit, nil, "lift line (linear range)"); err != nil {
			return nil, nil, left, fmt.Errorf("lift plot: %w", err)
		}
		caption = append(caption, fmt.Sprintf("Solid line: weighted least-squares lift line over the linear range %s° to %s°.",
			fix(rig.Deg(pl.LinearMinRad), 1), fix(rig.Deg(pl.LinearMaxRad), 1)))
	}
	if r.Design != nil && r.section().design {
		xs := sampleAlpha(p.X.Min, p.X.Max, r.Design)
		var line plotter.XYs
		for _, xd := range xs {
			v, _, ok := r.Design.At(rig.Rad(xd))
			y := math.NaN()
			if ok && v.X >= p.Y.Min && v.X <= p.Y.Max {
				y = v.X
			}
			line = append(line, plotter.XY{X: xd, Y: y})
		}
		if err := addCurve(p, line, colDesign, []vg.Length{vg.Points(5), vg.Points(3)}, "design"); err != nil {
			return nil, nil, left, fmt.Errorf("lift plot: %w", err)
		}
		caption = append(caption, "Dashed line: the design curve (see Design comparison).")
	}
	if left > 0 {
		caption = append(caption, fmt.Sprintf("%d segment(s) without C_L are not shown.", left))
	}
	return p, caption, left, nil
}

// sampleAlpha returns angles in degrees across lo..hi, plus the corners of
// a design curve inside the range, sorted.
func sampleAlpha(lo, hi float64, d estimate.Design) []float64 {
	const n = 120
	xs := make([]float64, 0, n+16)
	for i := range n + 1 {
		xs = append(xs, lo+(hi-lo)*float64(i)/n)
	}
	if c, ok := d.(*estimate.DesignCurve); ok {
		for _, a := range c.AlphaRad {
			if x := rig.Deg(a); x > lo && x < hi {
				xs = append(xs, x)
			}
		}
	}
	sortFloats(xs)
	return xs
}

func sortFloats(xs []float64) {
	for i := 1; i < len(xs); i++ {
		for j := i; j > 0 && xs[j] < xs[j-1]; j-- {
			xs[j], xs[j-1] = xs[j-1], xs[j]
		}
	}
}

// dragPlot draws the drag polar C_L against C_D with bars in both and the
// fitted parabola over the linear range.
func (r *Report) dragPlot() (*figure, error) {
	p := newPlot("Drag polar", "drag coefficient C_D", "C_L")
	var pts errPts
	for _, s := range r.Segments {
		if !measured(s.CD) || !measured(s.CL) {
			continue
		}
		pts.add(s.CD.X, s.CL.X, u95Of(s.CD), u95Of(s.CL))
	}
	if len(pts.XYs) == 0 {
		return nil, nil
	}
	xmin, xmax, ymin, ymax := pts.bounds()
	p.X.Min, p.X.Max = pad(xmin, xmax)
	p.Y.Min, p.Y.Max = padY(ymin, ymax)
	if err := addPoints(p, &pts, true, "measured ± U95"); err != nil {
		return nil, fmt.Errorf("drag plot: %w", err)
	}
	caption := "Points: segment means; bars: ± U95 of C_D and C_L."
	if pl := r.Polar; pl != nil && pl.DragFitted {
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, i := range pl.Linear {
			lo, hi = min(lo, r.Segments[i].CL.X), max(hi, r.Segments[i].CL.X)
		}
		var line plotter.XYs
		const n = 60
		for k := range n + 1 {
			cl := lo + (hi-lo)*float64(k)/n
			d := cl - pl.CLMinD.X
			line = append(line, plotter.XY{X: pl.CD0.X + pl.K.X*d*d, Y: cl})
		}
		if err := addCurve(p, line, colFit, nil, "C_D = C_D0 + K·(C_L − C_L,minD)²"); err != nil {
			return nil, fmt.Errorf("drag plot: %w", err)
		}
		caption += " Solid line: the parabolic drag polar fitted over the linear range."
	}
	svg, err := svgOf(p)
	if err != nil {
		return nil, fmt.Errorf("drag plot: %w", err)
	}
	return &figure{SVG: svg, Caption: caption, Alt: "drag polar: lift coefficient against drag coefficient with U95 error bars"}, nil
}

// enPlot draws the normalised error of each compared point with the band
// |En| ≤ 1 where measurement and design agree.
func (r *Report) enPlot() (*figure, error) {
	c := r.Comparison
	if c == nil {
		return nil, nil
	}
	var xys plotter.XYs
	for _, pt := range c.Points {
		if pt.InDesign && finite(pt.En) {
			xys = append(xys, plotter.XY{X: rig.Deg(pt.AlphaRad), Y: pt.En})
		}
	}
	if len(xys) == 0 {
		return nil, nil
	}
	p := newPlot("Normalised error against the design", "angle of attack α [°]", "E_n")
	xmin, xmax, ymin, ymax := math.Inf(1), math.Inf(-1), -1.5, 1.5
	for _, xy := range xys {
		xmin, xmax = min(xmin, xy.X), max(xmax, xy.X)
		ymin, ymax = min(ymin, xy.Y), max(ymax, xy.Y)
	}
	p.X.Min, p.X.Max = pad(xmin, xmax)
	p.Y.Min, p.Y.Max = padY(ymin, ymax)
	band, err := plotter.NewPolygon(plotter.XYs{{X: p.X.Min, Y: -1}, {X: p.X.Max, Y: -1}, {X: p.X.Max, Y: 1}, {X: p.X.Min, Y: 1}})
	if err != nil {
		return nil, fmt.Errorf("plot of En: %w", err)
	}
	band.Color = colBand
	band.LineStyle.Width = 0
	p.Add(band)
	p.Legend.Add("|E_n| ≤ 1: agrees", band)
	for _, y := range []float64{-1, 1} {
		if err := addCurve(p, plotter.XYs{{X: p.X.Min, Y: y}, {X: p.X.Max, Y: y}}, colDesign, []vg.Length{vg.Points(5), vg.Points(3)}, ""); err != nil {
			return nil, fmt.Errorf("plot of En: %w", err)
		}
	}
	sc, err := plotter.NewScatter(xys)
	if err != nil {
		return nil, fmt.Errorf("plot of En: %w", err)
	}
	sc.GlyphStyle.Color = colPoints
	sc.GlyphStyle.Shape = draw.CircleGlyph{}
	sc.GlyphStyle.Radius = vg.Points(2.5)
	p.Add(sc)
	p.Legend.Add("E_n per point", sc)
	svg, err := svgOf(p)
	if err != nil {
		return nil, fmt.Errorf("plot of En: %w", err)
	}
	return &figure{SVG: svg, Alt: "normalised error En per point with the band from −1 to 1",
		Caption: "E_n = (C_L,measured − C_L,design)/√(U_m² + U_d²) per point; inside the shaded band (|E_n| ≤ 1) measurement and design agree."}, nil
}

// qPlot draws the dynamic pressure of each segment with its U95.
func (r *Report) qPlot() (*figure, error) {
	var pts errPts
	for _, s := range r.Segments {
		if !measured(s.QPa) {
			continue
		}
		pts.add(float64(s.Index), s.QPa.X, 0, u95Of(s.QPa))
	}
	if len(pts.XYs) == 0 {
		return nil, nil
	}
	p := newPlot("Dynamic pressure per segment", "segment", "q [Pa]")
	xmin, xmax, ymin, ymax := pts.bounds()
	p.X.Min, p.X.Max = pad(xmin, xmax)
	p.Y.Min, p.Y.Max = padY(ymin, ymax)
	p.X.Tick.Marker = plot.TickerFunc(func(lo, hi float64) []plot.Tick {
		var ts []plot.Tick
		step := math.Max(1, math.Ceil((hi-lo)/12))
		for v := math.Ceil(lo); v <= hi; v += step {
			ts = append(ts, plot.Tick{Value: v, Label: fix(v, 0)})
		}
		return ts
	})
	if err := addPoints(p, &pts, false, "q ± U95"); err != nil {
		return nil, fmt.Errorf("q plot: %w", err)
	}
	svg, err := svgOf(p)
	if err != nil {
		return nil, fmt.Errorf("q plot: %w", err)
	}
	return &figure{SVG: svg, Alt: "dynamic pressure q per segment with U95 error bars",
		Caption: "Mean dynamic pressure of each steady segment, bars ± U95: a step that stands out was towed or blown at a different speed."}, nil
}
