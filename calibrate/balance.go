package calibrate

import (
	"errors"
	"fmt"
	"math"
)

// BalanceLoad is one combined loading of a multi-component balance: the
// known applied components and the bridge outputs they produced.
type BalanceLoad struct {
	// Applied holds the K known components (e.g. normal force N, axial
	// force N, pitching moment N·m), in SI, in the same order for every load.
	Applied []float64
	// Outputs holds the N bridge outputs (mV/V, counts), zero-corrected:
	// the no-load output is subtracted first (see Zero), because the fit
	// has no constant term.
	Outputs []float64
}

// Balance maps N bridge outputs to K load components through an
// interaction (cross-talk) matrix fitted by least squares:
//
//	F_k = Σ_j C[k][j]·t_j,  t = (o_1 … o_N [, o_i·o_j for i ≤ j])
//
// The terms t are the outputs, then, with SecondOrder, the N(N+1)/2
// products o_i·o_j in the order (1,1), (1,2), …, (1,N), (2,2), …, (N,N).
// There is no constant term: outputs are zero-corrected.
type Balance struct {
	Components  int  // K, load components
	Outputs     int  // N, bridge outputs
	SecondOrder bool // whether the products o_i·o_j are terms
	// C is the K×P interaction matrix (P = N, or N + N(N+1)/2); row k gives
	// component k in its SI unit.
	C [][]float64
	// CU holds the standard uncertainties of C, K×P.
	CU [][]float64
	// Cov holds, per component, the P×P covariance of its row of C.
	Cov [][][]float64
	// Residuals holds, per load and component, applied − fitted (M×K), SI.
	Residuals [][]float64
	// ResidualSD holds, per component, s_k = √(SSR_k/ν), SI.
	ResidualSD []float64
	Dof        int      // ν = M − P
	Warnings   []string // e.g. few degrees of freedom, ill-conditioning
}

// balanceTerms returns the terms of the fit for one set of outputs.
func balanceTerms(o []float64, second bool) []float64 {
	t := append([]float64(nil), o...)
	if second {
		for i := range o {
			for j := i; j < len(o); j++ {
				t = append(t, o[i]*o[j])
			}
		}
	}
	return t
}

// termName names term j for messages: "output 2" or "output 1 × output 3".
func termName(j, n int) string {
	if j < n {
		return fmt.Sprintf("output %d", j+1)
	}
	j -= n
	for i := range n {
		if j < n-i {
			return fmt.Sprintf("output %d × output %d", i+1, i+1+j)
		}
		j -= n - i
	}
	return "?"
}

