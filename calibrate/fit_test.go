package calibrate_test

import (
	"encoding/csv"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/calibrate"
)

// readPoints reads testdata/<name>.csv (header applied,reading).
func readPoints(t *testing.T, name string) []calibrate.Point {
	t.Helper()
	f, err := os.Open(filepath.Join("testdata", name))
	require.NoError(t, err)
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	require.NoError(t, err)
	require.Equal(t, []string{"applied", "reading"}, rows[0])
	var pts []calibrate.Point
	for _, r := range rows[1:] {
		a, err := strconv.ParseFloat(r[0], 64)
		require.NoError(t, err)
		x, err := strconv.ParseFloat(r[1], 64)
		require.NoError(t, err)
		pts = append(pts, calibrate.Point{Applied: a, Reading: x})
	}
	return pts
}

// lre is the log relative error −log10(|est − cert|/|cert|), capped at 15.
func lre(est, cert float64) float64 {
	d := math.Abs(est-cert) / math.Abs(cert)
	if d == 0 {
		return 15
	}
	return math.Min(15, -math.Log10(d))
}

// Ensure that FitPoly reproduces the certified values of the NIST StRD
// linear least-squares datasets Norris (order 1) and Pontius (order 2).
// Source: NIST/ITL Statistical Reference Datasets, Norris.dat and
// Pontius.dat, certified values (15 significant digits), as listed in
// docs/references.md §5 [C+R]. In both, the NIST model is y = B0 + B1·x
// (+ B2·x²) with x our reading and y our applied value, so the certified
// B's are our poly. Required: LRE ≥ 9 on the coefficients (a project
// choice, docs/references.md §5), 6 significant digits on s(B) and the residual SD.
func TestFitPoly_NIST(t *testing.T) {
	for _, tc := range []struct {
		name, file string
		order      int
		b, sb      []float64
		sd         float64
		dof        int
		minLRE     float64 // required on the coefficients
	}{
		{
			name: "NIST StRD Norris, certified values", file: "norris.csv", order: 1,
			b:  []float64{-0.262323073774029, 1.00211681802045},
			sb: []float64{0.232818234301152, 0.429796848199937e-3},
			sd: 0.884796396144373, dof: 34, minLRE: 11, // measured 12.3 on B0 (amd64); 11 leaves room for FMA on other CPUs
		},
		{
			name: "NIST StRD Pontius, certified values", file: "pontius.csv", order: 2,
			b:  []float64{0.673565789473684e-3, 0.732059160401003e-6, -0.316081871345029e-14},
			sb: []float64{0.107938612033077e-3, 0.157817399981659e-9, 0.486652849992036e-16},
			sd: 0.205177424076185e-3, dof: 37, minLRE: 9,
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			f, err := calibrate.FitPoly(readPoints(t, tc.file), tc.order)
			require.NoError(t, err)
			require.Len(t, f.Poly, tc.order+1)
			assert.Equal(t, tc.dof, f.Dof)
			for k := range tc.b {
				l := lre(f.Poly[k], tc.b[k])
				t.Logf("B%d = %.15g  LRE %.1f;  s(B%d) = %.15g  LRE %.1f", k, f.Poly[k], l, k, f.PolyU[k], lre(f.PolyU[k], tc.sb[k]))
				assert.GreaterOrEqual(t, l, tc.minLRE, "B%d", k)
				assert.GreaterOrEqual(t, lre(f.PolyU[k], tc.sb[k]), 6.0, "s(B%d)", k)
				assert.InDelta(t, f.PolyU[k]*f.PolyU[k], f.Cov[k][k], 1e-12*f.Cov[k][k], "PolyU = √diag Cov")
			}
			t.Logf("residual SD = %.15g  LRE %.1f", f.ResidualSD, lre(f.ResidualSD, tc.sd))
			assert.GreaterOrEqual(t, lre(f.ResidualSD, tc.sd), 6.0, "residual SD")
			assert.Empty(t, f.Warnings, "both datasets support their order")
		})
	}
}

