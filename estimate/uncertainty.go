package estimate

import (
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/dsp/fourier"
	"gonum.org/v1/gonum/stat/distuv"

	"liftyard/calibrate"
)

// NEff returns the effective number of independent samples of the mean of x,
// a stationary series sampled at equal spacing:
//
//	N_eff = N / [1 + 2·Σ_{k=1}^{K} (1 − k/N)·ρ_k]
//
// where ρ_k is the sample autocorrelation at lag k (biased estimator,
// c_k/c_0 with c_k = (1/N)·Σ (x_i − x̄)(x_{i+k} − x̄)). The identity
// Var(x̄) = (σ²/N)·[1 + 2·Σ_{k=1}^{N−1} (1 − k/N)·ρ_k] is exact for a stationary
// series (Bayley & Hammersley, J. R. Stat. Soc. Suppl. 8 (1946) 184; Bendat &
// Piersol, Random Data, 4th ed. 2010, ch. 8). The sample ρ_k is noisy at long
// lags, so the sum is truncated at K, the last lag before the first
// non-positive ρ_k (the "first zero crossing" rule). Negative correlations
// are thereby never counted, so N_eff ≤ N: an anti-correlated series is not
// credited with more information than independent samples (a conservative
// choice). The result is clamped to [1, N]. NaN samples are skipped (the
// series is compacted). Fewer than 3 samples, or a constant series, give N.
//
// Cost: O(N·K) for N ≤ 4096, otherwise O(N log N) by FFT.
func NEff(x []float64) float64 {
	clean := x
	for _, v := range x {
		if math.IsNaN(v) {
			clean = make([]float64, 0, len(x))
			for _, w := range x {
				if !math.IsNaN(w) {
					clean = append(clean, w)
				}
			}
			break
		}
	}
	n := len(clean)
	if n < 3 {
		return float64(n)
	}
	mean := 0.0
	for _, v := range clean {
		mean += v
	}
	mean /= float64(n)
	d := make([]float64, n)
	c0 := 0.0
	for i, v := range clean {
		d[i] = v - mean
		c0 += d[i] * d[i]
	}
	if !(c0 > 0) || math.IsInf(c0, 0) {
		return float64(n)
	}
	var rho func(k int) float64
	if n <= 4096 {
		rho = func(k int) float64 {
			s := 0.0
			for i := 0; i+k < n; i++ {
				s += d[i] * d[i+k]
			}
			return s / c0
		}
	} else {
		acf := autocovFFT(d)
		rho = func(k int) float64 { return acf[k] / acf[0] }
	}
	return neffSum(n, rho)
}

// neffSum applies the truncated N_eff sum to autocorrelations rho(k), k ≥ 1.
func neffSum(n int, rho func(k int) float64) float64 {
	s := 0.0
	for k := 1; k < n; k++ {
		r := rho(k)
		if !(r > 0) {
			break
		}
		s += (1 - float64(k)/float64(n)) * r
	}
	ne := float64(n) / (1 + 2*s)
	return math.Max(1, math.Min(float64(n), ne))
}

// autocovFFT returns the unnormalised autocovariance Σ d_i·d_{i+k} for every
// lag k of the zero-mean series d, by zero-padded FFT (Wiener–Khinchin).
func autocovFFT(d []float64) []float64 {
	n := len(d)
	m := 1
	for m < 2*n {
		m <<= 1
	}
	fft := fourier.NewFFT(m)
	seq := make([]float64, m)
	copy(seq, d)
	c := fft.Coefficients(nil, seq)
	for i, v := range c {
		c[i] = complex(real(v)*real(v)+imag(v)*imag(v), 0)
	}
	out := fft.Sequence(nil, c)
	for i := range out {
		out[i] /= float64(m)
	}
	return out[:n]
}

// WelchSatterthwaite returns the effective degrees of freedom of the combined
// standard uncertainty of a budget (JCGM 100:2008 eq. G.2b):
//
//	ν_eff = u_c⁴ / Σ_i (u_i⁴/ν_i),  u_i = |c_i|·u(x_i) (Contribution.UY)
//
// Contributions with ν_i = +Inf add nothing to the denominator; ν_i < 1 or
// NaN is taken as 1 (the most doubtful case) rather than rejected. When the
// denominator is zero (all inputs exact, or u_c = 0) the result is +Inf.
// ν_eff is returned unrounded; calibrate.K95 interpolates the t quantile.
func WelchSatterthwaite(cs []Contribution) float64 {
	uc2, den := 0.0, 0.0
	for _, c := range cs {
		u2 := c.UY * c.UY
		uc2 += u2
		if math.IsInf(c.Dof, 1) || u2 == 0 {
			continue
		}
		nu := c.Dof
		if !(nu >= 1) {
			nu = 1
		}
		den += u2 * u2 / nu
	}
	if den == 0 {
		return math.Inf(1)
	}
	return uc2 * uc2 / den
}

