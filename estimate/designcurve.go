package estimate

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"liftyard/calibrate"
	"liftyard/rig"
)

// Design gives the design (predicted) lift coefficient of a body at an angle
// of attack. Implementations are immutable and safe for concurrent use.
type Design interface {
	// At returns the design C_L at α (rad) as a Value holding its standard
	// uncertainty, the local design slope dC_L/dα per rad, and ok = false
	// when the design has no value at α (outside a curve's range).
	At(alphaRad float64) (cl calibrate.Value, slopePerRad float64, ok bool)
	// Describe says in a few words what the design is, for reports.
	Describe() string
}

// ErrDesignCurve is returned (wrapped in a *rig.Error) when a design curve
// CSV cannot be read.
var ErrDesignCurve = errors.New("bad design curve")

// designCurveError is a problem in a design curve CSV, printed as
// `foil.csv:4: column "cl": not a number`; the file's content is never
// quoted. col is the column at fault, or "".
func designCurveError(name string, line int, col, format string, args ...any) error {
	if col != "" {
		format = "column %q: " + format
		args = append([]any{col}, args...)
	}
	return &rig.Error{File: name, Line: line, Key: col, Err: rig.Problem(ErrDesignCurve, format, args...)}
}

// DesignCurve is a design lift curve given as points, interpolated linearly
// in α. It gives no value outside its first and last angle: a design is not
// extrapolated.
type DesignCurve struct {
	Name     string    // where the curve came from (file name)
	AlphaRad []float64 // strictly increasing
	CL       []float64
	CLU95    []float64 // expanded (95 %) uncertainty of each C_L; zeros when the file has none
	// AlphaZeroRad is the design's zero-lift angle as the file states it
	// (a comment line "# alpha_zero_deg = …", optionally with
	// "# alpha_zero_u95_deg = …"); HasAlphaZero is false when the file
	// states none, and Compare then takes the zero crossing of the curve's
	// line over the measured linear range.
	AlphaZeroRad calibrate.Value
	HasAlphaZero bool
}

// ParseDesignCurve reads a design curve CSV:
//
//	# alpha_zero_deg = -2.1
//	alpha_deg,cl[,cl_u95]
//	-4,-0.21,0.02
//	0,0.16,0.02
//
// A header row is required; its columns may come in any order and other
// columns are ignored. Rows may come in any order and are sorted by angle;
// two rows at the same angle, a non-number, a negative cl_u95 or fewer than
// two rows is an error that names the line (and column). name labels
// errors, e.g. the file name.
//
// Lines starting with # are comments. Two comment lines, anywhere in the
// file, are read as settings: "# alpha_zero_deg = x" states the design's
// zero-lift angle in degrees, and "# alpha_zero_u95_deg = u" its expanded
// uncertainty (default 0). Any other comment is ignored, so a file without
// them reads as before.
func ParseDesignCurve(r io.Reader, name string) (*DesignCurve, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, designCurveError(name, 0, "", "%v", err)
	}
	settings, err := designSettings(data, name)
	if err != nil {
		return nil, err
	}
	rows, err := readCurve(data, name, "alpha_deg")
	if err != nil {
		return nil, err
	}
	fail := func(line int, col, format string, args ...any) error {
		return designCurveError(name, line, col, format, args...)
	}
	d := &DesignCurve{Name: name}
	if a0, ok := settings["alpha_zero_deg"]; ok {
		d.AlphaZeroRad = calibrate.Value{X: rig.Rad(a0), U: rig.Rad(settings["alpha_zero_u95_deg"]) / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)}
		d.HasAlphaZero = true
	}
	for i, rw := range rows {
		if i > 0 && rw.a == rows[i-1].a {
			return nil, fail(rw.line, "alpha_deg", "angle %g° is given twice (also on line %d)", rw.a, rows[i-1].line)
		}
		d.AlphaRad = append(d.AlphaRad, rig.Rad(rw.a))
		d.CL = append(d.CL, rw.c)
		d.CLU95 = append(d.CLU95, rw.u)
	}
	return d, nil
}

// curveRow is one data row of a design CSV: the set-point x (in the file's
// unit), C_L and its expanded uncertainty.
type curveRow struct {
	a, c, u float64
	line    int
}