// Ensure that a cubic fit of 24-bit converter counts in the millions
// (1 000 000 … 7 000 000, where x³ reaches 3.4e20) recovers the
// coefficients of noise-free loading and unloading points to near machine
// precision relative to their size. The load cell and its curve are invented.
func TestFitPoly_Cubic24BitCounts(t *testing.T) {
	want := []float64{-500, 3.5e-4, 2e-12, -1e-19} // N, N/count, N/count², N/count³
	var pts []calibrate.Point
	for i := 0; i <= 12; i++ { // loading, 13 levels
		x := 1e6 + 5e5*float64(i)
		pts = append(pts, calibrate.Point{Applied: calibrate.Poly{Coef: want}.Eval(x), Reading: x, Direction: calibrate.Up})
	}
	for i := 12; i >= 0; i -= 2 { // unloading, every other level
		x := 1e6 + 5e5*float64(i)
		pts = append(pts, calibrate.Point{Applied: calibrate.Poly{Coef: want}.Eval(x), Reading: x, Direction: calibrate.Down})
	}
	f, err := calibrate.FitPoly(pts, 3)
	require.NoError(t, err)
	for k, c := range want {
		rel := math.Abs(f.Poly[k]-c) / math.Abs(c)
		t.Logf("c%d = %.16g (want %g), relative error %.1e, LRE %.1f", k, f.Poly[k], c, rel, lre(f.Poly[k], c))
		assert.Less(t, rel, 1e-10, "c%d", k)
	}
	assert.Less(t, f.ResidualSD, 1e-10, "noise-free data: residual SD at rounding level (N)")
	assert.Empty(t, f.Warnings, "the cubic term is needed and ν = 16")
	assert.Equal(t, 0.0, f.HysteresisPctFS, "unloading points lie on the loading curve")
	// Non-linearity from the definition (docs/design.md §3.1), in reading space:
	// the line through the lowest (x = 1e6) and highest (x = 7e6) loading
	// points, as a function of the applied value; the largest deviation of a
	// loading reading from it, in % of the 6e6-count span.
	a0, a1 := pts[0].Applied, pts[12].Applied
	dev := 0.0
	for _, p := range pts[:13] {
		line := 1e6 + 6e6*(p.Applied-a0)/(a1-a0)
		dev = math.Max(dev, math.Abs(p.Reading-line))
	}
	assert.InDelta(t, dev/6e6*100, f.NonlinearityPctFS, 1e-9)
	assert.Greater(t, f.NonlinearityPctFS, 0.1, "the curve is visibly non-linear")
}

// Ensure that non-linearity and hysteresis follow docs/design.md §3.1 on a small
// invented point set, checked against arithmetic done by hand:
//
//	loading:   0 N → 1000, 50 N → 3010 and 3030 (mean 3020), 100 N → 5000
//	unloading: 100 N → 5000, 50 N → 3060, 0 N → 1010
//	line through (0 N, 1000) and (100 N, 5000): 3000 at 50 N; span 4000
//	non-linearity = |3020 − 3000| / 4000 = 0.5 %
//	hysteresis = max(|5000−5000|, |3060−3020|, |1010−1000|) / 4000 = 40/4000 = 1.0 %
func TestFitPoly_NonlinearityHysteresisByHand(t *testing.T) {
	up, down := calibrate.Up, calibrate.Down
	pts := []calibrate.Point{
		{Applied: 0, Reading: 1000, Direction: up},
		{Applied: 50, Reading: 3010, Direction: up},
		{Applied: 50, Reading: 3030, Direction: up},
		{Applied: 100, Reading: 5000, Direction: up},
		{Applied: 100, Reading: 5000, Direction: down},
		{Applied: 50, Reading: 3060, Direction: down},
		{Applied: 0, Reading: 1010, Direction: down},
	}
	f, err := calibrate.FitPoly(pts, 1)
	require.NoError(t, err)
	assert.InDelta(t, 0.5, f.NonlinearityPctFS, 1e-12)
	assert.InDelta(t, 1.0, f.HysteresisPctFS, 1e-12)

	// Without directions every point counts as loading: levels 0 N (1000,
	// 1010 → 1005), 50 N (3010, 3030, 3060 → 3033.33…), 100 N (5000);
	// line 1005 + 39.95·50 = 3002.5; non-linearity = 30.8333…/3995 % ·100.
	for i := range pts {
		pts[i].Direction = ""
	}
	f, err = calibrate.FitPoly(pts, 1)
	require.NoError(t, err)
	assert.InDelta(t, (3033.0+1.0/3-3002.5)/3995*100, f.NonlinearityPctFS, 1e-12)
	assert.Equal(t, 0.0, f.HysteresisPctFS)
}

