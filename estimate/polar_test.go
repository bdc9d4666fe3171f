package estimate_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// polarSegs builds polar points at the given angles from a true lift curve
// (and C_D from a parabola), with standard uncertainty uCL on C_L and uCD
// on C_D, and Gaussian noise of those sizes drawn from r (nil: no noise).
func polarSegs(alphasDeg []float64, cl func(aRad float64) float64, cd func(cl float64) float64,
	uCL, uCD float64, r *rand.Rand) []estimate.Segment {
	segs := make([]estimate.Segment, len(alphasDeg))
	for i, ad := range alphasDeg {
		a := rig.Rad(ad)
		c := cl(a)
		d := cd(c)
		if r != nil {
			c += uCL * r.NormFloat64()
			d += uCD * r.NormFloat64()
		}
		segs[i] = estimate.Segment{
			Index:    i,
			AlphaRad: calibrate.Value{X: a, U: 0, Dof: math.Inf(1)},
			CL:       calibrate.Value{X: c, U: uCL, Dof: math.Inf(1)},
			CD:       calibrate.Value{X: d, U: uCD, Dof: math.Inf(1)},
		}
	}
	return segs
}

// stalledCurve is linear up to stallDeg, then falls (an invented foil).
func stalledCurve(slopePerRad, alpha0Deg, stallDeg float64) func(float64) float64 {
	return func(a float64) float64 {
		s := rig.Rad(stallDeg)
		if a <= s {
			return slopePerRad * (a - rig.Rad(alpha0Deg))
		}
		return slopePerRad*(s-rig.Rad(alpha0Deg)) - 3*slopePerRad*(a-s)
	}
}

func parabola(cd0, k, clMinD float64) func(float64) float64 {
	return func(cl float64) float64 { return cd0 + k*(cl-clMinD)*(cl-clMinD) }
}

// Ensure that noise-free points give back the lift slope, zero-lift angle,
// stall, C_L,max and drag polar exactly (synthetic identity).
func TestFitPolar_ExactRecovery(t *testing.T) {
	alphas := []float64{-4, -2, 0, 2, 4, 6, 8, 10, 12, 14, 16}
	segs := polarSegs(alphas, stalledCurve(5.2, -1.8, 12), parabola(0.011, 0.045, 0.15), 0.01, 0.001, nil)
	p, err := estimate.FitPolar(segs, estimate.PolarOptions{})
	if err != nil {
		t.Fatal(err)
	}
	near := func(name string, got, want, tol float64) {
		t.Helper()
		if math.Abs(got-want) > tol {
			t.Errorf("%s = %.12g, want %.12g (±%g)", name, got, want, tol)
		}
	}
	near("slope", p.SlopePerRad.X, 5.2, 1e-9)
	near("alpha_L0 (deg)", rig.Deg(p.AlphaZeroRad.X), -1.8, 1e-9)
	near("linear max (deg)", rig.Deg(p.LinearMaxRad), 12, 1e-9)
	near("linear min (deg)", rig.Deg(p.LinearMinRad), -4, 1e-9)
	if !p.Stalled {
		t.Fatalf("stall not found; warnings %q", p.Warnings)
	}
	near("stall (deg)", rig.Deg(p.StallRad), 12, 1e-9)
	near("CLmax", p.CLMax.X, 5.2*rig.Rad(13.8), 1e-9)
	if !p.DragFitted {
		t.Fatalf("drag polar not fitted: %q", p.Warnings)
	}
	near("CD0", p.CD0.X, 0.011, 1e-9)
	near("K", p.K.X, 0.045, 1e-8)
	near("CL at min drag", p.CLMinD.X, 0.15, 1e-8)
	if p.ChiSq > 1e-12 || p.Scaled {
		t.Errorf("chi² = %g, scaled %v; want 0 for exact points", p.ChiSq, p.Scaled)
	}
	if len(p.Linear) != 9 {
		t.Errorf("linear range holds %d points, want 9 (−4° … 12°)", len(p.Linear))
	}
}