// readCurve reads the header and rows of a design CSV whose set-point
// column is xCol ("alpha_deg" or "spin_ratio"); a header with the other
// set-point says which kind of rig it is for.
func readCurve(data []byte, name, xCol string) ([]curveRow, error) {
	want := xCol + ",cl[,cl_u95]"
	cr := csv.NewReader(bytes.NewReader(data))
	cr.FieldsPerRecord = -1
	cr.TrimLeadingSpace = true
	cr.Comment = '#'
	fail := func(line int, col, format string, args ...any) error {
		return designCurveError(name, line, col, format, args...)
	}
	header, err := cr.Read()
	if err == io.EOF {
		return nil, fail(0, "", "empty file: want a header %s and at least two rows", want)
	}
	if err != nil {
		return nil, csvFail(name, err)
	}
	iA, iC, iU, other := -1, -1, -1, ""
	for i, h := range header {
		switch k := strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))); k {
		case xCol:
			iA = i
		case "cl":
			iC = i
		case "cl_u95":
			iU = i
		case "alpha_deg", "spin_ratio":
			other = k
		}
	}
	line, _ := cr.FieldPos(0)
	switch {
	case iA < 0 && other == "spin_ratio":
		return nil, fail(line, "", "the header is against the spin ratio: such a design is for a rotor rig; a foil's or body's design is alpha_deg,cl[,cl_u95]")
	case iA < 0 && other == "alpha_deg":
		return nil, fail(line, "", "the header is against the angle of attack: a rotor's design is against the spin ratio, spin_ratio,cl[,cl_u95]")
	case iA < 0 || iC < 0:
		return nil, fail(line, "", "the first line is not a header with %s and cl (want %s)", xCol, want)
	}
	var rows []curveRow
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvFail(name, err)
		}
		line, _ := cr.FieldPos(0)
		num := func(i int, col string) (float64, error) {
			if i >= len(rec) {
				return 0, fail(line, col, "missing (the row has %d fields)", len(rec))
			}
			s := strings.TrimSpace(rec[i])
			v, err := strconv.ParseFloat(s, 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				return 0, fail(line, col, "not a number")
			}
			return v, nil
		}
		var rw curveRow
		rw.line = line
		if rw.a, err = num(iA, xCol); err != nil {
			return nil, err
		}
		if rw.c, err = num(iC, "cl"); err != nil {
			return nil, err
		}
		if iU >= 0 {
			if rw.u, err = num(iU, "cl_u95"); err != nil {
				return nil, err
			}
			if rw.u < 0 {
				return nil, fail(line, "cl_u95", "%g is negative (an expanded uncertainty is ≥ 0)", rw.u)
			}
		}
		rows = append(rows, rw)
	}
	if len(rows) < 2 {
		return nil, fail(0, "", "%d data rows: a design curve needs at least two", len(rows))
	}
	sort.SliceStable(rows, func(i, j int) bool { return rows[i].a < rows[j].a })
	return rows, nil
}

// designSettings reads the "# key = value" comment lines of a design CSV
// (alpha_zero_deg, alpha_zero_u95_deg). A setting given twice or with a
// value that is not a number is an error naming its line; other comments
// are ignored.
func designSettings(data []byte, name string) (map[string]float64, error) {
	out := map[string]float64{}
	seen := map[string]int{}
	for i, ln := range strings.Split(string(data), "\n") {
		t := strings.TrimSpace(strings.TrimPrefix(ln, "\ufeff"))
		if !strings.HasPrefix(t, "#") {
			continue
		}
		key, val, ok := strings.Cut(strings.TrimSpace(t[1:]), "=")
		key = strings.ToLower(strings.TrimSpace(key))
		if !ok || (key != "alpha_zero_deg" && key != "alpha_zero_u95_deg") {
			continue
		}
		line := i + 1
		if prev, twice := seen[key]; twice {
			return nil, designCurveError(name, line, "", "%s is given twice (also on line %d)", key, prev)
		}
		seen[key] = line
		v, err := strconv.ParseFloat(strings.TrimSpace(val), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, designCurveError(name, line, "", "%s is not a number", key)
		}
		switch {
		case key == "alpha_zero_deg" && math.Abs(v) > 30:
			return nil, designCurveError(name, line, "", "alpha_zero_deg %g is outside -30 to 30 degrees", v)
		case key == "alpha_zero_u95_deg" && v < 0:
			return nil, designCurveError(name, line, "", "alpha_zero_u95_deg %g is negative (an expanded uncertainty is ≥ 0)", v)
		}
		out[key] = v
	}
	if line, ok := seen["alpha_zero_u95_deg"]; ok && seen["alpha_zero_deg"] == 0 {
		return nil, designCurveError(name, line, "", "alpha_zero_u95_deg without alpha_zero_deg (add # alpha_zero_deg = the zero-lift angle)")
	}
	return out, nil
}