// Ensure that bad point sets are refused with a message that says what is
// wrong, wrapping ErrPoints.
func TestFitPoly_Errors(t *testing.T) {
	line := func(n int) []calibrate.Point {
		var p []calibrate.Point
		for i := range n {
			p = append(p, calibrate.Point{Applied: float64(10 * i), Reading: float64(100 + 7*i)})
		}
		return p
	}
	withPoint := func(i int, p calibrate.Point) []calibrate.Point {
		pts := line(5)
		pts[i] = p
		return pts
	}
	for _, tc := range []struct {
		name  string
		pts   []calibrate.Point
		order int
		want  string
	}{
		{"order 0", line(5), 0, "order 0 outside 1–3"},
		{"order 4", line(9), 4, "order 4 outside 1–3"},
		{"no points", nil, 1, "order 1 needs at least 3 points, have 0"},
		{"too few for quadratic", line(3), 2, "order 2 needs at least 4 points, have 3"},
		{"NaN applied", withPoint(1, calibrate.Point{Applied: math.NaN(), Reading: 5}), 1, "point 2 (applied NaN, reading 5): not a finite number"},
		{"infinite reading", withPoint(4, calibrate.Point{Applied: 1, Reading: math.Inf(-1)}), 1, "point 5 (applied 1, reading -Inf): not a finite number"},
		{"all readings equal", []calibrate.Point{{Applied: 0, Reading: 7}, {Applied: 1, Reading: 7}, {Applied: 2, Reading: 7}, {Applied: 3, Reading: 7}}, 1,
			"all 4 readings are 7: nothing to fit (apply different loads)"},
		{"too few distinct readings", []calibrate.Point{{0, 1, ""}, {1, 1, ""}, {2, 2, ""}, {3, 2, ""}, {4, 3, ""}}, 3,
			"only 3 distinct readings: order 3 needs at least 4"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := calibrate.FitPoly(tc.pts, tc.order)
			require.Error(t, err)
			assert.ErrorIs(t, err, calibrate.ErrPoints)
			assert.Equal(t, "calibration points cannot be fitted: "+tc.want, err.Error())
		})
	}
}

// Ensure that FitPoly warns when the data do not support the order or the
// fit's uncertainty rests on too few points, and stays quiet otherwise.
func TestFitPoly_Warnings(t *testing.T) {
	// Readings −2…2 with a residual pattern e orthogonal to 1, x and x²
	// (Σe = Σx·e = Σx²·e = 0), so the quadratic term removes nothing:
	// F = 0, p = 1.
	e := []float64{0.1, -0.2, 0, 0.2, -0.1}
	var flat, exact []calibrate.Point
	for i, x := range []float64{-2, -1, 0, 1, 2} {
		flat = append(flat, calibrate.Point{Applied: 3 + 2*x + e[i], Reading: x})
		exact = append(exact, calibrate.Point{Applied: 3 + 2*x, Reading: x})
	}
	curved := []calibrate.Point{{0, 0, ""}, {1, 1, ""}, {4.1, 2, ""}, {8.9, 3, ""}, {16, 4, ""}, {25.1, 5, ""}, {36, 6, ""}}
	for _, tc := range []struct {
		name  string
		pts   []calibrate.Point
		order int
		want  []string
	}{
		{"quadratic term adds nothing", flat, 2, []string{
			"order 2 not justified by the data (F-test, p = 1)",
			"ν = 2 (points − order − 1) is below 3: the uncertainty of the fit rests on too few points; take more"}},
		{"noise-free straight line fitted with a quadratic", exact, 2, []string{
			"order 2 not justified by the data (order 1 fits them exactly)",
			"ν = 2 (points − order − 1) is below 3: the uncertainty of the fit rests on too few points; take more"}},
		{"straight line fitted with a straight line", flat, 1, nil},
		{"curved data fitted with a quadratic", curved, 2, nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			f, err := calibrate.FitPoly(tc.pts, tc.order)
			require.NoError(t, err)
			assert.Equal(t, tc.want, f.Warnings)
		})
	}
}

