package estimate

import (
	"errors"
	"fmt"
	"math"
)

// ErrGumbelData is returned by FitGumbelMLE and FitGumbelMoments when the
// values cannot give a fit: fewer than 3 finite values, or no spread.
var ErrGumbelData = errors.New("gumbel fit needs at least 3 finite values with spread")

// EulerGamma is the Euler–Mascheroni constant γ_E, the mean of the reduced
// Gumbel variate.
const EulerGamma = 0.57721566490153286

// CookMayneReduced is the reduced variate of the Cook & Mayne design value:
// the design coefficient is the mode plus 1.4 dispersions, U + 1.4/a, the
// 78 % fractile exp(−e^{−1.4}) = 0.7815 of the epoch-peak distribution
// (Cook & Mayne, J. Wind Eng. Ind. Aerodyn. 4 (1979) 149–164 and 6 (1980)
// 125–137 — the attribution and the 1.4 are from memory, docs/references.md
// §12.1 [M]; the fractile is recomputed there [R]).
const CookMayneReduced = 1.4

// GumbelFit is a fitted Gumbel (Fisher–Tippett Type I) distribution of
// maxima, P(x) = exp{−exp[−a(x − U)]}: ModeU is the mode U and ScaleInvA the
// dispersion 1/a, both in the unit of the fitted values. N is the number of
// values fitted.
type GumbelFit struct {
	ModeU, ScaleInvA float64
	N                int
}

// Quantile returns the value not exceeded with probability p,
//
//	x_p = U + (1/a)·(−ln(−ln p))
//
// (docs/references.md §12.1). p outside (0, 1) gives NaN.
func (g GumbelFit) Quantile(p float64) float64 {
	if !(p > 0 && p < 1) {
		return math.NaN()
	}
	return g.ModeU + g.ScaleInvA*(-math.Log(-math.Log(p)))
}

// CookMayne returns the Cook & Mayne design value U + 1.4/a (see
// CookMayneReduced).
func (g GumbelFit) CookMayne() float64 {
	return g.ModeU + CookMayneReduced*g.ScaleInvA
}

// finiteValues returns the finite values of x, refusing fewer than 3 or a
// set without spread.
func finiteValues(x []float64) ([]float64, error) {
	out := make([]float64, 0, len(x))
	for _, v := range x {
		if finite(v) {
			out = append(out, v)
		}
	}
	if len(out) < 3 {
		return nil, fmt.Errorf("%d finite values: %w", len(out), ErrGumbelData)
	}
	lo, hi := out[0], out[0]
	for _, v := range out {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	if !(hi > lo) {
		return nil, fmt.Errorf("all %d values equal %g: %w", len(out), lo, ErrGumbelData)
	}
	return out, nil
}

// meanSD returns the mean and the sample standard deviation (n − 1).
func meanSD(x []float64) (mean, sd float64) {
	for _, v := range x {
		mean += v
	}
	mean /= float64(len(x))
	ss := 0.0
	for _, v := range x {
		ss += (v - mean) * (v - mean)
	}
	return mean, math.Sqrt(ss / float64(len(x)-1))
}

// FitGumbelMoments fits a Gumbel distribution by the method of moments
// (docs/references.md §12.1):
//
//	1/a = s·√6/π,  U = x̄ − γ_E/a
//
// with x̄ the mean and s the sample standard deviation (n − 1) of the
// maxima. Non-finite values are skipped; fewer than 3 finite values or no
// spread give an error wrapping ErrGumbelData.
func FitGumbelMoments(x []float64) (GumbelFit, error) {
	v, err := finiteValues(x)
	if err != nil {
		return GumbelFit{}, fmt.Errorf("gumbel moments: %w", err)
	}
	mean, sd := meanSD(v)
	b := sd * math.Sqrt(6) / math.Pi
	return GumbelFit{ModeU: mean - EulerGamma*b, ScaleInvA: b, N: len(v)}, nil
}

// FitGumbelMLE fits a Gumbel distribution by maximum likelihood
// (docs/references.md §12.1; e.g. Coles, An Introduction to Statistical Modeling
// of Extreme Values, Springer 2001, §3.3): the dispersion b = 1/a solves
//
//	b = x̄ − Σ x_i·e^{−x_i/b} / Σ e^{−x_i/b}
//
// and then U = −b·ln[(1/n)·Σ e^{−x_i/b}]. The exponentials are taken about
// x̄ so large values do not overflow. The left side minus the right side
// falls from x̄ − min(x) > 0 as b → 0 to −∞ as b → ∞, so the root is
// bracketed and found by bisection on ln b to full float64 precision.
// Non-finite values are skipped; fewer than 3 finite values or no spread
// give an error wrapping ErrGumbelData.
func FitGumbelMLE(x []float64) (GumbelFit, error) {
	v, err := finiteValues(x)
	if err != nil {
		return GumbelFit{}, fmt.Errorf("gumbel MLE: %w", err)
	}
	mean, sd := meanSD(v)
	// g(b) = x̄ − b − Σ x_i w_i/Σ w_i with w_i = e^{−(x_i − x̄)/b}; the
	// weighted mean is computed on d_i = x_i − x̄ (the shift cancels).
	g := func(b float64) float64 {
		dmin := math.Inf(1)
		for _, xi := range v {
			dmin = math.Min(dmin, xi-mean)
		}
		sw, swd := 0.0, 0.0
		for _, xi := range v {
			d := xi - mean
			w := math.Exp(-(d - dmin) / b) // scaled by e^{dmin/b}: at most 1
			sw += w
			swd += w * d
		}
		return -b - swd/sw
	}
	lo, hi := sd*1e-3, sd*10
	for g(lo) <= 0 && lo > sd*1e-12 {
		lo /= 10
	}
	for g(hi) >= 0 && hi < sd*1e12 {
		hi *= 10
	}
	if !(g(lo) > 0 && g(hi) < 0) {
		return GumbelFit{}, fmt.Errorf("gumbel MLE: no root between %g and %g: %w", lo, hi, ErrGumbelData)
	}
	for range 200 {
		mid := math.Sqrt(lo * hi)
		if mid <= lo || mid >= hi {
			break
		}
		if g(mid) > 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	b := math.Sqrt(lo * hi)
	dmin := math.Inf(1)
	for _, xi := range v {
		dmin = math.Min(dmin, xi-mean)
	}
	s := 0.0
	for _, xi := range v {
		s += math.Exp(-(xi - mean - dmin) / b)
	}
	// U = −b·ln[(1/n)Σ e^{−x_i/b}] = x̄ + dmin − b·ln[(1/n)Σ e^{−(x_i−x̄−dmin)/b}].
	u := mean + dmin - b*math.Log(s/float64(len(v)))
	return GumbelFit{ModeU: u, ScaleInvA: b, N: len(v)}, nil
}
