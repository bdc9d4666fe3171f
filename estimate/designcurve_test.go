package estimate_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// Ensure that a design CSV is read in any row order and column order,
// interpolated linearly inside its range, and gives no value outside.
func TestParseDesignCurve_Interpolates(t *testing.T) {
	const in = "# an invented fin, for this test\ncl,alpha_deg,cl_u95\n0.5,4,0.04\n-0.1,-2,0.02\n0.2,1,0.02\n"
	d, err := estimate.ParseDesignCurve(strings.NewReader(in), "fin.csv")
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name     string
		alphaDeg float64
		ok       bool
		cl, u95  float64
	}{
		{"first row", -2, true, -0.1, 0.02},
		{"between", 2.5, true, 0.35, 0.03},
		{"last row", 4, true, 0.5, 0.04},
		{"below range", -2.01, false, 0, 0},
		{"above range", 4.5, false, 0, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			v, _, ok := d.At(rig.Rad(c.alphaDeg))
			if ok != c.ok {
				t.Fatalf("ok = %v, want %v", ok, c.ok)
			}
			if ok && (math.Abs(v.X-c.cl) > 1e-12 || math.Abs(v.U95()-c.u95) > 1e-12) {
				t.Errorf("C_L %g ± %g, want %g ± %g", v.X, v.U95(), c.cl, c.u95)
			}
		})
	}
}

// Ensure that every bad design file is refused with its line and column.
func TestParseDesignCurve_Errors(t *testing.T) {
	for _, c := range []struct{ name, in, want string }{
		{"empty", "", "d.csv: empty file"},
		{"no header", "1,0.1\n2,0.2\n", `d.csv:1: the first line is not a header with alpha_deg and cl`},
		{"not a number", "alpha_deg,cl\n0,0.1\n2,1.2.3\n", `d.csv:3: column "cl": not a number`},
		{"missing field", "alpha_deg,cl\n0,0.1\n2\n", `d.csv:3: column "cl": missing`},
		{"twice", "alpha_deg,cl\n0,0.1\n2,0.3\n0,0.2\n", `d.csv:4: column "alpha_deg": angle 0° is given twice (also on line 2)`},
		{"negative u", "alpha_deg,cl,cl_u95\n0,0.1,-0.1\n2,0.3,0.1\n", `d.csv:2: column "cl_u95": -0.1 is negative`},
		{"one row", "alpha_deg,cl\n0,0.1\n", "d.csv: 1 data rows"},
		{"NaN", "alpha_deg,cl\n0,NaN\n2,0.3\n", `d.csv:2: column "cl": not a number`},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := estimate.ParseDesignCurve(strings.NewReader(c.in), "d.csv")
			var re *rig.Error
			if err == nil || !strings.HasPrefix(err.Error(), c.want) || !errors.Is(err, estimate.ErrDesignCurve) || !errors.As(err, &re) {
				t.Errorf("err = %v, want prefix %q as a *rig.Error wrapping ErrDesignCurve", err, c.want)
			}
		})
	}
}

// Ensure the thin-airfoil design slopes: 2π/rad for a section (thin-airfoil
// theory, docs/references.md §6.1), the lifting line at AR 6 (3π/2 = 4.7124/rad,
// docs/references.md §6.3 [R]) and Helmbold below AR 4 (2π·AR/(2 + √(AR² + 4)),
// docs/references.md §6.3 [M formula, R values]); at AR 4 the switch is to the
// lifting line.
func TestThinAirfoil_Slope(t *testing.T) {
	for _, c := range []struct {
		name string
		ar   float64
		want float64
	}{
		{"section", 0, 2 * math.Pi},
		{"lifting line AR 6", 6, 3 * math.Pi / 2},
		{"lifting line AR 4", 4, 2 * math.Pi / (1 + 2.0/4)},
		{"Helmbold AR 3", 3, 2 * math.Pi * 3 / (2 + math.Sqrt(13))},
		{"Helmbold AR 1", 1, 2 * math.Pi / (2 + math.Sqrt(5))},
	} {
		t.Run(c.name, func(t *testing.T) {
			d := estimate.ThinAirfoil{AspectRatio: c.ar, AlphaZeroRad: rig.Rad(-2)}
			if got := d.SlopePerRad(); math.Abs(got-c.want) > 1e-12 {
				t.Errorf("slope %.6f, want %.6f", got, c.want)
			}
			v, s, ok := d.At(rig.Rad(-2))
			if !ok || v.X != 0 || s != d.SlopePerRad() {
				t.Errorf("At(α_L0) = %v, %g, %v; want 0 with the slope", v, s, ok)
			}
		})
	}
}

