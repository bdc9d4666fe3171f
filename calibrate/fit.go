package calibrate

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"
)

// ErrPoints is returned, wrapped, when a set of calibration points cannot be
// fitted: too few points, a value that is not a finite number, readings that
// do not vary, or an order outside 1–3. The message says which and what to
// do; callers treat it as bad input (exit status 2).
var ErrPoints = errors.New("calibration points cannot be fitted")

// Limits of FitPoly.
const (
	MinOrder = 1
	MaxOrder = 3
	// FTestAlpha is the significance level of the F-test on the highest-order
	// term: above it, the term is reported as not justified (common practice).
	FTestAlpha = 0.05
)

// exactRel is the residual sum of squares, relative to the total sum of
// squares about the mean, below which a fit is taken as exact (noise-free
// data): the F-test is then decided without a p-value.
const exactRel = 1e-20

// FitPoly fits applied = Σ c_k·reading^k, k = 0…order, to the points by
// least squares, and states the fit's uncertainty and the sensor's
// non-linearity and hysteresis.
//
// Method. The readings are centred and scaled, z = (x − x̄)/h with
// h = max|x − x̄|, so that z lies in [−1, 1]; the coefficients d of the
// powers of z are found by Householder QR of the Vandermonde matrix in z
// (gonum mat.QR; never the normal equations). Their covariance is
// s²·(RᵀR)⁻¹ with s² = SSR/ν and ν = n − order − 1. Both are mapped back
// to ascending powers of the raw reading by the exact linear map
// c = T·d, Cov = T·Cov_d·Tᵀ, T[k][j] = C(j,k)·(−x̄)^(j−k)/h^j (binomial
// expansion of ((x − x̄)/h)^j). This keeps full precision for 24-bit
// counts in the millions, where raw powers reach 10²⁰ and the normal
// equations lose every digit (NIST StRD Pontius is the published test).
//
// Warnings (Fit.Warnings; the fit is still returned):
//   - the highest-order term fails the extra-sum-of-squares F-test,
//     F = (SSR_{k−1} − SSR_k)/(SSR_k/ν_k) with 1 and ν_k degrees of freedom,
//     p = P(F_{1,ν} > F) > FTestAlpha;
//   - ν < 3: the residual SD, and so every uncertainty, rests on too few
//     points;
//   - the design matrix is ill-conditioned (mat.Condition): the numbers
//     may be wrong;
//   - non-linearity or hysteresis could not be computed (see below).
//
// NonlinearityPctFS and HysteresisPctFS follow docs/design.md §3.1, in reading
// space: points with Direction Down are unloading points, all others
// (Up or unstated) loading points. Readings at the same applied value (equal
// within 1e-9 of the applied span) are averaged first, so repeated cycles
// give the systematic difference, not the scatter. Non-linearity is the
// largest |mean loading reading − line| over the loading levels, the line
// running through the lowest and highest loading levels (by applied value);
// hysteresis is the largest |mean unloading − mean loading reading| at an
// applied value that has both. Both are in % of the loading reading span
// |r(highest) − r(lowest)|.
//
// Errors (wrapping ErrPoints) for an order outside 1–3, fewer than order+2
// points, a value that is NaN or infinite, readings that are all equal or
// have fewer than order+1 distinct values, and a fit whose results are not
// finite (values too large for the order). FitPoly never panics on its input.
func FitPoly(points []Point, order int) (Fit, error) {
	if order < MinOrder || order > MaxOrder {
		return Fit{}, fmt.Errorf("%w: order %d outside %d–%d", ErrPoints, order, MinOrder, MaxOrder)
	}
	n, p := len(points), order+1
	if n < p+1 {
		return Fit{}, fmt.Errorf("%w: order %d needs at least %d points, have %d", ErrPoints, order, p+1, n)
	}
	for i, pt := range points {
		if !allFinite(pt.Applied, pt.Reading) {
			return Fit{}, fmt.Errorf("%w: point %d (applied %g, reading %g): not a finite number", ErrPoints, i+1, pt.Applied, pt.Reading)
		}
	}
	xs := make([]float64, n)
	ys := make([]float64, n)
	for i, pt := range points {
		xs[i], ys[i] = pt.Reading, pt.Applied
	}
	distinct := slices.Clone(xs)
	slices.Sort(distinct)
	distinct = slices.Compact(distinct)
	if len(distinct) == 1 {
		return Fit{}, fmt.Errorf("%w: all %d readings are %g: nothing to fit (apply different loads)", ErrPoints, n, xs[0])
	}
	if len(distinct) < p {
		return Fit{}, fmt.Errorf("%w: only %d distinct readings: order %d needs at least %d", ErrPoints, len(distinct), order, p)
	}

	// Centre and scale. The mean is summed from x/n so that it cannot
	// overflow on its own.
	xm := 0.0
	for _, x := range xs {
		xm += x / float64(n)
	}
	h := 0.0
	for _, x := range xs {
		h = math.Max(h, math.Abs(x-xm))
	}
	if !allFinite(xm, h) || h == 0 {
		return Fit{}, fmt.Errorf("%w: readings span too large or too small to fit (%g … %g)", ErrPoints, distinct[0], distinct[len(distinct)-1])
	}
	zs := make([]float64, n)
	for i, x := range xs {
		zs[i] = (x - xm) / h
	}

	full, err := lsq(n, p, vandermonde(zs, p), ys)
	if err != nil {
		return Fit{}, fmt.Errorf("%w: the readings do not determine an order-%d fit (%v)", ErrPoints, order, err)
	}
	low, err := lsq(n, p-1, vandermonde(zs, p-1), ys)
	if err != nil {
		return Fit{}, fmt.Errorf("%w: the readings do not determine an order-%d fit (%v)", ErrPoints, order-1, err)
	}

	dof := n - p
	s2 := full.ssr / float64(dof)
	T := backTransform(xm, h, p)
	f := Fit{Order: order, Dof: dof, ResidualSD: math.Sqrt(s2)}
	f.Poly = make([]float64, p)
	for k := range p {
		f.Poly[k] = dot(T[k], full.coef)
	}
	// Cov = T·(s²·(RᵀR)⁻¹)·Tᵀ.
	f.Cov = make([][]float64, p)
	f.PolyU = make([]float64, p)
	for k := range p {
		f.Cov[k] = make([]float64, p)
	}
	for k := range p {
		for l := k; l < p; l++ {
			c := 0.0
			for i := range p {
				for j := range p {
					c += T[k][i] * full.xtxi.At(i, j) * T[l][j]
				}
			}
			f.Cov[k][l], f.Cov[l][k] = s2*c, s2*c
		}
		f.PolyU[k] = math.Sqrt(f.Cov[k][k])
	}
	if !allFinite(f.ResidualSD) || !allFinite(f.Poly...) || !allFinite(f.PolyU...) {
		return Fit{}, fmt.Errorf("%w: an order-%d fit of these values is not finite (values too large or too close together)", ErrPoints, order)
	}

	// F-test on the highest-order term.
	sst := 0.0
	ym := 0.0
	for _, y := range ys {
		ym += y / float64(n)
	}
	for _, y := range ys {
		sst += (y - ym) * (y - ym)
	}
	thr := exactRel * sst
	switch {
	case low.ssr <= thr:
		f.Warnings = append(f.Warnings, fmt.Sprintf("order %d not justified by the data (order %d fits them exactly)", order, order-1))
	case full.ssr <= thr:
		// exact fit that the lower order misses: the term is needed.
	default:
		F := (low.ssr - full.ssr) / s2
		pv := distuv.F{D1: 1, D2: float64(dof)}.Survival(math.Max(F, 0))
		if pv > FTestAlpha {
			f.Warnings = append(f.Warnings, fmt.Sprintf("order %d not justified by the data (F-test, p = %.2g)", order, pv))
		}
	}
	if dof < 3 {
		f.Warnings = append(f.Warnings, fmt.Sprintf("ν = %d (points − order − 1) is below 3: the uncertainty of the fit rests on too few points; take more", dof))
	}
	if full.illC {
		f.Warnings = append(f.Warnings, fmt.Sprintf("fit is ill-conditioned (condition number %.3g): the coefficients may be wrong; spread the readings", full.cond))
	}

	var w []string
	f.NonlinearityPctFS, f.HysteresisPctFS, w = characteristics(points)
	f.Warnings = append(f.Warnings, w...)
	return f, nil
}

