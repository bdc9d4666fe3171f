package estimate_test

import (
	"encoding/csv"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// linePoints makes segments at alphasDeg on C_L = slope·(α − α0) + offset,
// with U95 u95 and seeded Gaussian noise of standard deviation noise.
func linePoints(alphasDeg []float64, slopePerRad, alpha0Deg, offset, u95, noise float64, seed uint64) []estimate.Segment {
	r := rand.New(rand.NewPCG(seed, 17))
	segs := make([]estimate.Segment, len(alphasDeg))
	for i, ad := range alphasDeg {
		cl := slopePerRad*rig.Rad(ad-alpha0Deg) + offset + noise*r.NormFloat64()
		segs[i] = estimate.Segment{Index: i,
			AlphaRad: calibrate.Value{X: rig.Rad(ad), Dof: math.Inf(1)},
			CL:       calibrate.Value{X: cl, U: u95 / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)}}
	}
	return segs
}

func compareFit(t *testing.T, segs []estimate.Segment, d estimate.Design) estimate.Comparison {
	t.Helper()
	p, err := estimate.FitPolar(segs, estimate.PolarOptions{})
	if err != nil {
		t.Fatal(err)
	}
	return estimate.Compare(segs, d, &p)
}

var sweepDeg = []float64{-6, -4, -2, 0, 2, 4, 6, 8, 10}

// Ensure that a measured slope equal to the design's with a constant C_L
// offset (every En ≈ +6.6) is diagnosed as an offset, not a slope (issue
// 10: it was called "shallower than the design … check the angle
// calibration's scale"), and that a slope error through the design's
// zero-lift angle is diagnosed as a slope, not an offset.
func TestCompare_OffsetAndSlopeApart(t *testing.T) {
	design := estimate.ThinAirfoil{AspectRatio: 6} // lifting line: 3π/2 per rad (docs/references.md §6.3)
	a := design.SlopePerRad()
	t.Run("offset", func(t *testing.T) {
		c := compareFit(t, linePoints(sweepDeg, a, 0, 0.132, 0.02, 0.002, 1), design)
		for _, p := range c.Points {
			if math.Abs(p.En-6.6) > 0.5 {
				t.Errorf("En %.2f at %.0f°, want ≈ 6.6", p.En, rig.Deg(p.AlphaRad))
			}
		}
		all := strings.Join(c.Reasons, "\n")
		if !c.OffsetOut() || c.SlopeOut() || !strings.HasPrefix(c.Reasons[1], "offset: ") || strings.Contains(all, "than the design") {
			t.Errorf("slope En %.2f, α_L0 En %.2f, reasons %q; want the offset named and not the slope", c.SlopeEn, c.AlphaZeroEn, c.Reasons)
		}
		// C_L + 0.132 on a slope of a moves the zero-lift angle by −0.132/a.
		if got, want := rig.Deg(c.AlphaZeroRad.X-c.DesignAlphaZeroRad.X), rig.Deg(-0.132/a); math.Abs(got-want) > 0.05 {
			t.Errorf("shift %.3f°, want %.3f°", got, want)
		}
	})
	t.Run("slope", func(t *testing.T) {
		c := compareFit(t, linePoints(sweepDeg, 0.9*a, 0, 0, 0.02, 0.002, 2), design)
		if !c.SlopeOut() || c.OffsetOut() || !strings.HasPrefix(c.Reasons[1], "slope: ") || !strings.Contains(c.Reasons[1], "shallower") {
			t.Errorf("slope En %.2f, α_L0 En %.2f, reasons %q; want the slope named (shallower), not an offset", c.SlopeEn, c.AlphaZeroEn, c.Reasons)
		}
	})
}

// Ensure that a cambered foil agrees with a thin-airfoil design given its
// zero-lift angle, and disagrees by an offset of that angle without it. The
// foil is the thin-airfoil section of the NACA 2412 mean line: 2π per rad,
// α_L0 = −2.077° (thin-airfoil theory, Glauert; Anderson, Fundamentals of
// Aerodynamics, ch. 4; docs/references.md §6.1 [R]), measured with C_L
// noise 0.005 (seeded). The same line given as a design CSV that states its
// zero-lift angle agrees too, and the stated angle is the one tested.
func TestCompare_CamberedFoil(t *testing.T) {
	const alphaL0Deg = -2.077
	segs := linePoints(sweepDeg, estimate.ThinAirfoilSlopePerRad, alphaL0Deg, 0, 0.02, 0.005, 2412)
	c := compareFit(t, segs, estimate.ThinAirfoil{AlphaZeroRad: rig.Rad(alphaL0Deg)})
	if c.Verdict != estimate.VerdictAgrees || c.OffsetOut() || c.SlopeOut() {
		t.Errorf("with α_L0: verdict %q, slope En %.2f, α_L0 En %.2f: %q", c.Verdict, c.SlopeEn, c.AlphaZeroEn, c.Reasons)
	}
	c = compareFit(t, segs, estimate.ThinAirfoil{})
	if c.Verdict != estimate.VerdictDisagrees || !c.OffsetOut() || c.SlopeOut() || !strings.HasPrefix(c.Reasons[1], "offset: ") {
		t.Errorf("symmetric design: verdict %q, slope En %.2f, α_L0 En %.2f: %q; want an offset", c.Verdict, c.SlopeEn, c.AlphaZeroEn, c.Reasons)
	}

	var b strings.Builder
	b.WriteString("# the same thin-airfoil line, from -8 to 12 degrees\n# alpha_zero_deg = -2.077\n# alpha_zero_u95_deg = 0.1\nalpha_deg,cl\n")
	for _, ad := range []float64{-8, 12} {
		b.WriteString(strconv.FormatFloat(ad, 'g', -1, 64) + "," + strconv.FormatFloat(estimate.ThinAirfoilSlopePerRad*rig.Rad(ad-alphaL0Deg), 'g', -1, 64) + "\n")
	}
	curve, err := estimate.ParseDesignCurve(strings.NewReader(b.String()), "camber.csv")
	if err != nil {
		t.Fatal(err)
	}
	c = compareFit(t, segs, curve)
	if c.Verdict != estimate.VerdictAgrees || c.OffsetOut() || c.DesignAlphaZeroRad != curve.AlphaZeroRad {
		t.Errorf("design CSV: verdict %q, design α_L0 %v (file: %v), α_L0 En %.2f", c.Verdict, c.DesignAlphaZeroRad, curve.AlphaZeroRad, c.AlphaZeroEn)
	}
	if !strings.Contains(curve.Describe(), "α_L0 = -2.08°") {
		t.Errorf("Describe() = %q", curve.Describe())
	}
}