// FitBalance fits the interaction matrix of a balance from M combined
// loadings by least squares, one component at a time, with Householder QR
// on column-scaled terms (each term divided by its largest magnitude, an
// exact rescaling undone afterwards). Each component's coefficient
// covariance is s_k²·(AᵀA)⁻¹ from the same factorisation.
//
// Errors (wrapping ErrPoints) for no loads, loads of unequal length, values
// that are not finite, fewer loads than terms + 1, and loads that do not
// separate the terms (a term that is always zero, or terms that move
// together). It never panics on its input.
func FitBalance(loads []BalanceLoad, secondOrder bool) (Balance, error) {
	if len(loads) == 0 {
		return Balance{}, fmt.Errorf("%w: balance: no loads", ErrPoints)
	}
	k, n := len(loads[0].Applied), len(loads[0].Outputs)
	if k == 0 || n == 0 {
		return Balance{}, fmt.Errorf("%w: balance: load 1 has %d components and %d outputs; both must be at least 1", ErrPoints, k, n)
	}
	for i, l := range loads {
		if len(l.Applied) != k || len(l.Outputs) != n {
			return Balance{}, fmt.Errorf("%w: balance: load %d has %d components and %d outputs, load 1 has %d and %d",
				ErrPoints, i+1, len(l.Applied), len(l.Outputs), k, n)
		}
		if !allFinite(l.Applied...) || !allFinite(l.Outputs...) {
			return Balance{}, fmt.Errorf("%w: balance: load %d: a value is not a finite number", ErrPoints, i+1)
		}
	}
	m := len(loads)
	p := len(balanceTerms(loads[0].Outputs, secondOrder))
	if m < p+1 {
		return Balance{}, fmt.Errorf("%w: balance: %d terms need at least %d loads, have %d", ErrPoints, p, p+1, m)
	}

	// Design matrix, column-scaled.
	a := make([]float64, 0, m*p)
	for _, l := range loads {
		a = append(a, balanceTerms(l.Outputs, secondOrder)...)
	}
	scale := make([]float64, p)
	for i := range m {
		for j := range p {
			scale[j] = math.Max(scale[j], math.Abs(a[i*p+j]))
		}
	}
	for j, s := range scale {
		if s == 0 || !allFinite(s) {
			return Balance{}, fmt.Errorf("%w: balance: %s is zero (or too large) in every load: apply loads that move it", ErrPoints, termName(j, n))
		}
	}
	for i := range m {
		for j := range p {
			a[i*p+j] /= scale[j]
		}
	}

	b := Balance{Components: k, Outputs: n, SecondOrder: secondOrder, Dof: m - p,
		C: make([][]float64, k), CU: make([][]float64, k), Cov: make([][][]float64, k),
		Residuals: make([][]float64, m), ResidualSD: make([]float64, k)}
	for i := range m {
		b.Residuals[i] = make([]float64, k)
	}
	illC := false
	cond := 0.0
	y := make([]float64, m)
	for c := range k {
		for i, l := range loads {
			y[i] = l.Applied[c]
		}
		res, err := lsq(m, p, a, y)
		if errors.Is(err, errSingular) {
			return Balance{}, fmt.Errorf("%w: balance: the loads do not separate the %d terms: apply combined loads that vary each output independently", ErrPoints, p)
		}
		illC = illC || res.illC
		cond = res.cond
		s2 := res.ssr / float64(b.Dof)
		b.ResidualSD[c] = math.Sqrt(s2)
		b.C[c] = make([]float64, p)
		b.CU[c] = make([]float64, p)
		b.Cov[c] = make([][]float64, p)
		for j := range p {
			b.C[c][j] = res.coef[j] / scale[j]
			b.Cov[c][j] = make([]float64, p)
			for l := range p {
				b.Cov[c][j][l] = s2 * res.xtxi.At(j, l) / (scale[j] * scale[l])
			}
			b.CU[c][j] = math.Sqrt(b.Cov[c][j][j])
		}
		for i := range m {
			b.Residuals[i][c] = res.resid[i]
		}
		if !allFinite(b.C[c]...) || !allFinite(b.CU[c]...) || !allFinite(b.ResidualSD[c]) {
			return Balance{}, fmt.Errorf("%w: balance: the fit of component %d is not finite (values too large)", ErrPoints, c+1)
		}
	}
	if b.Dof < 3 {
		b.Warnings = append(b.Warnings, fmt.Sprintf("ν = %d (loads − terms) is below 3: the uncertainty of the matrix rests on too few loads; apply more", b.Dof))
	}
	if illC {
		b.Warnings = append(b.Warnings, fmt.Sprintf("balance fit is ill-conditioned (condition number %.3g): the matrix may be wrong; vary the outputs more independently", cond))
	}
	return b, nil
}

// Apply returns the K load components, in SI, for one set of N
// zero-corrected bridge outputs. When len(outputs) differs from b.Outputs
// (or b is not a fitted Balance), every component is NaN (no value), as a
// missing sample is elsewhere.
func (b Balance) Apply(outputs []float64) []float64 {
	out := make([]float64, max(b.Components, 0))
	t, ok := b.terms(outputs)
	for c := range out {
		out[c] = math.NaN()
		if ok {
			out[c] = dot(b.C[c], t)
		}
	}
	return out
}

// terms returns the fit terms of outputs, and whether b can apply them.
func (b Balance) terms(outputs []float64) ([]float64, bool) {
	if len(outputs) != b.Outputs || len(b.C) != b.Components || len(b.Cov) != b.Components {
		return nil, false
	}
	t := balanceTerms(outputs, b.SecondOrder)
	for c := range b.C {
		if len(b.C[c]) != len(t) || len(b.Cov[c]) != len(t) {
			return nil, false
		}
		for _, row := range b.Cov[c] {
			if len(row) != len(t) {
				return nil, false
			}
		}
	}
	return t, true
}

// ApplyValues is Apply with the uncertainty of the fitted matrix: component
// k gets u = √(tᵀ·Cov_k·t) and ν = b.Dof. As in Fit.ValueU, the residual
// scatter of a single new reading and the reference loads' uncertainty are
// not included; add them in quadrature where they apply. Where Apply gives
// NaN, X and U are NaN.
func (b Balance) ApplyValues(outputs []float64) []Value {
	x := b.Apply(outputs)
	out := make([]Value, len(x))
	t, ok := b.terms(outputs)
	for c := range out {
		if !ok {
			out[c] = Value{X: x[c], U: math.NaN()}
			continue
		}
		v := 0.0
		for i := range t {
			for j := range t {
				v += t[i] * b.Cov[c][i][j] * t[j]
			}
		}
		out[c] = Value{X: x[c], U: math.Sqrt(math.Max(v, 0)), Dof: float64(b.Dof)}
	}
	return out
}
