package estimate_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"liftyard/estimate"
)

// portPirie is the Port Pirie (South Australia) annual maximum sea level,
// 1923–1987, metres, in year order: Coles (2001), An Introduction to
// Statistical Modeling of Extreme Values, Springer, Example 3.4.1 (public
// copies: jojal5/Extremes.jl data/portpirie.csv, britols/bayesian_adventures
// data/portpirie.csv; docs/references.md §12.1).
var portPirie = []float64{
	4.03, 3.83, 3.65, 3.88, 4.01, 4.08, 4.18, 3.80, 4.36, 3.96, 3.98, 4.69, 3.85, 3.96, 3.85, 3.93, 3.75, 3.63, 3.57, 4.25,
	3.97, 4.05, 4.24, 4.22, 3.73, 4.37, 4.06, 3.71, 3.96, 4.06, 4.55, 3.79, 3.89, 4.11, 3.85, 3.86, 3.86, 4.21, 4.01, 4.11,
	4.24, 3.96, 4.21, 3.74, 3.85, 3.88, 3.66, 4.11, 3.71, 4.18, 3.90, 3.78, 3.91, 3.72, 4.00, 3.66, 3.62, 4.33, 4.55, 3.75,
	4.08, 3.90, 3.88, 3.94, 4.33,
}

// Ensure that the Gumbel fits reproduce the Port Pirie example.
func TestGumbel_PortPirie(t *testing.T) {
	if len(portPirie) != 65 {
		t.Fatalf("data has %d values, want 65", len(portPirie))
	}
	mle, err := estimate.FitGumbelMLE(portPirie)
	if err != nil {
		t.Fatal(err)
	}
	// [R] docs/references.md §12.1: Gumbel MLE recomputed (U, 1/a) = (3.869 44, 0.194 89).
	if math.Abs(mle.ModeU-3.86944) > 1e-4 || math.Abs(mle.ScaleInvA-0.19489) > 1e-4 {
		t.Errorf("MLE (U, 1/a) = (%.5f, %.5f), want (3.86944, 0.19489) ±1e-4", mle.ModeU, mle.ScaleInvA)
	}
	// Coles (2001) §3.4.1 prints (3.87, 0.195): from memory, recomputed
	// (docs/references.md §12.1 [M] published, [R] recomputed) — to the printed digits.
	if got := math.Round(mle.ModeU*100) / 100; got != 3.87 {
		t.Errorf("MLE U rounds to %.2f, want 3.87", got)
	}
	if got := math.Round(mle.ScaleInvA*1000) / 1000; got != 0.195 {
		t.Errorf("MLE 1/a rounds to %.3f, want 0.195", got)
	}
	if mle.N != 65 {
		t.Errorf("N = %d, want 65", mle.N)
	}
	mom, err := estimate.FitGumbelMoments(portPirie)
	if err != nil {
		t.Fatal(err)
	}
	// [R] docs/references.md §12.1: method of moments (3.872 37, 0.187 53), from
	// mean 3.980 615 and s 0.240 513.
	if math.Abs(mom.ModeU-3.87237) > 1e-4 || math.Abs(mom.ScaleInvA-0.18753) > 1e-4 {
		t.Errorf("moments (U, 1/a) = (%.5f, %.5f), want (3.87237, 0.18753) ±1e-4", mom.ModeU, mom.ScaleInvA)
	}
}

// Ensure that the MLE satisfies its own likelihood equations: the score is
// zero at the fit (an identity, independent of any printed value).
func TestGumbel_MLEScoreZero(t *testing.T) {
	g, err := estimate.FitGumbelMLE(portPirie)
	if err != nil {
		t.Fatal(err)
	}
	n := float64(len(portPirie))
	var sy, sey float64
	for _, x := range portPirie {
		y := (x - g.ModeU) / g.ScaleInvA
		sy += y
		sey += y * math.Exp(-y)
	}
	var se float64
	for _, x := range portPirie {
		se += math.Exp(-(x - g.ModeU) / g.ScaleInvA)
	}
	// ∂ℓ/∂U ∝ n − Σe^{−y} = 0; ∂ℓ/∂b ∝ −n + Σy − Σy·e^{−y} = 0.
	if d := n - se; math.Abs(d) > 1e-8*n {
		t.Errorf("∂ℓ/∂U residual %g", d)
	}
	if d := -n + sy - sey; math.Abs(d) > 1e-8*n {
		t.Errorf("∂ℓ/∂(1/a) residual %g", d)
	}
}

