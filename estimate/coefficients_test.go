package estimate_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"liftyard/calibrate"
	"liftyard/estimate"
)

// foilWindow simulates one steady window of a foil in turbulent flow (a
// scenario of our own): q has AR(1) turbulence, lift and drag follow q
// (L_i = C_L·q_i·S), plus correlated unsteady load (AR(1) buffeting) and
// white sensor noise; the balance reads body axes.
type foilCase struct {
	n               int
	clTrue, cdTrue  float64
	alphaRad, q0Pa  float64
	areaM2          float64
	qTurbFrac, phiQ float64
	buffetN, phiB   float64
	noiseN          float64
}

func (c foilCase) window(r *rand.Rand) estimate.Window {
	turb := ar1(r, c.n, c.phiQ, 1)
	buf := ar1(r, c.n, c.phiB, 1)
	sdQ := 1 / math.Sqrt(1-c.phiQ*c.phiQ)
	sdB := 1 / math.Sqrt(1-c.phiB*c.phiB)
	w := estimate.Window{
		NormalN: make([]float64, c.n), AxialN: make([]float64, c.n),
		QPa: make([]float64, c.n), AlphaRad: make([]float64, c.n), AreaM2: c.areaM2,
	}
	sa, ca := math.Sincos(c.alphaRad)
	for i := range c.n {
		q := c.q0Pa * (1 + c.qTurbFrac*turb[i]/sdQ)
		l := c.clTrue*q*c.areaM2 + c.buffetN*buf[i]/sdB + c.noiseN*r.NormFloat64()
		d := c.cdTrue*q*c.areaM2 + 0.2*c.noiseN*r.NormFloat64()
		w.NormalN[i] = l*ca + d*sa
		w.AxialN[i] = -l*sa + d*ca
		w.QPa[i] = q
		w.AlphaRad[i] = c.alphaRad
	}
	return w
}

var turbulentFoil = foilCase{
	n: 1500, clTrue: 0.55, cdTrue: 0.03, alphaRad: 0.09, q0Pa: 300, areaM2: 0.08,
	qTurbFrac: 0.04, phiQ: 0.95, buffetN: 0.4, phiB: 0.9, noiseN: 0.3,
}

// Ensure statistical coverage: over 200 seeds the 95 % interval of C_L holds
// the true value 90–99 % of the time, the mean U95 is within 1.5× of the
// true 95 % spread, and plain s/√N (ignoring autocorrelation) covers clearly
// less, which is why N_eff is used (docs/design.md §4).
func TestReduce_Coverage(t *testing.T) {
	const seeds = 200
	c := turbulentFoil
	var covered, coveredNaive int
	var errs []float64
	sumU95 := 0.0
	for s := range uint64(seeds) {
		r := rand.New(rand.NewPCG(s, 77))
		w := c.window(r)
		p, err := estimate.Reduce(&w)
		if err != nil {
			t.Fatal(err)
		}
		e := p.CL.X - c.clTrue
		errs = append(errs, math.Abs(e))
		u95 := p.CL.U95()
		sumU95 += u95
		if math.Abs(e) <= u95 {
			covered++
		}
		// Naive: the same linearised series, s/√N with ν = N − 1.
		typeA := p.CLBudget[0]
		naiveU := typeA.U * math.Sqrt(p.NEff/float64(p.N))
		if math.Abs(e) <= calibrate.K95(float64(p.N-1))*naiveU {
			coveredNaive++
		}
	}
	frac := float64(covered) / seeds
	fracNaive := float64(coveredNaive) / seeds
	slices.Sort(errs)
	spread95 := errs[int(0.95*seeds)-1]
	meanU95 := sumU95 / seeds
	t.Logf("coverage %.3f, naive %.3f, mean U95 %.5f, true 95 %% spread %.5f", frac, fracNaive, meanU95, spread95)
	if frac < 0.90 || frac > 0.99 {
		t.Errorf("coverage %.3f outside 0.90–0.99", frac)
	}
	if ratio := meanU95 / spread95; ratio < 1/1.5 || ratio > 1.5 {
		t.Errorf("mean U95 / true spread = %.2f, want within 1.5×", ratio)
	}
	if fracNaive > frac-0.15 {
		t.Errorf("naive s/√N covers %.3f, not clearly less than %.3f", fracNaive, frac)
	}
}

