package estimate

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"liftyard/calibrate"
)

// SpinCurve is a rotor's lift curve C_L(S) fitted over its measured range
// of spin ratios (FitSpinCurve).
//
// # The model and why
//
// C_L(S) = Σ_{k=0}^{d} c_k·S^k, a polynomial of degree d = min(3, n − 2)
// for n points, fitted by weighted least squares. A measured rotor curve
// rises about linearly, bends over and saturates (tip losses, separation);
// a saturating form (C_max·tanh(S/S₀)) has parameters that are not
// determined while the measured range stops short of saturation, and a
// non-linear fit gives no closed-form covariance. A cubic is linear in its
// coefficients, follows a curve that bends once over the usual range
// S = 0 … 4, keeps one degree of freedom for the residuals, and its
// covariance gives the curve's uncertainty at every S directly. It is not
// physics: it is evaluated only inside the measured range, never
// extrapolated.
//
// Weights are 1/u_eff², u_eff² = u(C_L)² + (dC_L/dS·u(S))² (the effective
// variance of an error in S, slope from a first unweighted pass). The
// covariance (XᵀWX)⁻¹ is multiplied by χ²/ν when that is above 1, so a
// scatter beyond the stated uncertainties widens the band rather than
// being ignored (the band then takes Student's t on ν = n − d − 1; else
// the normal factor, the points' u being given). Measured coverage of the
// U95 band on a saturating curve of our own: TestFitSpinCurve_Coverage. The points' u carry their run-wide Type B parts too
// (calibration span, area), which move all points together; the band is
// therefore an upper bound for the curve's shape and the right size for
// its level.
type SpinCurve struct {
	Coef     []float64   // c_0 … c_d
	Cov      [][]float64 // covariance of Coef (scaled by χ²/ν when > 1)
	Points   int         // segments fitted
	Dof      int         // n − (d + 1)
	ChiSq    float64     // weighted sum of squared residuals
	SpinMin  float64     // smallest measured spin ratio (the curve's range)
	SpinMax  float64     // largest measured spin ratio
	Residual []float64   // C_L − curve at each fitted point, in fit order
	// Scaled is true when the scatter exceeded the points' uncertainties
	// (χ²/ν > 1) and Cov was scaled up by χ²/ν.
	Scaled bool
}

// ErrSpinCurve is returned by FitSpinCurve when the segments cannot give
// a curve (fewer than three spin ratios, no spread in S, a singular fit).
var ErrSpinCurve = errors.New("no spin-ratio curve")

// FitSpinCurve fits C_L(S) to the segments with a finite C_L, a finite
// spin ratio and a positive u(C_L) (see SpinCurve for the model).
func FitSpinCurve(segs []Segment) (SpinCurve, error) {
	var s, y, u, us []float64
	for i := range segs {
		g := &segs[i]
		if !finite(g.CL.X) || !finite(g.SpinRatio) || !(g.CL.U > 0) {
			continue
		}
		s, y, u, us = append(s, g.SpinRatio), append(y, g.CL.X), append(u, g.CL.U), append(us, g.SpinRatioU)
	}
	n := len(s)
	if n < 3 {
		return SpinCurve{}, fmt.Errorf("%d segments with C_L and a spin ratio (want 3 or more): %w", n, ErrSpinCurve)
	}
	c := SpinCurve{Points: n, SpinMin: math.Inf(1), SpinMax: math.Inf(-1)}
	for _, v := range s {
		c.SpinMin, c.SpinMax = math.Min(c.SpinMin, v), math.Max(c.SpinMax, v)
	}
	if !(c.SpinMax-c.SpinMin > 1e-6) {
		return SpinCurve{}, fmt.Errorf("all %d segments at S = %.3g: %w", n, c.SpinMin, ErrSpinCurve)
	}
	deg := min(3, n-2)
	ones := make([]float64, n)
	for i := range ones {
		ones[i] = 1
	}
	first, _, err := polyFit(s, y, ones, deg)
	if err != nil {
		return SpinCurve{}, err
	}
	w := make([]float64, n)
	for i := range s {
		slope := polyDeriv(first, s[i])
		w[i] = 1 / (u[i]*u[i] + slope*slope*us[i]*us[i])
	}
	coef, cov, err := polyFit(s, y, w, deg)
	if err != nil {
		return SpinCurve{}, err
	}
	c.Coef, c.Dof = coef, n-(deg+1)
	for i := range s {
		r := y[i] - polyAt(coef, s[i])
		c.Residual = append(c.Residual, r)
		c.ChiSq += w[i] * r * r
	}
	scale := 1.0
	if c.Dof > 0 && c.ChiSq/float64(c.Dof) > 1 {
		scale, c.Scaled = c.ChiSq/float64(c.Dof), true
	}
	c.Cov = make([][]float64, deg+1)
	for i := range c.Cov {
		c.Cov[i] = make([]float64, deg+1)
		for j := range c.Cov[i] {
			c.Cov[i][j] = scale * cov.At(i, j)
		}
	}
	return c, nil
}