// Ensure statistical coverage of the fitted slope and zero-lift angle: over
// 400 seeds with Gaussian noise of the stated size, the 95 % intervals hold
// the truth 90–99 % of the time, and the mean U95 is within 1.5× of the
// true 95 % spread.
func TestFitPolar_Coverage(t *testing.T) {
	const seeds = 400
	const slope, a0 = 5.0, -1.5
	alphas := []float64{-4, -2, 0, 2, 4, 6, 8, 10, 12}
	var covS, covA int
	var errS, errA []float64
	var sumUS, sumUA float64
	for s := range uint64(seeds) {
		r := rand.New(rand.NewPCG(s, 6))
		segs := polarSegs(alphas, stalledCurve(slope, a0, 30), parabola(0.01, 0.05, 0.1), 0.015, 0.002, r)
		p, err := estimate.FitPolar(segs, estimate.PolarOptions{})
		if err != nil {
			t.Fatal(err)
		}
		es := math.Abs(p.SlopePerRad.X - slope)
		ea := math.Abs(p.AlphaZeroRad.X - rig.Rad(a0))
		errS, errA = append(errS, es), append(errA, ea)
		sumUS += p.SlopePerRad.U95()
		sumUA += p.AlphaZeroRad.U95()
		if es <= p.SlopePerRad.U95() {
			covS++
		}
		if ea <= p.AlphaZeroRad.U95() {
			covA++
		}
	}
	for _, c := range []struct {
		name    string
		covered int
		errs    []float64
		sumU95  float64
	}{{"slope", covS, errS, sumUS}, {"alpha_L0", covA, errA, sumUA}} {
		frac := float64(c.covered) / seeds
		spread := quantileAbs(c.errs, 0.95)
		ratio := c.sumU95 / seeds / spread
		t.Logf("%s: coverage %.3f, mean U95 / true 95 %% spread = %.2f", c.name, frac, ratio)
		if frac < 0.90 || frac > 0.99 {
			t.Errorf("%s: coverage %.3f outside 0.90–0.99", c.name, frac)
		}
		if ratio < 1/1.5 || ratio > 1.5 {
			t.Errorf("%s: mean U95 / true spread = %.2f, want within 1.5×", c.name, ratio)
		}
	}
}

func quantileAbs(x []float64, p float64) float64 {
	s := append([]float64(nil), x...)
	for i := range s {
		s[i] = math.Abs(s[i])
	}
	// insertion sort is enough for a few hundred values
	for i := 1; i < len(s); i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
	return s[int(p*float64(len(s)))-1]
}

// Ensure the symmetric-foil identity: points of a symmetric section, noise
// included, mirrored through the origin (C_L(−α) = −C_L(α)) give α_L0 = 0
// and C_L(0) = 0 to rounding, whatever the noise (thin-airfoil theory: a
// symmetric section has α_L0 = 0; docs/references.md §6.1).
func TestFitPolar_SymmetricFoil(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	var segs []estimate.Segment
	for _, ad := range []float64{2, 4, 6, 8} {
		cl := 0.105*ad + 0.02*r.NormFloat64()
		for _, sgn := range []float64{1, -1} {
			segs = append(segs, estimate.Segment{
				AlphaRad: calibrate.Value{X: sgn * rig.Rad(ad), Dof: math.Inf(1)},
				CL:       calibrate.Value{X: sgn * cl, U: 0.02, Dof: 30},
			})
		}
	}
	p, err := estimate.FitPolar(segs, estimate.PolarOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p.AlphaZeroRad.X) > 1e-12 || math.Abs(p.CLAtZeroAlpha.X) > 1e-12 {
		t.Errorf("alpha_L0 = %g rad, C_L(0) = %g; want 0 for a symmetric foil", p.AlphaZeroRad.X, p.CLAtZeroAlpha.X)
	}
	if !(p.AlphaZeroRad.U > 0) {
		t.Errorf("u(alpha_L0) = %g, want > 0", p.AlphaZeroRad.U)
	}
}

