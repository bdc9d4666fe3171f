package estimate_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/calibrate"
	"liftyard/estimate"
)

// spinSegs makes rotor segments at spin ratios s with C_L values cl and
// standard uncertainties u (ν = 50).
func spinSegs(s, cl, u []float64) []estimate.Segment {
	out := make([]estimate.Segment, len(s))
	for i := range s {
		out[i] = estimate.Segment{Index: i, SpinRatio: s[i], CL: calibrate.Value{X: cl[i], U: u[i], Dof: 50}}
	}
	return out
}

// Ensure that the U95 band of the fitted C_L(S) covers the true curve
// about 95 % of the time inside the measured range: 400 seeded draws of
// seven points on a saturating curve of our own (C_L = 9·tanh(S/4)), the
// band checked at S = 0.75, 1.75 and 2.75; coverage in [0.90, 0.99].
func TestFitSpinCurve_Coverage(t *testing.T) {
	s := []float64{0, 0.5, 1, 1.5, 2, 2.5, 3}
	truth := func(x float64) float64 { return 9 * math.Tanh(x/4) }
	rng := rand.New(rand.NewPCG(12, 12))
	hit, total := 0, 0
	for range 400 {
		cl, u := make([]float64, len(s)), make([]float64, len(s))
		for i, x := range s {
			u[i] = 0.03 + 0.02*x
			cl[i] = truth(x) + u[i]*rng.NormFloat64()
		}
		c, err := estimate.FitSpinCurve(spinSegs(s, cl, u))
		require.NoError(t, err)
		for _, x := range []float64{0.75, 1.75, 2.75} {
			v, ok := c.At(x)
			require.True(t, ok)
			total++
			if math.Abs(v.X-truth(x)) <= v.U95() {
				hit++
			}
		}
	}
	cov := float64(hit) / float64(total)
	t.Logf("coverage of the U95 band: %.3f (%d of %d)", cov, hit, total)
	assert.GreaterOrEqual(t, cov, 0.90)
	assert.LessOrEqual(t, cov, 0.99)
}

// Ensure that the fit refuses too few points or no spread in S, and gives
// no value outside the measured range (no extrapolation).
func TestFitSpinCurve_Refuses(t *testing.T) {
	_, err := estimate.FitSpinCurve(spinSegs([]float64{0, 1}, []float64{0, 2}, []float64{0.1, 0.1}))
	assert.ErrorIs(t, err, estimate.ErrSpinCurve)
	_, err = estimate.FitSpinCurve(spinSegs([]float64{1, 1, 1}, []float64{2, 2.1, 1.9}, []float64{0.1, 0.1, 0.1}))
	assert.ErrorIs(t, err, estimate.ErrSpinCurve)
	c, err := estimate.FitSpinCurve(spinSegs([]float64{0, 1, 2}, []float64{0, 2, 4}, []float64{0.1, 0.1, 0.1}))
	require.NoError(t, err)
	_, ok := c.At(2.5)
	assert.False(t, ok)
}

// prandtl1926 is Prandtl's rotating cylinder, aspect ratio 5 with end
// disks: NACA TM 367 (1926), digitised from the published figure
// (docs/references.md §10.2; digitising error ±0.1–0.3 in C_L).
var prandtl1926 = struct{ s, cl []float64 }{
	s:  []float64{0, 0.680, 1.445, 2.021, 2.766, 3.340, 3.437, 4.581},
	cl: []float64{0, 0.489, 2.387, 4.514, 7.239, 8.437, 8.424, 8.804},
}

// Ensure that the inviscid bounds hold and are consistent
// (docs/references.md §10.1; Anderson, Fundamentals of Aerodynamics,
// §3.15–3.16, from memory): potential flow with circulation Γ = 2πR·ωR
// gives C_L = Γ/(V·R) = 2πS on the projected area 2R·span (Kutta–
// Joukowski L′ = ρVΓ), which reaches Prandtl's limit 4π exactly at S = 2,
// where the two stagnation points meet; and that Prandtl's measured
// cylinder (NACA TM 367, 1926) stays below both bounds at every point.
func TestSpinBounds_InviscidAndPrandtl1926(t *testing.T) {
	const rhoKgPerM3, vMPerS, rM = 1.2, 8.0, 0.05
	for _, s := range []float64{0.5, 1, 2, 3} {
		omega := s * vMPerS / rM
		gamma := 2 * math.Pi * rM * omega * rM // circulation of the wall speed ωR round the circumference
		liftPerSpan := rhoKgPerM3 * vMPerS * gamma
		cl := liftPerSpan / (0.5 * rhoKgPerM3 * vMPerS * vMPerS * 2 * rM)
		assert.InDelta(t, estimate.PotentialFlowSpinCL(s), cl, 1e-12, "S = %g: Kutta–Joukowski on span × diameter", s)
	}
	assert.InDelta(t, estimate.PrandtlLimitCL, estimate.PotentialFlowSpinCL(2), 1e-12, "the limit is reached at S = 2")
	assert.InDelta(t, 12.566, estimate.PrandtlLimitCL, 0.001, "4π ≈ 12.57 (docs/references.md §10.1)")
	for i, s := range prandtl1926.s {
		assert.Less(t, prandtl1926.cl[i], estimate.PrandtlLimitCL)
		if s > 0 {
			assert.Less(t, prandtl1926.cl[i], estimate.PotentialFlowSpinCL(s), "S = %g", s)
		}
	}
}

// Ensure that the C_L(S) model follows a published rotor curve within that
// curve's own stated uncertainty: Prandtl's cylinder (NACA TM 367, 1926),
// digitised to ±0.3 in C_L (taken as a 95 % bound, u = 0.3/1.96), fitted
// over its rising range S ≤ 3.44, passes within the combined U95 of the
// point and the curve at every point, with χ²/ν ≤ 3.
func TestFitSpinCurve_Prandtl1926(t *testing.T) {
	var s, cl, u []float64
	for i, x := range prandtl1926.s {
		if x <= 3.44 {
			s, cl, u = append(s, x), append(cl, prandtl1926.cl[i]), append(u, 0.3/1.96)
		}
	}
	c, err := estimate.FitSpinCurve(spinSegs(s, cl, u))
	require.NoError(t, err)
	t.Logf("%s; coefficients %v", c.Describe(), c.Coef)
	for i, x := range s {
		v, ok := c.At(x)
		require.True(t, ok)
		lim := 1.96 * math.Hypot(u[i], v.U)
		assert.LessOrEqual(t, math.Abs(v.X-cl[i]), lim, "S = %g: fit %.3f vs Prandtl %.3f", x, v.X, cl[i])
	}
	assert.LessOrEqual(t, c.ChiSq/float64(c.Dof), 3.0)
}