func csvFail(name string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return designCurveError(name, pe.Line, "", "%v", pe.Err)
	}
	return designCurveError(name, 0, "", "%v", err)
}

// At interpolates linearly between the two rows around α; outside the
// curve it returns ok = false. The uncertainty is interpolated the same
// way and returned as a standard uncertainty (U95/1.96, ν = +Inf).
func (d *DesignCurve) At(alphaRad float64) (calibrate.Value, float64, bool) {
	n := len(d.AlphaRad)
	if n < 2 || !(alphaRad >= d.AlphaRad[0] && alphaRad <= d.AlphaRad[n-1]) {
		return calibrate.Value{}, 0, false
	}
	i := sort.SearchFloat64s(d.AlphaRad, alphaRad) // AlphaRad[i-1] < α ≤ AlphaRad[i]
	if i == 0 {
		i = 1
	}
	a0, a1 := d.AlphaRad[i-1], d.AlphaRad[i]
	f := (alphaRad - a0) / (a1 - a0)
	slope := (d.CL[i] - d.CL[i-1]) / (a1 - a0)
	cl := d.CL[i-1] + f*(d.CL[i]-d.CL[i-1])
	u95 := d.CLU95[i-1] + f*(d.CLU95[i]-d.CLU95[i-1])
	return calibrate.Value{X: cl, U: u95 / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)}, slope, true
}

// Describe implements Design.
func (d *DesignCurve) Describe() string {
	n := len(d.AlphaRad)
	if n == 0 {
		return "design curve (empty)"
	}
	s := fmt.Sprintf("design curve %s (%d points, %.1f° to %.1f°", d.Name, n, rig.Deg(d.AlphaRad[0]), rig.Deg(d.AlphaRad[n-1]))
	if d.HasAlphaZero {
		s += fmt.Sprintf(", α_L0 = %.2f°", rig.Deg(d.AlphaZeroRad.X))
	}
	return s + ")"
}

// HelmboldBelowAspectRatio is where ThinAirfoil switches from Prandtl's
// lifting line to Helmbold's formula. Lifting-line theory assumes a long
// wing and overstates the slope of short ones; Helmbold's formula was made
// for low aspect ratios and joins the lifting-line value as AR grows (at
// AR = 4 with a0 = 2π the two differ by 3 %). The switch at 4 is common
// practice (the "AR below about 4" limit of lifting-line theory in
// Anderson, Fundamentals of Aerodynamics, ch. 5: from memory).
const HelmboldBelowAspectRatio = 4.0

// ThinAirfoil is a design lift curve from theory: the section slope of
// thin-airfoil theory, 2π per radian, corrected for finite span by
// Prandtl's lifting line (elliptic loading) or, below aspect ratio
// HelmboldBelowAspectRatio, by Helmbold's formula; C_L = a·(α − α_L0). It
// has no stall: above the stall the measurement leaves it, and Compare says
// so. AspectRatio 0 (or less) means a two-dimensional section (no span
// correction).
type ThinAirfoil struct {
	AspectRatio  float64
	AlphaZeroRad float64 // zero-lift angle (0 for a symmetric section)
}

// SlopePerRad returns the design lift-curve slope.
func (t ThinAirfoil) SlopePerRad() float64 {
	switch {
	case !(t.AspectRatio > 0):
		return ThinAirfoilSlopePerRad
	case t.AspectRatio < HelmboldBelowAspectRatio:
		return HelmboldSlope(ThinAirfoilSlopePerRad, t.AspectRatio)
	default:
		return LiftingLineSlope(ThinAirfoilSlopePerRad, t.AspectRatio)
	}
}