// Ensure the fit recovers published NACA 2412 section data within the
// reading tolerance of the plots: a0 ≈ 0.105 per degree and α_L0 ≈ −2.2°
// (Abbott & von Doenhoff, Theory of Wing Sections, Appendix IV, as read in
// Anderson, Aircraft Performance and Design, 1999, Fig. 2.6; docs/references.md
// §6.2 [C], plot-read: ±0.005/deg and ±0.3°). The points are built from
// those numbers with C_L noise of 0.01 (seeded); the measured slope is below
// the thin-airfoil 2π/rad = 0.1097/deg (docs/references.md §6.1), as real
// sections are.
func TestFitPolar_NACA2412(t *testing.T) {
	const a0PerDeg, alphaL0Deg = 0.105, -2.2
	r := rand.New(rand.NewPCG(2412, 1))
	alphas := []float64{-6, -4, -2, 0, 2, 4, 6, 8, 10}
	segs := polarSegs(alphas, func(a float64) float64 { return a0PerDeg * (rig.Deg(a) - alphaL0Deg) },
		parabola(0.006, 0.006, 0.2), 0.01, 0.0003, r)
	p, err := estimate.FitPolar(segs, estimate.PolarOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if got := p.SlopePerDeg(); math.Abs(got-a0PerDeg) > 0.005 {
		t.Errorf("a0 = %.4f /deg, want 0.105 ± 0.005", got)
	}
	if got := rig.Deg(p.AlphaZeroRad.X); math.Abs(got-alphaL0Deg) > 0.3 {
		t.Errorf("alpha_L0 = %.3f°, want −2.2 ± 0.3°", got)
	}
	if p.SlopePerRad.X+p.SlopePerRad.U95() >= estimate.ThinAirfoilSlopePerRad {
		t.Errorf("slope %.3f ± %.3f /rad not below thin-airfoil 2π", p.SlopePerRad.X, p.SlopePerRad.U95())
	}
}

// Ensure a user-given α range fixes the linear range, and that the fit
// skips unusable points.
func TestFitPolar_Options(t *testing.T) {
	alphas := []float64{-4, -2, 0, 2, 4, 6, 8, 10, 12, 14}
	segs := polarSegs(alphas, stalledCurve(5, -1, 10), parabola(0.01, 0.05, 0.1), 0.01, 0.001, nil)
	segs = append(segs, estimate.Segment{AlphaRad: calibrate.Value{X: 0.01}, CL: calibrate.Value{X: math.NaN(), U: 0.01}})
	p, err := estimate.FitPolar(segs, estimate.PolarOptions{AlphaMinRad: rig.Rad(-0.5), AlphaMaxRad: rig.Rad(6.5)})
	if err != nil {
		t.Fatal(err)
	}
	if !p.Stalled || math.Abs(p.StallRad-rig.Rad(10)) > 1e-12 || strings.Contains(strings.Join(p.Warnings, "\n"), "onset") {
		t.Errorf("stalled %v at %g°, warnings %q; want the stall at 10°", p.Stalled, rig.Deg(p.StallRad), p.Warnings)
	}
	if len(p.Linear) != 4 || p.Points != 10 {
		t.Errorf("linear %v of %d points, want 4 of 10", p.Linear, p.Points)
	}
	if math.Abs(p.SlopePerRad.X-5) > 1e-9 {
		t.Errorf("slope %g, want 5", p.SlopePerRad.X)
	}
}

// Ensure that bad inputs give errors wrapping ErrPolar, not panics.
func TestFitPolar_Errors(t *testing.T) {
	v := func(x, u float64) calibrate.Value { return calibrate.Value{X: x, U: u, Dof: 10} }
	same := []estimate.Segment{{AlphaRad: v(0.1, 0), CL: v(0.5, 0.01)}, {AlphaRad: v(0.1, 0), CL: v(0.5, 0.01)}, {AlphaRad: v(0.1, 0), CL: v(0.6, 0.01)}}
	for _, c := range []struct {
		name string
		segs []estimate.Segment
		opts estimate.PolarOptions
	}{
		{"empty", nil, estimate.PolarOptions{}},
		{"two points", same[:2], estimate.PolarOptions{}},
		{"one angle", same, estimate.PolarOptions{}},
		{"no u", []estimate.Segment{{AlphaRad: v(0, 0), CL: v(0, 0)}, {AlphaRad: v(0.1, 0), CL: v(0.5, 0)}, {AlphaRad: v(0.2, 0), CL: v(1, 0)}}, estimate.PolarOptions{}},
		{"range empty", polarSegs([]float64{0, 2, 4}, stalledCurve(5, 0, 20), parabola(0, 0, 0), 0.01, 0.001, nil),
			estimate.PolarOptions{AlphaMinRad: 1, AlphaMaxRad: 2}},
	} {
		t.Run(c.name, func(t *testing.T) {
			if _, err := estimate.FitPolar(c.segs, c.opts); !errors.Is(err, estimate.ErrPolar) {
				t.Errorf("err = %v, want ErrPolar", err)
			}
		})
	}
}

// Ensure that a lift curve that bends below its line at the last angle but
// still rises is not called stalled: C_L,max is then a lower bound and the
// warnings say the stall has begun.
func TestFitPolar_OnsetOfStall(t *testing.T) {
	alphas := []float64{-4, 0, 4, 8, 12}
	segs := polarSegs(alphas, func(a float64) float64 {
		if a > rig.Rad(11) {
			return 4.2*rig.Rad(12.5) - 10.5*(a-rig.Rad(11))
		}
		return 4.2 * (a - rig.Rad(-1.5))
	}, parabola(0.01, 0.05, 0.1), 0.005, 0.001, nil)
	p, err := estimate.FitPolar(segs, estimate.PolarOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if p.Stalled || !math.IsNaN(p.StallRad) {
		t.Errorf("stalled %v at %g; want no stall", p.Stalled, p.StallRad)
	}
	if w := strings.Join(p.Warnings, "\n"); !strings.Contains(w, "onset of stall") || !strings.Contains(w, "lower bound") {
		t.Errorf("warnings %q", p.Warnings)
	}
	if math.Abs(p.AlphaCLMaxRad-rig.Rad(12)) > 1e-12 {
		t.Errorf("C_L,max at %g°, want the 12° point", rig.Deg(p.AlphaCLMaxRad))
	}
}

// Ensure that an error common to every point of a run — here the reference
// area, off by a random 2 % (1 σ) per run and the same for all its points —
// is carried into the slope's uncertainty in full: the 95 % intervals cover
// the true slope 90–99 % of the time over many runs, and are not inflated.
// Treating the area's share of each point's u as independent (the plain
// weighted fit) would shrink it by about √n and under-cover; the test shows
// that too (JCGM 100 §5.2: correlated input quantities).
func TestFitPolar_SharedAreaErrorCoverage(t *testing.T) {
	const runs = 400
	const slope, a0, uAreaRel, uScatter = 5.0, -1.0, 0.02, 0.004
	alphas := []float64{-4, -2, 0, 2, 4, 6, 8}
	covered, coveredNaive := 0, 0
	var errs []float64
	var sumU95 float64
	for seed := range uint64(runs) {
		r := rand.New(rand.NewPCG(seed, 77))
		areaErr := uAreaRel * r.NormFloat64() // S_assumed = S_true·(1 + areaErr): every C_L comes out ÷(1 + areaErr)
		segs := make([]estimate.Segment, len(alphas))
		naive := make([]estimate.Segment, len(alphas))
		for i, ad := range alphas {
			a := rig.Rad(ad)
			cl := slope*(a-rig.Rad(a0))/(1+areaErr) + uScatter*r.NormFloat64()
			uArea := math.Abs(cl) * uAreaRel // u from the area: |∂C_L/∂S|·u(S) = C_L·u(S)/S
			total := math.Hypot(uScatter, uArea)
			segs[i] = estimate.Segment{
				Index:    i,
				AlphaRad: calibrate.Value{X: a, Dof: math.Inf(1)},
				CL:       calibrate.Value{X: cl, U: total, Dof: math.Inf(1)},
				CLBudget: []estimate.Contribution{
					{Input: "lift scatter (loads and q together) (type A)", U: uScatter, Sensitivity: 1, UY: uScatter, Dof: math.Inf(1), TypeA: true},
					{Input: "reference area", U: uAreaRel, Sensitivity: -cl, UY: uArea, Dof: math.Inf(1)},
				},
			}
			naive[i] = segs[i]
			naive[i].CLBudget = nil // no budget: the whole u counts as independent
		}
		p, err := estimate.FitPolar(segs, estimate.PolarOptions{})
		if err != nil {
			t.Fatal(err)
		}
		e := p.SlopePerRad.X - slope
		errs = append(errs, e)
		sumU95 += p.SlopePerRad.U95()
		if math.Abs(e) <= p.SlopePerRad.U95() {
			covered++
		}
		pn, err := estimate.FitPolar(naive, estimate.PolarOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(pn.SlopePerRad.X-slope) <= pn.SlopePerRad.U95() {
			coveredNaive++
		}
		if seed == 0 {
			names := []string{}
			for _, c := range p.SlopeBudget {
				names = append(names, c.Input)
			}
			if len(p.SlopeBudget) != 2 || !strings.Contains(names[1], "reference area") {
				t.Errorf("slope budget %q, want the scatter and the reference area", names)
			}
		}
	}
	frac := float64(covered) / runs
	ratio := sumU95 / runs / quantileAbs(errs, 0.95)
	t.Logf("shared area error: coverage %.3f (independent treatment: %.3f), mean U95 / true 95 %% spread = %.2f",
		frac, float64(coveredNaive)/runs, ratio)
	if frac < 0.90 || frac > 0.99 {
		t.Errorf("coverage %.3f outside 0.90–0.99", frac)
	}
	if ratio < 1/1.5 || ratio > 1.5 {
		t.Errorf("mean U95 / true spread = %.2f, want within 1.5×", ratio)
	}
	if float64(coveredNaive)/runs > 0.85 {
		t.Errorf("the independent treatment covers %.3f: the test does not tell the two apart", float64(coveredNaive)/runs)
	}
}