// Ensure that a design CSV may state its own zero-lift angle in a comment
// line, and that comments of any other kind, and so every design CSV of
// today, read as before: the repository's example curve gives exactly the
// rows a plain CSV read of it gives, and no zero-lift angle.
func TestParseDesignCurve_AlphaZero(t *testing.T) {
	const rows = "alpha_deg,cl\n-2,0\n4,0.6\n"
	for _, c := range []struct {
		name, in    string
		has         bool
		deg, u95Deg float64
		err         string
	}{
		{"none", rows, false, 0, 0, ""},
		{"prose comment", "# zero-lift angle of -1.4 degrees\n# alpha_zero_deg is not stated here\n" + rows, false, 0, 0, ""},
		{"stated", "# alpha_zero_deg = -1.5\n" + rows, true, -1.5, 0, ""},
		{"stated with u, after the rows", rows + "#Alpha_Zero_Deg=-1.5\n# alpha_zero_u95_deg = 0.2\n", true, -1.5, 0.2, ""},
		{"twice", "# alpha_zero_deg = -1\n# alpha_zero_deg = -2\n" + rows, false, 0, 0, "d.csv:2: alpha_zero_deg is given twice (also on line 1)"},
		{"not a number", "# alpha_zero_deg = minus two\n" + rows, false, 0, 0, `d.csv:1: alpha_zero_deg is not a number`},
		{"too large", "# alpha_zero_deg = 45\n" + rows, false, 0, 0, "d.csv:1: alpha_zero_deg 45 is outside -30 to 30 degrees"},
		{"u alone", rows + "# alpha_zero_u95_deg = 0.2\n", false, 0, 0, "d.csv:4: alpha_zero_u95_deg without alpha_zero_deg"},
		{"negative u", "# alpha_zero_deg = 1\n# alpha_zero_u95_deg = -0.2\n" + rows, false, 0, 0, "d.csv:2: alpha_zero_u95_deg -0.2 is negative"},
	} {
		t.Run(c.name, func(t *testing.T) {
			d, err := estimate.ParseDesignCurve(strings.NewReader(c.in), "d.csv")
			if c.err != "" {
				var re *rig.Error
				if err == nil || !strings.HasPrefix(err.Error(), c.err) || !errors.Is(err, estimate.ErrDesignCurve) || !errors.As(err, &re) {
					t.Errorf("err = %v, want prefix %q", err, c.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if d.HasAlphaZero != c.has || math.Abs(rig.Deg(d.AlphaZeroRad.X)-c.deg) > 1e-12 || math.Abs(rig.Deg(d.AlphaZeroRad.U95())-c.u95Deg) > 1e-12 {
				t.Errorf("α_L0 %v (has %v), want %g ± %g (has %v)", d.AlphaZeroRad, d.HasAlphaZero, c.deg, c.u95Deg, c.has)
			}
			if len(d.CL) != 2 || d.CL[1] != 0.6 {
				t.Errorf("rows %v", d.CL)
			}
		})
	}

	path := filepath.Join("..", "testdata", "rigs", "design", "foil-towtank-design.csv")
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	d, err := estimate.ParseDesignCurve(f, path)
	if err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	cr := csv.NewReader(strings.NewReader(string(raw)))
	cr.Comment = '#'
	recs, err := cr.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if d.HasAlphaZero || len(d.CL) != len(recs)-1 {
		t.Fatalf("%s: has α_L0 %v, %d rows; want none and %d rows", path, d.HasAlphaZero, len(d.CL), len(recs)-1)
	}
	for i, rec := range recs[1:] { // the file's rows are in angle order
		a, _ := strconv.ParseFloat(rec[0], 64)
		cl, _ := strconv.ParseFloat(rec[1], 64)
		u, _ := strconv.ParseFloat(rec[2], 64)
		if d.AlphaRad[i] != rig.Rad(a) || d.CL[i] != cl || d.CLU95[i] != u {
			t.Errorf("row %d: %g° %g %g, want %g° %g %g", i, rig.Deg(d.AlphaRad[i]), d.CL[i], d.CLU95[i], a, cl, u)
		}
	}
}