// At implements Design: a value at every angle, exact (U = 0).
func (t ThinAirfoil) At(alphaRad float64) (calibrate.Value, float64, bool) {
	a := t.SlopePerRad()
	return calibrate.Value{X: a * (alphaRad - t.AlphaZeroRad), U: 0, Dof: math.Inf(1)}, a, true
}

// Describe implements Design.
func (t ThinAirfoil) Describe() string {
	switch {
	case !(t.AspectRatio > 0):
		return fmt.Sprintf("thin-airfoil theory, 2π/rad, α_L0 = %.2f°", rig.Deg(t.AlphaZeroRad))
	case t.AspectRatio < HelmboldBelowAspectRatio:
		return fmt.Sprintf("thin-airfoil 2π/rad with Helmbold's correction for AR %.2f: %.3f/rad, α_L0 = %.2f°", t.AspectRatio, t.SlopePerRad(), rig.Deg(t.AlphaZeroRad))
	}
	return fmt.Sprintf("thin-airfoil 2π/rad with lifting-line correction for AR %.2f: %.3f/rad, α_L0 = %.2f°", t.AspectRatio, t.SlopePerRad(), rig.Deg(t.AlphaZeroRad))
}

// DesignAt returns the design value at a measured point and the normalised
// error of the measurement against it,
//
//	En = (C_L,m − C_L,d)/√(U_m² + U_d²)   (docs/design.md §4)
//
// where U_d also carries the angle's uncertainty through the design slope:
// U_d² = U95(C_L,d)² + (dC_L,d/dα · U95(α))², because the design is read at
// a measured angle. design is the design's own value (without the angle
// term). ok is false when d has no value at α. The estimator and Compare
// both use it.
func DesignAt(d Design, alpha, cl calibrate.Value) (design calibrate.Value, en float64, ok bool) {
	if d == nil || !finite(alpha.X) {
		return calibrate.Value{}, math.NaN(), false
	}
	dv, slope, ok := d.At(alpha.X)
	if !ok {
		return calibrate.Value{}, math.NaN(), false
	}
	ua := slope * alpha.U95()
	ud := math.Hypot(dv.U95(), ua)
	um := cl.U95()
	return dv, (cl.X - dv.X) / math.Hypot(um, ud), true
}

// ComparisonPoint is one measured point against the design.
type ComparisonPoint struct {
	Segment  int // Segment.Index
	AlphaRad float64
	CL       calibrate.Value
	DesignCL calibrate.Value // zero Value when InDesign is false
	En       float64         // NaN when InDesign is false
	InDesign bool            // the design has a value at this angle
	Agrees   bool            // |En| ≤ 1
}

// Comparison is the summary of a run against its design.
type Comparison struct {
	Design   string // Design.Describe()
	Points   []ComparisonPoint
	Agree    int // points with |En| ≤ 1
	Disagree int // points with |En| > 1
	Outside  int // points where the design has no value
	Verdict  string
	Reasons  []string // what a test engineer can act on; Reasons[1] is the diagnosis when the verdict is "disagrees"

	// The lift line against the design's, over the measured linear range
	// (LineTested is false without a lift-curve fit or when the design
	// covers too little of that range). The slope tests the scale (angle
	// scale, area, q, span correction); the zero-lift angle tests the offset
	// (angle zero, camber, normal-force zero), which a scale error does not
	// move. Each En is (measured − design)/√(U95_m² + U95_d²).
	LineTested         bool
	SlopePerRad        calibrate.Value // measured lift slope (Polar.SlopePerRad)
	DesignSlopePerRad  calibrate.Value // the design's slope over the linear range
	SlopeEn            float64
	AlphaZeroRad       calibrate.Value // measured zero-lift angle (Polar.AlphaZeroRad)
	DesignAlphaZeroRad calibrate.Value // the design's zero-lift angle
	AlphaZeroEn        float64
}