// Combine returns the combined standard uncertainty of a budget of
// uncorrelated contributions, u_c = √(Σ u_i²) (JCGM 100 eq. 10), with its
// Welch–Satterthwaite degrees of freedom. X is left zero for the caller: a
// budget holds uncertainties, not the estimate. Correlated inputs must be
// merged into one contribution first (coefficients.go does so for the Type A
// part by propagating the sample series).
func Combine(cs []Contribution) calibrate.Value {
	uc2 := 0.0
	for _, c := range cs {
		uc2 += c.UY * c.UY
	}
	return calibrate.Value{U: math.Sqrt(uc2), Dof: WelchSatterthwaite(cs)}
}

// CoverageFactor returns k_p = t_{(1+p)/2}(ν), the two-sided Student t
// coverage factor for coverage probability p (JCGM 100 Annex G.3, Table G.2).
// ν = +Inf (or ν > 10⁷) gives the normal quantile; ν < 1 is taken as 1.
func CoverageFactor(dof, p float64) float64 {
	q := (1 + p) / 2
	if math.IsInf(dof, 1) || dof > 1e7 {
		return distuv.UnitNormal.Quantile(q)
	}
	if !(dof >= 1) {
		dof = 1
	}
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: dof}.Quantile(q)
}

// Distribution is the probability distribution assigned to a Monte Carlo
// input (JCGM 101:2008 §6.4).
type Distribution int

// The distributions MonteCarlo can draw from.
const (
	Gaussian    Distribution = iota // N(X, U²)
	Rectangular                     // uniform on X ± √3·U (half-width a = √3·U)
)

// MCInput is one input quantity of a Monte Carlo propagation: its best
// estimate X and standard uncertainty U, in the input's SI unit, and the
// distribution assigned to it. Inputs are independent.
type MCInput struct {
	Dist Distribution
	X, U float64
}

// MonteCarlo propagates distributions through the model y = f(x) by the Monte
// Carlo method of JCGM 101:2008 (GUM Supplement 1), §7: it draws trials
// samples of the inputs, evaluates f on each and returns the mean and standard
// deviation of the y values and the probabilistically symmetric 95 %
// coverage interval [y_(r), y_(r+q)], q = ⌊0.95·M + ½⌋, r = ⌊(M − q + 1)/2⌋
// (order statistics of the sorted values; JCGM 101 §7.7.2).
//
// f receives a slice it must not retain (it is reused between trials).
// Draws where f returns NaN or ±Inf are dropped. src makes the result
// reproducible (e.g. rand.NewPCG(seed1, seed2)); nil is refused with NaNs, as
// are fewer than 100 usable trials.
func MonteCarlo(f func(x []float64) float64, inputs []MCInput, trials int, src rand.Source) (mean, u, lo95, hi95 float64) {
	nan := math.NaN()
	if src == nil || trials < 100 || f == nil {
		return nan, nan, nan, nan
	}
	r := rand.New(src)
	x := make([]float64, len(inputs))
	ys := make([]float64, 0, trials)
	for range trials {
		for i, in := range inputs {
			switch in.Dist {
			case Rectangular:
				x[i] = in.X + math.Sqrt(3)*in.U*(2*r.Float64()-1)
			default:
				x[i] = in.X + in.U*r.NormFloat64()
			}
		}
		y := f(x)
		if math.IsNaN(y) || math.IsInf(y, 0) {
			continue
		}
		ys = append(ys, y)
	}
	m := len(ys)
	if m < 100 {
		return nan, nan, nan, nan
	}
	// Welford's update keeps the variance accurate for large means.
	var mu, m2 float64
	for i, y := range ys {
		d := y - mu
		mu += d / float64(i+1)
		m2 += d * (y - mu)
	}
	slices.Sort(ys)
	q := int(math.Floor(0.95*float64(m) + 0.5))
	rr := (m - q + 1) / 2
	if rr < 1 {
		rr = 1
	}
	return mu, math.Sqrt(m2 / float64(m-1)), ys[rr-1], ys[min(rr+q-1, m-1)]
}