// vandermonde returns the n×p matrix [z_i^j] row-major.
func vandermonde(zs []float64, p int) []float64 {
	a := make([]float64, 0, len(zs)*p)
	for _, z := range zs {
		v := 1.0
		for range p {
			a = append(a, v)
			v *= z
		}
	}
	return a
}

// backTransform returns T with c = T·d, where d are the coefficients of
// powers of z = (x − xm)/h and c those of powers of x:
// z^j = Σ_k C(j,k)·x^k·(−xm)^(j−k)/h^j.
func backTransform(xm, h float64, p int) [][]float64 {
	T := make([][]float64, p)
	for k := range p {
		T[k] = make([]float64, p)
		for j := k; j < p; j++ {
			T[k][j] = binom(j, k) * math.Pow(-xm, float64(j-k)) / math.Pow(h, float64(j))
		}
	}
	return T
}

func binom(n, k int) float64 {
	b := 1.0
	for i := 1; i <= k; i++ {
		b = b * float64(n-k+i) / float64(i)
	}
	return b
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// level is the mean reading at one applied value.
type level struct {
	applied, reading float64
	n                int
}

// levels groups points by applied value (equal within tol) and averages the
// readings; the result is sorted by applied value.
func levels(pts []Point, tol float64) []level {
	sorted := slices.Clone(pts)
	slices.SortStableFunc(sorted, func(a, b Point) int {
		switch {
		case a.Applied < b.Applied:
			return -1
		case a.Applied > b.Applied:
			return 1
		}
		return 0
	})
	var out []level
	for _, p := range sorted {
		if m := len(out); m > 0 && p.Applied-out[m-1].applied <= tol {
			l := &out[m-1]
			l.reading += (p.Reading - l.reading) / float64(l.n+1)
			l.n++
			continue
		}
		out = append(out, level{applied: p.Applied, reading: p.Reading, n: 1})
	}
	return out
}

// characteristics returns non-linearity and hysteresis in % of the loading
// reading span (docs/design.md §3.1; see FitPoly), and warnings when they cannot be
// computed.
func characteristics(points []Point) (nonlinPct, hystPct float64, warnings []string) {
	var up, down []Point
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range points {
		lo, hi = math.Min(lo, p.Applied), math.Max(hi, p.Applied)
		if p.Direction == Down {
			down = append(down, p)
		} else {
			up = append(up, p)
		}
	}
	tol := 1e-9 * (hi - lo)
	ul := levels(up, tol)
	if len(ul) < 2 {
		return 0, 0, []string{"non-linearity and hysteresis not computed: fewer than 2 loading levels"}
	}
	first, last := ul[0], ul[len(ul)-1]
	span := math.Abs(last.reading - first.reading)
	if span == 0 {
		return 0, 0, []string{"non-linearity and hysteresis not computed: the loading readings do not change between the lowest and highest load"}
	}
	slope := (last.reading - first.reading) / (last.applied - first.applied)
	if !allFinite(span, slope) {
		return 0, 0, []string{"non-linearity and hysteresis not computed: the values are too large to difference"}
	}
	for _, l := range ul {
		line := first.reading + slope*(l.applied-first.applied)
		nonlinPct = math.Max(nonlinPct, math.Abs(l.reading-line)/span*100)
	}
	if len(down) == 0 {
		if !allFinite(nonlinPct) {
			return 0, 0, []string{"non-linearity and hysteresis not computed: the values are too large to difference"}
		}
		return nonlinPct, 0, nil
	}
	matched := false
	for _, d := range levels(down, tol) {
		for _, u := range ul {
			if math.Abs(u.applied-d.applied) <= tol {
				matched = true
				hystPct = math.Max(hystPct, math.Abs(d.reading-u.reading)/span*100)
			}
		}
	}
	if !allFinite(nonlinPct, hystPct) {
		return 0, 0, []string{"non-linearity and hysteresis not computed: the values are too large to difference"}
	}
	if !matched {
		warnings = append(warnings, "hysteresis not computed: no unloading point at an applied value that was also loaded")
	}
	return nonlinPct, hystPct, warnings
}

// ValueU returns the standard uncertainty, in the record's unit, of a value
// calibrated by f at the given raw reading:
//
//	u = √(gᵀ·Cov·g + referenceU²),  g = (1, x, x², …)
//
// The first term is the uncertainty of the fitted curve at x (JCGM 100 §5.1.2
// applied to the coefficients with their covariance); referenceU is the
// standard uncertainty of the reference standard that applied the loads,
// which shifts every point alike and so is added in quadrature, not reduced
// by the fit.
//
// The residual scatter s of a single new reading is NOT included: the
// values liftyard reports are means of many samples, whose own scatter is
// evaluated from the run's data (Type A, in estimate), so adding s here
// would count it twice. A caller stating one single reading adds
// f.ResidualSD in quadrature.
func (f Fit) ValueU(reading, referenceU float64) (u float64) {
	return math.Sqrt(f.fitVar(reading) + referenceU*referenceU)
}

// fitVar returns gᵀ·Cov·g at x.
func (f Fit) fitVar(x float64) float64 {
	v := 0.0
	gi := 1.0
	for i := range f.Cov {
		gj := 1.0
		for j := range f.Cov[i] {
			v += gi * f.Cov[i][j] * gj
			gj *= x
		}
		gi *= x
	}
	return math.Max(v, 0)
}

// Apply calibrates one raw reading with the record's fit: the value in the
// record's Unit and its standard uncertainty as a calibrated value of a run,
//
//	u² = u_fit² + referenceU² + s² + u_h²,  u_h = H/(2√3)
//
// with u_fit² = gᵀ·Cov·g (Fit.ValueU), s the fit's residual SD and H the
// hysteresis (Fit.HysteresisPctFS of the span of values over the
// calibration points), taken as a rectangular distribution of half-width
// H/2 (JCGM 100 §4.3.7). The residual scatter is in because a calibration
// point's departure from the curve (lack of fit, the cell's own
// non-repeatability at that load) is the same for every sample of a run at
// that load: averaging the run does not reduce it, unlike the run's own
// scatter (issue 10). The span term (SpanURel) is left to the caller, as it
// scales with the value. Degrees of freedom by Welch–Satterthwaite (JCGM 100
// eq. G.2b): u_fit and s with ν = Fit.Dof, the rest exactly known (ν = ∞).
func (r Record) Apply(reading float64) Value {
	x := Poly{Coef: r.Fit.Poly}.Eval(reading)
	uf2 := r.Fit.fitVar(reading)
	s2 := r.Fit.ResidualSD * r.Fit.ResidualSD
	uh := r.hysteresisU()
	u := math.Sqrt(uf2 + s2 + r.ReferenceU*r.ReferenceU + uh*uh)
	dof := math.Inf(1)
	if uf2+s2 > 0 && r.Fit.Dof > 0 {
		dof = u * u * u * u / ((uf2*uf2 + s2*s2) / float64(r.Fit.Dof))
	}
	return Value{X: x, U: u, Dof: dof}
}

// hysteresisU is H/(2√3) in Unit: the hysteresis (HysteresisPctFS of the
// span of fitted values over the calibration points) as a rectangular
// distribution of half-width H/2. 0 without hysteresis.
func (r Record) hysteresisU() float64 {
	if r.Fit.HysteresisPctFS <= 0 || len(r.Points) < 2 {
		return 0
	}
	p := Poly{Coef: r.Fit.Poly}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, pt := range r.Points {
		v := p.Eval(pt.Reading)
		lo, hi = min(lo, v), max(hi, v)
	}
	return r.Fit.HysteresisPctFS / 100 * (hi - lo) / (2 * math.Sqrt(3))
}