// Verdicts of a Comparison.
const (
	VerdictAgrees    = "agrees"
	VerdictDisagrees = "disagrees"
	VerdictNone      = "no comparison"
)

// Agrees applies the comparison rule of every result against its design
// value: a measurement agrees when its normalised error |En| ≤ 1 (En =
// (x − X)/√(U_x² + U_X²) with expanded uncertainties, as used in proficiency
// testing, ISO/IEC 17043 and ISO 13528 §9.7). ok is false when en is not a
// number (no comparison made); agrees is then false.
func Agrees(en float64) (agrees, ok bool) {
	if !finite(en) {
		return false, false
	}
	return math.Abs(en) <= 1, true
}

// Compare compares every segment with finite C_L against the design (En per
// point, DesignAt) and sums up. The verdict is "agrees" when every compared
// point has |En| ≤ 1, "disagrees" when any has not, and "no comparison"
// when the design covers none of them.
//
// p is the run's lift-curve fit (FitPolar; nil when there is none: the
// reasons then rest on the pattern of the points alone). Its slope and zero-lift angle are tested against the
// design's over the linear range, each with its own En (see Comparison):
// that tells an offset from a slope error whatever the pattern of the
// points. The reasons name what is out: the zero-lift angle (angle zero,
// the design's camber, normal-force zero) or the slope (angle scale,
// reference area, q calibration, aspect-ratio correction), and a stall the
// design does not model (disagreeing points all above the last agreeing
// one, with the measured lift below the design).
func Compare(segs []Segment, d Design, p *Polar) Comparison {
	c := Comparison{Verdict: VerdictNone, SlopeEn: math.NaN(), AlphaZeroEn: math.NaN()}
	if d != nil {
		c.Design = d.Describe()
	}
	for _, s := range segs {
		if !finite(s.CL.X) || !finite(s.AlphaRad.X) {
			continue
		}
		pt := ComparisonPoint{Segment: s.Index, AlphaRad: s.AlphaRad.X, CL: s.CL, En: math.NaN()}
		if dv, en, ok := DesignAt(d, s.AlphaRad, s.CL); ok {
			pt.DesignCL, pt.En, pt.InDesign = dv, en, true
			pt.Agrees, _ = Agrees(en)
			if pt.Agrees {
				c.Agree++
			} else {
				c.Disagree++
			}
		} else {
			c.Outside++
		}
		c.Points = append(c.Points, pt)
	}
	sort.SliceStable(c.Points, func(i, j int) bool { return c.Points[i].AlphaRad < c.Points[j].AlphaRad })
	if p != nil && d != nil {
		c.testLine(d, *p)
	}
	compared := c.Agree + c.Disagree
	switch {
	case compared == 0:
		c.Verdict = VerdictNone
		if len(c.Points) == 0 {
			c.Reasons = append(c.Reasons, "no steady points to compare")
		}
	case c.Disagree == 0:
		c.Verdict = VerdictAgrees
		c.Reasons = append(c.Reasons, fmt.Sprintf("all %d compared points agree with the design within their uncertainties (|En| ≤ 1)", compared))
		if c.LineTested {
			c.Reasons = append(c.Reasons, c.lineSentence())
		}
	default:
		c.Verdict = VerdictDisagrees
		c.Reasons = append(c.Reasons, c.disagreeReasons(compared)...)
	}
	if c.Outside > 0 {
		c.Reasons = append(c.Reasons, fmt.Sprintf("%d points lie outside the design's angle range: no design value there (a design curve is not extrapolated)", c.Outside))
	}
	return c
}

// designLineSamples is how many angles, evenly spaced over the linear range,
// the design's own line is fitted to.
const designLineSamples = 9