// Ensure that the fit part of ValueU, √(gᵀ·Cov·g), agrees with a Monte Carlo
// refit: the applied values are perturbed by N(0, s) 4000 times (fixed
// PCG seed), each set is refitted, and the SD of the predicted value at the
// reading is compared. With 4000 draws the sampled SD has a relative
// standard error of 1/√(2·3999) ≈ 1.1 %; the tolerance is 5 % (gonum distuv
// tests compare sampled moments the same way). Invented quadratic load cell.
func TestFit_ValueU_MonteCarlo(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 2026))
	var pts []calibrate.Point
	for i := range 11 {
		x := 200000 + 80000*float64(i) // counts
		for range 2 {
			y := -20 + 2.5e-4*x + 3e-12*x*x + rng.NormFloat64()*0.05 // N
			pts = append(pts, calibrate.Point{Applied: y, Reading: x})
		}
	}
	f, err := calibrate.FitPoly(pts, 2)
	require.NoError(t, err)
	s := f.ResidualSD
	readings := []float64{200000, 600000, 1000000, 1300000} // low end, middle, high end, beyond the range
	const draws = 4000
	var sum, sum2 [4]float64
	pert := make([]calibrate.Point, len(pts))
	for range draws {
		for i, p := range pts {
			pert[i] = calibrate.Point{Applied: p.Applied + rng.NormFloat64()*s, Reading: p.Reading}
		}
		g, err := calibrate.FitPoly(pert, 2)
		require.NoError(t, err)
		for j, x := range readings {
			v := calibrate.Poly{Coef: g.Poly}.Eval(x)
			sum[j] += v
			sum2[j] += v * v
		}
	}
	for j, x := range readings {
		mean := sum[j] / draws
		sd := math.Sqrt((sum2[j] - draws*mean*mean) / (draws - 1))
		u := f.ValueU(x, 0)
		t.Logf("reading %g: ValueU %.5g N, Monte Carlo %.5g N", x, u, sd)
		assert.InEpsilon(t, sd, u, 0.05, "reading %g", x)
	}
	// The reference standard adds in quadrature.
	assert.InDelta(t, math.Hypot(f.ValueU(600000, 0), 0.03), f.ValueU(600000, 0.03), 1e-15)
}

// Ensure that, for a straight line, the uncertainty of the fitted value at
// the mean reading is s/√n (the textbook regression identity, common
// practice), here on NIST StRD Norris with its certified residual SD.
func TestFit_ValueU_AtMeanIsSOverRootN(t *testing.T) {
	pts := readPoints(t, "norris.csv")
	f, err := calibrate.FitPoly(pts, 1)
	require.NoError(t, err)
	xm := 0.0
	for _, p := range pts {
		xm += p.Reading / float64(len(pts))
	}
	assert.InEpsilon(t, 0.884796396144373/6, f.ValueU(xm, 0), 1e-9) // n = 36
}

