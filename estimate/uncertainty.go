package estimate

import (
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/dsp/fourier"
	"gonum.org/v1/gonum/stat/distuv"

	"liftyard/calibrate"
)

// Window rule and limits of the Type A evaluation (TypeAMean).
const (
	// sokalC is c of the window rule W ≥ c·τ̂_int(W). Sokal (1997) finds
	// c ≈ 4–5 enough for a near-exponential autocorrelation and advises more
	// otherwise; gusts are a sum of exponentials of very different time
	// scales, and c = 8 keeps the coverage of the sum-of-AR(1) test above
	// 0.90 (docs/physics.md "Type A of a segment").
	sokalC = 8
	// windowCapFrac caps the window at N/3: the bias correction divides by
	// N − (2W+1), which stays above N/3.
	windowCapFrac = 3
	// MinNEff is the N_eff below which a result is flagged: the window rule
	// W ≥ 8·τ_int inside W ≤ N/3 needs N ≥ 24·τ_int, i.e. N_eff =
	// N/(2τ_int) ≥ 12. Below it the segment does not resolve its own
	// correlation time, and the U95 rests on a t factor of very few
	// degrees of freedom.
	MinNEff = 12
)

// TypeA is the Type A evaluation of the mean of a series (TypeAMean).
type TypeA struct {
	N    int     // samples used (NaN skipped)
	U    float64 // standard uncertainty of the mean, in the series' unit
	NEff float64 // effective number of independent samples, σ̂²/u², in [1, N]
	Dof  float64 // degrees of freedom of u: N/(2W+1), in [1, N−1]
	// Window is the lag W where the autocorrelation sum stops.
	Window int
	// Settled is false when the window rule was not met below the cap N/3:
	// the series is too short to resolve its own correlation time.
	Settled bool
}

// S returns the bias-corrected standard deviation of one sample, u·√N_eff.
func (a TypeA) S() float64 { return a.U * math.Sqrt(a.NEff) }

// FewIndependent reports whether nEff is below MinNEff (a NaN nEff is not
// flagged: nothing was estimated).
func FewIndependent(nEff float64) bool { return nEff < MinNEff }

// TypeAMean returns the standard uncertainty of the mean of x, a
// stationary series sampled at equal spacing, by the integrated
// autocorrelation time with Sokal's automatic window and the first-order
// bias correction for the estimated mean.
//
// With d_i = x_i − x̄ and the autocovariance Γ̂(k) = (1/N)·Σ_i d_i·d_{i+k}
// (its 1/N already carries the (1 − k/N) weight of the exact finite-N
// variance of a mean, Var(x̄) = (1/N)·Σ_{|k|<N}(1 − |k|/N)·γ_k, so no
// further taper is applied):
//
//	τ̂(W) = ½ + Σ_{k=1}^{W} Γ̂(k)/Γ̂(0)
//	W    = the smallest W with W ≥ c·τ̂(W), c = 8, W ≤ N/3  (Sokal 1997, §3)
//	C(W) = Γ̂(0) + 2·Σ_{k=1}^{W} Γ̂(k) = 2·τ̂(W)·Γ̂(0)
//	u²   = C(W)/(N − (2W+1))
//
// The last line corrects the bias of the estimated mean: each Γ̂(k) is low
// by about Var(x̄), so C(W) is low by (2W+1)·Var(x̄) (Wolff 2004, §3.3; it
// also makes s² unbiased: σ̂² = Γ̂(0) + u²). N_eff = σ̂²/u², clamped to
// [1, N]: an anti-correlated series is not credited with more than N
// independent samples (u is then σ̂/√N). The degrees of freedom follow from
// the variance of τ̂, Var(τ̂)/τ² ≈ 2(2W+1)/N (Madras & Sokal 1988, App. C):
// matching it to a χ² gives ν = N/(2W+1), clamped to [1, N − 1].
// Sources: docs/references.md §11.1.
//
// NaN samples are skipped (the series is compacted). Fewer than 3 samples,
// or a constant series, give N_eff = N and ν = N − 1 (u from the plain
// standard deviation, 0 for a constant).
//
// Cost: O(N·W) for N ≤ 4096, otherwise O(N log N) by FFT.
func TypeAMean(x []float64) TypeA {
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
	nf := float64(n)
	out := TypeA{N: n, NEff: nf, Dof: math.Max(1, nf-1), Settled: true}
	if n == 0 {
		return out
	}
	mean := 0.0
	for _, v := range clean {
		mean += v
	}
	mean /= nf
	d := make([]float64, n)
	ss := 0.0
	for i, v := range clean {
		d[i] = v - mean
		ss += d[i] * d[i]
	}
	if n < 3 || !(ss > 0) || math.IsInf(ss, 0) {
		if n >= 2 {
			out.U = math.Sqrt(ss / (nf - 1) / nf)
		}
		return out
	}
	var gamma func(k int) float64 // Γ̂(k)·N
	if n <= 4096 {
		// Four lags per pass over d (autocov4): the same sums, each in
		// the same order, so the same bits as one lag at a time.
		var lags [4]float64
		base := -1
		gamma = func(k int) float64 {
			if base < 0 || k < base || k >= base+len(lags) {
				base = k
				autocov4(d, k, &lags)
			}
			return lags[k-base]
		}
	} else {
		acf := autocovFFT(d)
		gamma = func(k int) float64 { return acf[k] }
	}
	g0 := ss / nf
	c := g0 // C(W)
	w, maxW := 0, max(1, n/windowCapFrac)
	out.Settled = false
	for w < maxW {
		w++
		c += 2 * gamma(w) / nf
		if float64(w) >= sokalC*c/(2*g0) {
			out.Settled = true
			break
		}
	}
	out.Window = w
	v := c / (nf - float64(2*w+1))
	// N_eff ≤ N: u² ≥ σ̂²/N with σ̂² = Γ̂(0) + u², i.e. u² ≥ Γ̂(0)/(N − 1).
	v = math.Max(v, g0/(nf-1))
	out.U = math.Sqrt(v)
	out.NEff = math.Max(1, math.Min(nf, (g0+v)/v))
	out.Dof = math.Max(1, math.Min(nf-1, nf/float64(2*w+1)))
	return out
}

// autocov4 sets out[j] to Σ d_i·d_{i+k+j} over i, for j = 0…3, each sum
// taken in order of i: four independent sums in one pass keep the
// processor's adders busy where one sum waits on its own last addition.
func autocov4(d []float64, k int, out *[4]float64) {
	n := len(d)
	var s0, s1, s2, s3 float64
	i := 0 // first i not yet summed
	if m := n - k - 3; m > 0 {
		// Sliced so that the compiler checks bounds once per i, not four
		// times.
		a, e := d[:m], d[k:k+m+3]
		for j, x := range a {
			w := e[j : j+4 : j+4]
			s0 += x * w[0]
			s1 += x * w[1]
			s2 += x * w[2]
			s3 += x * w[3]
		}
		i = m
	}
	for j := i; j+k < n; j++ {
		s0 += d[j] * d[j+k]
	}
	for j := i; j+k+1 < n; j++ {
		s1 += d[j] * d[j+k+1]
	}
	for j := i; j+k+2 < n; j++ {
		s2 += d[j] * d[j+k+2]
	}
	*out = [4]float64{s0, s1, s2, s3}
}

// NEff returns the effective number of independent samples of the mean of
// x: TypeAMean(x).NEff.
func NEff(x []float64) float64 { return TypeAMean(x).NEff }

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