// Ensure that Quantile is the Gumbel inverse CDF: the Cook & Mayne value
// U + 1.4/a sits at p = exp(−e^{−1.4}) = 0.7815 (docs/references.md §12.1 [R]),
// and p outside (0, 1) gives NaN.
func TestGumbel_Quantile(t *testing.T) {
	g := estimate.GumbelFit{ModeU: 1.2, ScaleInvA: 0.3, N: 16}
	p := math.Exp(-math.Exp(-1.4))
	if math.Abs(p-0.7815) > 5e-5 {
		t.Errorf("exp(−e^{−1.4}) = %.5f, want 0.7815", p)
	}
	if got, want := g.Quantile(p), 1.2+1.4*0.3; math.Abs(got-want) > 1e-12 {
		t.Errorf("Quantile(%.4f) = %.15g, want %.15g", p, got, want)
	}
	if got, want := g.CookMayne(), 1.2+1.4*0.3; math.Abs(got-want) > 1e-12 {
		t.Errorf("CookMayne = %g, want %g", got, want)
	}
	// The mode is the 1/e quantile: −ln(−ln e^{−1}) = 0.
	if got := g.Quantile(math.Exp(-1)); math.Abs(got-1.2) > 1e-12 {
		t.Errorf("Quantile(1/e) = %g, want the mode 1.2", got)
	}
	for _, p := range []float64{0, 1, -0.5, 2, math.NaN()} {
		if got := g.Quantile(p); !math.IsNaN(got) {
			t.Errorf("Quantile(%g) = %g, want NaN", p, got)
		}
	}
}

// Ensure that the fits recover U and 1/a from Gumbel samples drawn by the
// inverse CDF, x = U − (1/a)·ln(−ln u). With n = 2000 the standard error of
// the MLE is about 1.05/(a√n) ≈ 0.024·(1/a) for U and 0.78/(a√n) ≈ 0.018·(1/a)
// for 1/a (Fisher information of the Gumbel, e.g. Coles 2001 §3.3, from
// memory); the tolerance is 4 standard errors.
func TestGumbel_RecoversSampledParameters(t *testing.T) {
	const u0, b0, n = 2.5, 0.4, 2000
	rng := rand.New(rand.NewPCG(11, 12))
	x := make([]float64, n)
	for i := range x {
		x[i] = u0 - b0*math.Log(-math.Log(rng.Float64()))
	}
	for name, fit := range map[string]func([]float64) (estimate.GumbelFit, error){
		"MLE": estimate.FitGumbelMLE, "moments": estimate.FitGumbelMoments,
	} {
		g, err := fit(x)
		if err != nil {
			t.Fatal(err)
		}
		if d := math.Abs(g.ModeU - u0); d > 4*0.024*b0 {
			t.Errorf("%s: U = %.4f, want %.4f (|Δ| %.4f > %.4f)", name, g.ModeU, u0, d, 4*0.024*b0)
		}
		// The moments estimator of 1/a is less efficient: allow 6 SE.
		if d := math.Abs(g.ScaleInvA - b0); d > 6*0.018*b0 {
			t.Errorf("%s: 1/a = %.4f, want %.4f", name, g.ScaleInvA, b0)
		}
	}
}

// Ensure that unusable data gives ErrGumbelData, not a panic or a NaN fit.
func TestGumbel_BadData(t *testing.T) {
	for name, x := range map[string][]float64{
		"nil":       nil,
		"two":       {1, 2},
		"constant":  {3, 3, 3, 3},
		"nan":       {math.NaN(), math.NaN(), math.NaN(), 1},
		"two+inf":   {1, 2, math.Inf(1)},
		"all equal": {-0.5, -0.5, -0.5},
	} {
		for fitName, fit := range map[string]func([]float64) (estimate.GumbelFit, error){
			"MLE": estimate.FitGumbelMLE, "moments": estimate.FitGumbelMoments,
		} {
			if _, err := fit(x); !errors.Is(err, estimate.ErrGumbelData) {
				t.Errorf("%s %s: err = %v, want ErrGumbelData", fitName, name, err)
			}
		}
	}
	// Non-finite values are skipped, the rest fitted.
	g, err := estimate.FitGumbelMLE(append([]float64{math.NaN()}, portPirie...))
	if err != nil || g.N != 65 || math.Abs(g.ModeU-3.86944) > 1e-4 {
		t.Errorf("NaN + Port Pirie: %+v, %v; want the Port Pirie fit with N 65", g, err)
	}
	// Large offsets do not overflow the exponentials.
	shifted := make([]float64, len(portPirie))
	for i, v := range portPirie {
		shifted[i] = v*100 + 1e4
	}
	g, err = estimate.FitGumbelMLE(shifted)
	if err != nil || math.Abs(g.ModeU-(3.86944*100+1e4)) > 1e-2 || math.Abs(g.ScaleInvA-19.489) > 1e-2 {
		t.Errorf("scaled Port Pirie: %+v, %v; want (10386.944, 19.489)", g, err)
	}
}