// testLine sets the line tests: the design's slope and zero-lift angle
// over the polar's linear range against the fit's.
//
// The design's line is the least-squares line through the design at
// designLineSamples angles evenly spaced over the linear range (exact for
// thin-airfoil theory). u(slope) comes from the design's u at the two ends
// of the range, taken as independent: √(u_lo² + u_hi²)/(α_hi − α_lo).
// The zero-lift angle is the design curve's own when its file states one
// (DesignCurve.AlphaZeroRad), else −C_L(0)/a of that line, with u from the
// mean design u (as an offset, /a) and the slope's u.
func (c *Comparison) testLine(d Design, p Polar) {
	lo, hi := p.LinearMinRad, p.LinearMaxRad
	if !(hi > lo) || !finite(p.SlopePerRad.X) {
		return
	}
	var xs, ys, us []float64
	for k := range designLineSamples {
		a := lo + (hi-lo)*float64(k)/float64(designLineSamples-1)
		v, _, ok := d.At(a)
		if !ok {
			continue
		}
		xs, ys, us = append(xs, a), append(ys, v.X), append(us, v.U)
	}
	n := len(xs)
	if n < 2 || xs[n-1]-xs[0] < (hi-lo)/2 {
		return // the design covers less than half the linear range
	}
	var mx, my, mu float64
	for i := range xs {
		mx, my, mu = mx+xs[i], my+ys[i], mu+us[i]
	}
	mx, my, mu = mx/float64(n), my/float64(n), mu/float64(n)
	var sxx, sxy float64
	for i := range xs {
		sxx += (xs[i] - mx) * (xs[i] - mx)
		sxy += (xs[i] - mx) * (ys[i] - my)
	}
	b := sxy / sxx
	if !(b != 0) {
		return
	}
	uB := math.Hypot(us[0], us[n-1]) / (xs[n-1] - xs[0])
	c.DesignSlopePerRad = calibrate.Value{X: b, U: uB, Dof: math.Inf(1)}
	a0 := mx - my/b
	c.DesignAlphaZeroRad = calibrate.Value{X: a0, U: math.Hypot(mu/b, my/(b*b)*uB), Dof: math.Inf(1)}
	switch dd := d.(type) {
	case *DesignCurve:
		if dd.HasAlphaZero {
			c.DesignAlphaZeroRad = dd.AlphaZeroRad
		}
	case ThinAirfoil:
		c.DesignAlphaZeroRad = calibrate.Value{X: dd.AlphaZeroRad, Dof: math.Inf(1)} // exact, as its line is
	}
	c.SlopePerRad, c.AlphaZeroRad = p.SlopePerRad, p.AlphaZeroRad
	c.SlopeEn = En(c.SlopePerRad, c.DesignSlopePerRad)
	c.AlphaZeroEn = En(c.AlphaZeroRad, c.DesignAlphaZeroRad)
	c.LineTested = true
}

// lineSentence states both line tests in one sentence.
func (c *Comparison) lineSentence() string {
	return fmt.Sprintf("lift slope %.3f ± %.3f /rad against the design's %.3f (En %+.1f); zero-lift angle %.2f ± %.2f° against the design's %.2f° (En %+.1f)",
		c.SlopePerRad.X, c.SlopePerRad.U95(), c.DesignSlopePerRad.X, c.SlopeEn,
		rig.Deg(c.AlphaZeroRad.X), rig.Deg(c.AlphaZeroRad.U95()), rig.Deg(c.DesignAlphaZeroRad.X), c.AlphaZeroEn)
}

// SlopeOut and OffsetOut report whether the line tests failed (|En| > 1);
// both are false when the line was not tested.
func (c *Comparison) SlopeOut() bool  { return c.LineTested && !(math.Abs(c.SlopeEn) <= 1) }
func (c *Comparison) OffsetOut() bool { return c.LineTested && !(math.Abs(c.AlphaZeroEn) <= 1) }