// Ensure that the linear (GUM) propagation agrees with JCGM 101 Monte Carlo
// for the C_L model C_L = (N cos α − A sin α)/(q·S) with Type B inputs only:
// u within 2 % and the 95 % interval end points within 2.5·10⁻⁴, about 5 %
// of u (JCGM 101 §8 compares end points with such a numerical tolerance δ).
func TestReduce_MonteCarloAgrees(t *testing.T) {
	const n = 50
	nN, aN, qPa, alpha, s := 26.0, 1.0, 500.0, 0.1, 0.1
	w := estimate.Window{
		NormalN: fill(n, nN), AxialN: fill(n, aN), QPa: fill(n, qPa), AlphaRad: fill(n, alpha),
		NormalUN: 0.15, AxialUN: 0.05, QUPa: 2.5, AlphaURad: 0.003, AreaM2: s, AreaUM2: 0.0004,
	}
	p, err := estimate.Reduce(&w)
	if err != nil {
		t.Fatal(err)
	}
	model := func(x []float64) float64 {
		l, _ := estimate.WindAxes(x[0], x[1], x[3])
		return l / (x[2] * x[4])
	}
	in := []estimate.MCInput{
		{X: nN, U: w.NormalUN}, {X: aN, U: w.AxialUN}, {X: qPa, U: w.QUPa},
		{X: alpha, U: w.AlphaURad, Dist: estimate.Rectangular}, {X: s, U: w.AreaUM2, Dist: estimate.Rectangular},
	}
	mean, u, lo, hi := estimate.MonteCarlo(model, in, 400_000, rand.NewPCG(101, 2008))
	t.Logf("GUM: C_L %.5f u %.5f; MCM: mean %.5f u %.5f [%.5f, %.5f]", p.CL.X, p.CL.U, mean, u, lo, hi)
	near(t, "mean", mean, p.CL.X, 2e-4)
	near(t, "u", u, p.CL.U, 0.02*p.CL.U)
	u95 := p.CL.U95()
	near(t, "low end", lo, p.CL.X-u95, 2.5e-4)
	near(t, "high end", hi, p.CL.X+u95, 2.5e-4)
	// The budget carries one line per Type B input plus Type A (zero here).
	if len(p.CLBudget) != 6 {
		t.Errorf("C_L budget has %d lines, want 6: %+v", len(p.CLBudget), p.CLBudget)
	}
}

// Ensure the symmetric-foil identity through Reduce: mirrored loads at −α
// give C_L(−α) = −C_L(α) and C_D(−α) = C_D(α).
func TestReduce_SymmetricFoil(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 5))
	c := turbulentFoil
	c.n = 400
	for _, a := range []float64{0.02, 0.1, 0.2} {
		c.alphaRad = a
		w := c.window(r)
		m := estimate.Window{NormalN: neg(w.NormalN), AxialN: w.AxialN, QPa: w.QPa, AlphaRad: neg(w.AlphaRad), AreaM2: w.AreaM2}
		p, err1 := estimate.Reduce(&w)
		pm, err2 := estimate.Reduce(&m)
		if err := errors.Join(err1, err2); err != nil {
			t.Fatal(err)
		}
		near(t, "C_L odd", pm.CL.X, -p.CL.X, 1e-12)
		near(t, "C_D even", pm.CD.X, p.CD.X, 1e-12)
		near(t, "u(C_L) even", pm.CL.U, p.CL.U, 1e-12)
	}
}

// Ensure that missing samples and bad windows give results or errors, never
// a panic.
func TestReduce_BadInput(t *testing.T) {
	c := turbulentFoil
	c.n = 500
	w := c.window(rand.New(rand.NewPCG(9, 9)))
	full, err := estimate.Reduce(&w)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < c.n; i += 7 {
		w.NormalN[i] = math.NaN()
	}
	for i := 3; i < c.n; i += 11 {
		w.QPa[i] = math.NaN()
	}
	w.AxialN = w.AxialN[:450] // ragged: cut to the shortest
	p, err := estimate.Reduce(&w)
	if err != nil {
		t.Fatal(err)
	}
	if p.N >= 450 || p.N < 350 {
		t.Errorf("N = %d, want the complete samples of the first 450", p.N)
	}
	if math.Abs(p.CL.X-full.CL.X) > full.CL.U95() {
		t.Errorf("C_L with gaps %.4f far from %.4f", p.CL.X, full.CL.X)
	}
	tests := []struct {
		name string
		w    estimate.Window
		want error
	}{
		{"empty", estimate.Window{AreaM2: 1}, estimate.ErrNoSamples},
		{"all NaN", estimate.Window{NormalN: fill(5, math.NaN()), QPa: fill(5, 1), AlphaRad: fill(5, 0), AreaM2: 1}, estimate.ErrNoSamples},
		{"no area", estimate.Window{NormalN: fill(5, 1), QPa: fill(5, 1), AlphaRad: fill(5, 0)}, estimate.ErrReference},
	}
	for _, tc := range tests {
		if _, err := estimate.Reduce(&tc.w); !errors.Is(err, tc.want) {
			t.Errorf("%s: err = %v, want %v", tc.name, err, tc.want)
		}
	}
	// Flow off: q ≈ 0 gives NaN coefficients but still q and loads.
	off := estimate.Window{NormalN: fill(5, 0.1), QPa: []float64{-0.2, 0.1, -0.1, 0, -0.05}, AlphaRad: fill(5, 0), AreaM2: 1}
	p, err = estimate.Reduce(&off)
	if err != nil || !math.IsNaN(p.CL.X) || math.IsNaN(p.QPa.X) {
		t.Errorf("flow off: err %v, C_L %g, q %g", err, p.CL.X, p.QPa.X)
	}
}

func fill(n int, v float64) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = v
	}
	return x
}

func neg(x []float64) []float64 {
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = -v
	}
	return y
}