// comparePoints makes segments from (α°, C_L, U95) triples.
func comparePoints(pts ...[3]float64) []estimate.Segment {
	segs := make([]estimate.Segment, len(pts))
	for i, p := range pts {
		segs[i] = estimate.Segment{Index: i,
			AlphaRad: calibrate.Value{X: rig.Rad(p[0]), Dof: math.Inf(1)},
			CL:       calibrate.Value{X: p[1], U: p[2] / 1.959963984540054, Dof: math.Inf(1)}}
	}
	return segs
}

// Ensure the comparison's En (docs/design.md §4), verdict and reasons for the
// patterns a test engineer meets: all agree, stall above the design's
// range, an offset, a slope error, no lift-curve fit and points outside a
// design curve.
func TestCompare(t *testing.T) {
	ta := estimate.ThinAirfoil{} // 2π/rad: 0.10966 per degree
	line := func(deg float64) float64 { return 2 * math.Pi * rig.Rad(deg) }
	curve := &estimate.DesignCurve{Name: "d.csv", AlphaRad: []float64{rig.Rad(-2), rig.Rad(6)}, CL: []float64{line(-2), line(6)}, CLU95: []float64{0, 0}}
	for _, c := range []struct {
		name          string
		design        estimate.Design
		pts           []estimate.Segment
		verdict       string
		agree, dis    int
		reasonContain string
	}{
		{"agrees", ta, comparePoints([3]float64{0, 0.01, 0.02}, [3]float64{4, line(4) - 0.01, 0.02}, [3]float64{8, line(8) + 0.015, 0.02}),
			estimate.VerdictAgrees, 3, 0, "all 3 compared points agree"},
		{"stall", ta, comparePoints([3]float64{0, 0, 0.02}, [3]float64{4, line(4), 0.02}, [3]float64{8, line(8), 0.02},
			[3]float64{10, line(10) - 0.1, 0.02}, [3]float64{12, line(12) - 0.4, 0.02}),
			estimate.VerdictDisagrees, 3, 2, "all at or above 10.0°, with the measured lift below the design: stall"},
		{"offset", ta, comparePoints([3]float64{0, 0.1, 0.02}, [3]float64{4, line(4) + 0.1, 0.02}, [3]float64{8, line(8) + 0.1, 0.02}),
			estimate.VerdictDisagrees, 0, 3, "offset: the zero-lift angle is -0.91"},
		{"steeper", ta, comparePoints([3]float64{-4, line(-4) - 0.1, 0.02}, [3]float64{0, 0, 0.02}, [3]float64{4, line(4) + 0.1, 0.02}),
			estimate.VerdictDisagrees, 1, 2, "steeper than the design"},
		{"two points, no fit", ta, comparePoints([3]float64{0, 0.1, 0.02}, [3]float64{4, line(4) + 0.1, 0.02}),
			estimate.VerdictDisagrees, 0, 2, "an offset or scale error is likely (no lift-curve fit to tell which)"},
		{"outside curve", curve, comparePoints([3]float64{0, 0, 0.02}, [3]float64{8, 1, 0.02}),
			estimate.VerdictAgrees, 1, 0, "1 points lie outside the design's angle range"},
		{"none", curve, comparePoints([3]float64{10, 1, 0.02}), estimate.VerdictNone, 0, 0, "outside"},
	} {
		t.Run(c.name, func(t *testing.T) {
			var fit *estimate.Polar
			if p, err := estimate.FitPolar(c.pts, estimate.PolarOptions{}); err == nil {
				fit = &p
			}
			got := estimate.Compare(c.pts, c.design, fit)
			if got.Verdict != c.verdict || got.Agree != c.agree || got.Disagree != c.dis {
				t.Errorf("verdict %q agree %d disagree %d, want %q %d %d", got.Verdict, got.Agree, got.Disagree, c.verdict, c.agree, c.dis)
			}
			if !strings.Contains(strings.Join(got.Reasons, "\n"), c.reasonContain) {
				t.Errorf("reasons %q lack %q", got.Reasons, c.reasonContain)
			}
		})
	}
}