// disagreeReasons describes what is out: the line tests first, then the
// pattern of the disagreeing points.
func (c *Comparison) disagreeReasons(compared int) []string {
	var bad []ComparisonPoint
	var firstAgree, lastAgree = math.Inf(1), math.Inf(-1)
	for _, p := range c.Points {
		if !p.InDesign {
			continue
		}
		if p.Agrees {
			firstAgree = math.Min(firstAgree, p.AlphaRad)
			lastAgree = math.Max(lastAgree, p.AlphaRad)
		} else {
			bad = append(bad, p)
		}
	}
	out := []string{fmt.Sprintf("%d of %d points disagree (|En| > 1)", len(bad), compared)}
	allBelow, allAbove := true, true
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range bad {
		allBelow = allBelow && p.En < 0
		allAbove = allAbove && p.En > 0
		lo, hi = math.Min(lo, p.AlphaRad), math.Max(hi, p.AlphaRad)
	}
	hasAgree := c.Agree > 0
	var stall string
	switch {
	case hasAgree && allBelow && lo > lastAgree:
		stall = fmt.Sprintf("all at or above %.1f°, with the measured lift below the design: stall (or separation) that the design does not model; compare over the attached range only, or give a design curve that includes the stall", rig.Deg(lo))
	case hasAgree && allBelow && hi < firstAgree:
		stall = fmt.Sprintf("all at or below %.1f°, with the measured lift above the design (less negative): negative stall that the design does not model", rig.Deg(hi))
	}

	if c.LineTested {
		offset := fmt.Sprintf("offset: the zero-lift angle is %.2f ± %.2f° against the design's %.2f ± %.2f° (En %+.1f), so the measured lift curve is shifted by %+.2f°; check the angle zero, the design's zero-lift angle (camber: [lift] design_alpha_zero_deg, or the design CSV's alpha_zero_deg) and the normal-force zero (tare)",
			rig.Deg(c.AlphaZeroRad.X), rig.Deg(c.AlphaZeroRad.U95()), rig.Deg(c.DesignAlphaZeroRad.X), rig.Deg(c.DesignAlphaZeroRad.U95()), c.AlphaZeroEn,
			rig.Deg(c.AlphaZeroRad.X-c.DesignAlphaZeroRad.X))
		word := "steeper"
		if c.SlopeEn < 0 {
			word = "shallower"
		}
		slope := fmt.Sprintf("slope: the lift slope is %.3f ± %.3f /rad against the design's %.3f ± %.3f /rad (En %+.1f), %s than the design; check the angle calibration's scale, the reference area, the dynamic-pressure (pitot) calibration and the design's aspect-ratio (span) correction",
			c.SlopePerRad.X, c.SlopePerRad.U95(), c.DesignSlopePerRad.X, c.DesignSlopePerRad.U95(), c.SlopeEn, word)
		switch so, oo := c.SlopeOut(), c.OffsetOut(); {
		case so && oo && math.Abs(c.SlopeEn) >= math.Abs(c.AlphaZeroEn):
			out = append(out, slope, offset)
		case so && oo:
			out = append(out, offset, slope)
		case so:
			out = append(out, slope, fmt.Sprintf("the zero-lift angle agrees with the design (En %+.1f): not an offset", c.AlphaZeroEn))
		case oo:
			out = append(out, offset, fmt.Sprintf("the lift slope agrees with the design (En %+.1f): not a scale error", c.SlopeEn))
		case stall != "":
			out = append(out, stall, c.lineSentence()+": the attached lift curve agrees")
			return out
		default:
			out = append(out, fmt.Sprintf("the lift slope (En %+.1f) and the zero-lift angle (En %+.1f) agree with the design, yet points from %.1f° to %.1f° do not: look at them one by one (unsteady flow, a bad step, a bend the design does not have)",
				c.SlopeEn, c.AlphaZeroEn, rig.Deg(lo), rig.Deg(hi)))
		}
		if stall != "" {
			out = append(out, stall)
		}
		return out
	}

	// Without a line fit only the pattern of the points is left.
	switch {
	case stall != "":
		out = append(out, stall)
	case allAbove && (!hasAgree || (lo <= firstAgree && hi >= lastAgree)):
		out = append(out, "the measured C_L is above the design wherever they disagree: an offset or scale error is likely (no lift-curve fit to tell which); check the reference area, the normal-force zero (tare), the pitot coefficient and the angle zero")
	case allBelow && (!hasAgree || (lo <= firstAgree && hi >= lastAgree)):
		out = append(out, "the measured C_L is below the design wherever they disagree: an offset or scale error is likely (no lift-curve fit to tell which); check the reference area, the normal-force zero (tare), the pitot coefficient (q too high?) and the angle zero")
	default:
		out = append(out, fmt.Sprintf("disagreeing points between %.1f° and %.1f° (no lift-curve fit to tell an offset from a slope error): look at the points one by one", rig.Deg(lo), rig.Deg(hi)))
	}
	return out
}
