package calibrate

import (
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"
)

// lsqResult is a linear least-squares solution of A·b ≈ y.
type lsqResult struct {
	coef  []float64  // b, length p
	resid []float64  // y − A·b, length n
	ssr   float64    // Σ resid²
	xtxi  *mat.Dense // (AᵀA)⁻¹ = R⁻¹·R⁻ᵀ, p×p (multiply by s² for the covariance)
	cond  float64    // condition number of A (from the QR factorisation)
	illC  bool       // cond above mat.ConditionTolerance: the numbers may be wrong
}

// errSingular is returned by lsq when the design matrix is exactly rank
// deficient; callers turn it into a message that says what to fix.
var errSingular = errors.New("singular design matrix")

// lsq solves min ‖A·b − y‖₂ by Householder QR (never the normal equations),
// with A given row-major as n×p. It returns errSingular when R has an exact
// zero on its diagonal, and marks the result ill-conditioned when the
// condition number exceeds mat.ConditionTolerance.
func lsq(n, p int, a, y []float64) (lsqResult, error) {
	A := mat.NewDense(n, p, a)
	var qr mat.QR
	qr.Factorize(A)
	var b mat.VecDense
	res := lsqResult{cond: qr.Cond()}
	if err := qr.SolveVecTo(&b, false, mat.NewVecDense(n, y)); err != nil {
		var c mat.Condition
		if !errors.As(err, &c) || math.IsInf(float64(c), 1) || math.IsNaN(float64(c)) {
			return res, errSingular
		}
		res.illC = true
	}
	res.coef = make([]float64, p)
	for j := range p {
		res.coef[j] = b.AtVec(j)
	}
	res.resid = make([]float64, n)
	for i := range n {
		f := 0.0
		for j := range p {
			f += a[i*p+j] * res.coef[j]
		}
		res.resid[i] = y[i] - f
		res.ssr += res.resid[i] * res.resid[i]
	}
	var r mat.Dense
	qr.RTo(&r)
	rt := mat.NewTriDense(p, mat.Upper, nil)
	for i := range p {
		for j := i; j < p; j++ {
			rt.SetTri(i, j, r.At(i, j))
		}
	}
	var ri mat.TriDense
	if err := ri.InverseTri(rt); err != nil {
		var c mat.Condition
		if !errors.As(err, &c) || math.IsInf(float64(c), 1) || math.IsNaN(float64(c)) {
			return res, errSingular
		}
		res.illC = true
	}
	res.xtxi = mat.NewDense(p, p, nil)
	res.xtxi.Mul(&ri, ri.T())
	return res, nil
}

// allFinite reports whether every value is finite.
func allFinite(v ...float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}