// At returns the fitted C_L at S with its standard uncertainty
// u² = gᵀ·Cov·g, g = (1, S, S², …); ok is false outside the measured
// range. ν is +Inf when Cov rests on the points' stated uncertainties, and
// the fit's n − (d + 1) when it was scaled by the residual scatter (the u
// is then itself estimated from so many residuals).
func (c SpinCurve) At(spinRatio float64) (calibrate.Value, bool) {
	if len(c.Coef) == 0 || !(spinRatio >= c.SpinMin-1e-9 && spinRatio <= c.SpinMax+1e-9) {
		return calibrate.Value{}, false
	}
	g := make([]float64, len(c.Coef))
	p := 1.0
	for k := range g {
		g[k], p = p, p*spinRatio
	}
	v := 0.0
	for i := range g {
		for j := range g {
			v += g[i] * c.Cov[i][j] * g[j]
		}
	}
	dof := math.Inf(1)
	if c.Scaled {
		dof = float64(c.Dof)
	}
	return calibrate.Value{X: polyAt(c.Coef, spinRatio), U: math.Sqrt(math.Max(v, 0)), Dof: dof}, true
}

// Describe states the model in words, for reports.
func (c SpinCurve) Describe() string {
	names := []string{"constant", "straight line", "quadratic", "cubic"}
	return fmt.Sprintf("weighted least-squares %s in S over S = %.2f to %.2f (%d points, χ²/ν = %s)",
		names[len(c.Coef)-1], c.SpinMin, c.SpinMax, c.Points, chiPerDof(c.ChiSq, c.Dof))
}

func chiPerDof(chi float64, dof int) string {
	if dof <= 0 {
		return "—"
	}
	return fmt.Sprintf("%.2f", chi/float64(dof))
}

// polyFit solves the weighted least-squares polynomial fit of degree deg
// by a QR factorisation of the weighted design matrix; cov is (XᵀWX)⁻¹.
func polyFit(x, y, w []float64, deg int) ([]float64, *mat.Dense, error) {
	n, m := len(x), deg+1
	a := mat.NewDense(n, m, nil)
	b := mat.NewVecDense(n, nil)
	for i := range x {
		sw := math.Sqrt(w[i])
		p := 1.0
		for k := range m {
			a.Set(i, k, sw*p)
			p *= x[i]
		}
		b.SetVec(i, sw*y[i])
	}
	var qr mat.QR
	qr.Factorize(a)
	var coef mat.VecDense
	if err := qr.SolveVecTo(&coef, false, b); err != nil {
		return nil, nil, fmt.Errorf("singular fit: %w", ErrSpinCurve)
	}
	var ata, cov mat.Dense
	ata.Mul(a.T(), a)
	if err := cov.Inverse(&ata); err != nil {
		return nil, nil, fmt.Errorf("singular fit: %w", ErrSpinCurve)
	}
	out := make([]float64, m)
	for k := range out {
		out[k] = coef.AtVec(k)
	}
	return out, &cov, nil
}

func polyAt(c []float64, x float64) float64 {
	v := 0.0
	for k := len(c) - 1; k >= 0; k-- {
		v = v*x + c[k]
	}
	return v
}

func polyDeriv(c []float64, x float64) float64 {
	v := 0.0
	for k := len(c) - 1; k >= 1; k-- {
		v = v*x + float64(k)*c[k]
	}
	return v
}

// PrandtlLimitCL is the largest lift coefficient of a rotating cylinder in
// potential flow, 4π, reached when the two stagnation points meet on the
// surface (Prandtl's limit; docs/references.md §10.1).
const PrandtlLimitCL = 4 * math.Pi

// PotentialFlowSpinCL returns C_L = 2π·S, the lift coefficient of a
// cylinder turning at spin ratio S in potential flow with the circulation
// of its wall speed, Γ = 2πR·ωR (Kutta–Joukowski L′ = ρVΓ on the projected
// area 2R per unit span; docs/references.md §10.1, Anderson, Fundamentals
// of Aerodynamics, §3.15–3.16, from memory). Real cylinders stay well
// below it: a sanity bound, not a prediction.
func PotentialFlowSpinCL(spinRatio float64) float64 { return 2 * math.Pi * spinRatio }