// Ensure En by its definition, En = (x_m − x_d)/√(U_m² + U_d²) (docs/design.md §4),
// with the angle's U95 carried through the design slope into U_d.
func TestDesignAt_En(t *testing.T) {
	d := estimate.ThinAirfoil{}
	alpha := calibrate.Value{X: rig.Rad(5), U: rig.Rad(0.1), Dof: math.Inf(1)}
	cl := calibrate.Value{X: 0.6, U: 0.01, Dof: math.Inf(1)}
	dv, en, ok := estimate.DesignAt(d, alpha, cl)
	if !ok {
		t.Fatal("no design value")
	}
	ud := 2 * math.Pi * alpha.U95()
	want := (0.6 - 2*math.Pi*rig.Rad(5)) / math.Hypot(cl.U95(), ud)
	if math.Abs(en-want) > 1e-12 || math.Abs(dv.X-2*math.Pi*rig.Rad(5)) > 1e-12 {
		t.Errorf("En %g design %g, want %g %g", en, dv.X, want, 2*math.Pi*rig.Rad(5))
	}
	if _, en, ok := estimate.DesignAt(nil, alpha, cl); ok || !math.IsNaN(en) {
		t.Errorf("nil design gave ok %v En %g", ok, en)
	}
}

// Ensure the Froude number by its definition Fn = V/√(g·L) with standard
// gravity 9.806 65 m/s² (ITTC practice; g0 of ISO 2533, docs/references.md §1.1).
func TestFroude(t *testing.T) {
	for _, c := range []struct {
		name       string
		v, l, want float64
	}{
		{"foil chord 0.15 m at 2 m/s", 2, 0.15, 2 / math.Sqrt(9.80665*0.15)},
		{"Fn 1 at V² = gL", math.Sqrt(9.80665 * 4), 4, 1},
		{"no length", 2, 0, math.NaN()},
	} {
		t.Run(c.name, func(t *testing.T) {
			got := estimate.Froude(c.v, c.l)
			if math.IsNaN(c.want) != math.IsNaN(got) || (!math.IsNaN(got) && math.Abs(got-c.want) > 1e-12) {
				t.Errorf("Fn = %g, want %g", got, c.want)
			}
		})
	}
}

// Ensure that the estimator fills DesignCL and En from Config.Design with
// the same DesignAt as Compare, and Fn only for water rigs.
func TestEstimator_DesignAndFroude(t *testing.T) {
	design := estimate.ThinAirfoil{AspectRatio: 2.5}
	for _, fluid := range []rig.Fluid{rig.FluidAir, rig.FluidFreshWater} {
		t.Run(string(fluid), func(t *testing.T) {
			r := testRig()
			r.Fluid = fluid
			e, err := estimate.NewEstimator(r, estimate.Config{Design: design})
			if err != nil {
				t.Fatal(err)
			}
			segs := feed(t, e, stdSweep.blocks(1))
			if len(segs) != len(stdSweep.stepsDeg) {
				t.Fatalf("%d segments", len(segs))
			}
			fit, err := estimate.FitPolar(segs, estimate.PolarOptions{})
			if err != nil {
				t.Fatal(err)
			}
			cmp := estimate.Compare(segs, design, &fit)
			for i, s := range segs {
				dv, en, _ := estimate.DesignAt(design, s.AlphaRad, s.CL)
				if s.DesignCL != dv || s.En != en || cmp.Points[i].En != en {
					t.Errorf("segment %d: design %v En %g, want %v %g", i, s.DesignCL, s.En, dv, en)
				}
				wantFn := 0.0
				if fluid != rig.FluidAir {
					wantFn = s.SpeedMPerS.X / math.Sqrt(9.80665*r.Reference.LengthM)
				}
				if math.Abs(s.Fn-wantFn) > 1e-12 {
					t.Errorf("segment %d: Fn %g, want %g", i, s.Fn, wantFn)
				}
			}
			// slope 4.6/rad measured vs Helmbold 2.5: 3.03/rad; both ends disagree.
			if cmp.Verdict != estimate.VerdictDisagrees || !cmp.SlopeOut() || !strings.HasPrefix(cmp.Reasons[1], "slope: ") {
				t.Errorf("verdict %q, slope En %.1f: %q; want the slope named", cmp.Verdict, cmp.SlopeEn, cmp.Reasons)
			}
			if lv, ok := e.Live(); !ok || (fluid == rig.FluidAir) != (lv.Fn == 0) {
				t.Errorf("live Fn %g for %s", lv.Fn, fluid)
			}
		})
	}
}