// Ensure that a record calibrates a reading with its fit, combines the fit
// curve's u, the residual scatter s (issue 10: a value's u sat below the
// residual SD), the hysteresis and the reference standard's u, and gives
// the Welch–Satterthwaite degrees of freedom (JCGM 100 eq. G.2b):
// ν_eff = u⁴/((u_fit⁴ + s⁴)/ν). Norris: certified residual SD 0.884 796 396 144 373
// (NIST StRD).
func TestRecord_Apply(t *testing.T) {
	f, err := calibrate.FitPoly(readPoints(t, "norris.csv"), 1)
	require.NoError(t, err)
	assert.InEpsilon(t, 0.884796396144373, f.ResidualSD, 1e-9)
	f.HysteresisPctFS = 0
	r := calibrate.Record{Fit: f, ReferenceU: 0.2}
	v := r.Apply(500)
	assert.InDelta(t, f.Poly[0]+500*f.Poly[1], v.X, 1e-12)
	uf, s := f.ValueU(500, 0), f.ResidualSD
	assert.InDelta(t, math.Sqrt(uf*uf+s*s+0.04), v.U, 1e-12)
	assert.GreaterOrEqual(t, v.U, s, "a value's u is never below the residual SD")
	assert.InEpsilon(t, math.Pow(v.U, 4)/((math.Pow(uf, 4)+math.Pow(s, 4))/34), v.Dof, 1e-12)
	assert.Greater(t, v.Dof, 34.0)

	r.ReferenceU = 0
	assert.InDelta(t, 34.0, r.Apply(500).Dof, 3, "no reference u: ν_eff near ν of the fit")
	assert.GreaterOrEqual(t, r.Apply(500).Dof, 34.0)

	// Hysteresis H = 1 % of the span of values: u_h = H/(2√3) adds in
	// quadrature (rectangular, half-width H/2, JCGM 100 §4.3.7).
	r.Points = []calibrate.Point{{Reading: 0}, {Reading: 1000}}
	r.Fit.HysteresisPctFS = 1
	spanV := math.Abs(1000 * f.Poly[1])
	uh := 0.01 * spanV / (2 * math.Sqrt(3))
	assert.InDelta(t, math.Sqrt(uf*uf+s*s+uh*uh), r.Apply(500).U, 1e-12)
}

// Ensure that no input makes FitPoly panic: random junk with NaN, ±Inf,
// duplicates, huge and tiny values, any order. Every failure wraps
// ErrPoints, and every success has finite numbers throughout.
func TestFitPoly_JunkNeverPanics(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	junk := []float64{math.NaN(), math.Inf(1), math.Inf(-1), 0, 0, 1, 1, -1, 1e300, -1e308, 1e308, 1e-300, 5e-324,
		1e6, 1e6 + 1e-9, 3e6, 4e15, math.MaxFloat64, -math.MaxFloat64}
	pick := func() float64 {
		if rng.IntN(3) == 0 {
			return junk[rng.IntN(len(junk))]
		}
		return rng.NormFloat64() * math.Pow(10, float64(rng.IntN(40)-20))
	}
	ok, refused := 0, 0
	for range 5000 {
		n := rng.IntN(9)
		pts := make([]calibrate.Point, n)
		for i := range pts {
			pts[i] = calibrate.Point{Applied: pick(), Reading: pick(), Direction: []calibrate.Direction{"", calibrate.Up, calibrate.Down, "sideways"}[rng.IntN(4)]}
			if i > 0 && rng.IntN(4) == 0 {
				pts[i] = pts[i-1] // duplicates
			}
		}
		f, err := calibrate.FitPoly(pts, rng.IntN(6)-1)
		if err != nil {
			require.ErrorIs(t, err, calibrate.ErrPoints)
			refused++
			continue
		}
		ok++
		for _, v := range append(append(slicesConcat(f.Cov), f.Poly...), f.PolyU...) {
			require.False(t, math.IsNaN(v) || math.IsInf(v, 0), "non-finite result for %v", pts)
		}
		require.False(t, math.IsNaN(f.NonlinearityPctFS) || math.IsNaN(f.HysteresisPctFS) || math.IsNaN(f.ResidualSD), "%v", pts)
		_ = f.ValueU(pick(), pick())
	}
	t.Logf("%d fitted, %d refused", ok, refused)
	assert.Positive(t, ok)
	assert.Positive(t, refused)
}

func slicesConcat(m [][]float64) []float64 {
	var out []float64
	for _, r := range m {
		out = append(out, r...)
	}
	return out
}
