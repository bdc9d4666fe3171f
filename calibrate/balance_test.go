package calibrate_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/calibrate"
)

// Our own invented three-component balance (normal force N, axial force N,
// pitching moment N·m) with three bridges and a few % of cross-talk: each
// row maps the bridge outputs (mV/V) to one component.
var (
	balanceC1 = [][]float64{
		{250.0, 6.0, -3.5}, // N from outputs 1, 2, 3
		{-4.0, 120.0, 2.5}, // A
		{1.2, -0.8, 30.0},  // M
	}
	// second-order terms in the order o1², o1·o2, o1·o3, o2², o2·o3, o3²
	balanceC2 = [][]float64{
		{1.5, -0.6, 0.3, 0.2, 0.1, -0.4},
		{0.25, 0.8, -0.1, -0.9, 0.05, 0.3},
		{-0.05, 0.02, 0.4, 0.01, -0.2, 0.15},
	}
)

// combinedLoads returns a 4-level factorial of outputs in −1.5…1.5 mV/V
// (64 combined loadings) and the components the invented balance gives them.
func combinedLoads(second bool) []calibrate.BalanceLoad {
	lv := []float64{-1.5, -0.5, 0.5, 1.5}
	var loads []calibrate.BalanceLoad
	for _, o1 := range lv {
		for _, o2 := range lv {
			for _, o3 := range lv {
				o := []float64{o1 + 0.1*o2, o2 - 0.05*o3, o3 + 0.07*o1} // not a pure grid
				t := []float64{o[0], o[1], o[2]}
				if second {
					t = append(t, o[0]*o[0], o[0]*o[1], o[0]*o[2], o[1]*o[1], o[1]*o[2], o[2]*o[2])
				}
				app := make([]float64, 3)
				for k := range 3 {
					row := balanceC1[k]
					if second {
						row = append(append([]float64(nil), row...), balanceC2[k]...)
					}
					for j := range t {
						app[k] += row[j] * t[j]
					}
				}
				loads = append(loads, calibrate.BalanceLoad{Applied: app, Outputs: o})
			}
		}
	}
	return loads
}

func wantRow(k int, second bool) []float64 {
	r := append([]float64(nil), balanceC1[k]...)
	if second {
		r = append(r, balanceC2[k]...)
	}
	return r
}

// Ensure that FitBalance recovers a known interaction matrix, linear and
// with second-order terms, from noise-free combined loadings to 1e-9, and
// that Apply inverts the loadings.
func TestFitBalance_NoiseFree(t *testing.T) {
	for _, tc := range []struct {
		name   string
		second bool
		terms  int
	}{
		{"linear, 3×3", false, 3},
		{"second order, 3×9", true, 9},
	} {
		t.Run(tc.name, func(t *testing.T) {
			loads := combinedLoads(tc.second)
			b, err := calibrate.FitBalance(loads, tc.second)
			require.NoError(t, err)
			assert.Equal(t, 3, b.Components)
			assert.Equal(t, 3, b.Outputs)
			assert.Equal(t, 64-tc.terms, b.Dof)
			require.Len(t, b.C, 3)
			for k := range 3 {
				require.Len(t, b.C[k], tc.terms)
				for j, w := range wantRow(k, tc.second) {
					assert.InDelta(t, w, b.C[k][j], 1e-9, "C[%d][%d]", k, j)
				}
				assert.Less(t, b.ResidualSD[k], 1e-12)
			}
			got := b.Apply(loads[17].Outputs)
			for k := range 3 {
				assert.InDelta(t, loads[17].Applied[k], got[k], 1e-9)
				assert.InDelta(t, 0, b.Residuals[17][k], 1e-12)
			}
			assert.Empty(t, b.Warnings)
		})
	}
}

// Ensure that with noise on the applied loads the fitted coefficients lie
// within 3σ of the true ones (σ = their stated uncertainties), the residual
// SD estimates the noise, and ApplyValues gives the matrix's uncertainty.
// Fixed seed; 27 coefficients, each off by more than 3σ with probability
// 0.27 %.
func TestFitBalance_NoisyWithinUncertainty(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 14))
	const noise = 0.05 // N, N, N·m
	for _, second := range []bool{false, true} {
		loads := combinedLoads(second)
		for i := range loads {
			for k := range loads[i].Applied {
				loads[i].Applied[k] += rng.NormFloat64() * noise
			}
		}
		b, err := calibrate.FitBalance(loads, second)
		require.NoError(t, err)
		for k := range 3 {
			for j, w := range wantRow(k, second) {
				assert.LessOrEqual(t, math.Abs(b.C[k][j]-w), 3*b.CU[k][j], "second=%v C[%d][%d] = %g ± %g, true %g", second, k, j, b.C[k][j], b.CU[k][j], w)
				assert.Positive(t, b.CU[k][j])
			}
			assert.InEpsilon(t, noise, b.ResidualSD[k], 0.25, "component %d", k)
		}
		v := b.ApplyValues([]float64{1, 0.5, -0.5})
		require.Len(t, v, 3)
		for k := range 3 {
			assert.Positive(t, v[k].U)
			assert.Less(t, v[k].U, noise, "a fitted value is better known than one load")
			assert.Equal(t, float64(b.Dof), v[k].Dof)
		}
	}
}

// Ensure that bad load sets are refused with a message that says what to
// fix, and that Apply gives NaN, not a panic, for outputs of the wrong length.
func TestFitBalance_Errors(t *testing.T) {
	good := combinedLoads(false)
	for _, tc := range []struct {
		name   string
		loads  []calibrate.BalanceLoad
		second bool
		want   string
	}{
		{"no loads", nil, false, "balance: no loads"},
		{"no outputs", []calibrate.BalanceLoad{{Applied: []float64{1}}}, false, "balance: load 1 has 1 components and 0 outputs; both must be at least 1"},
		{"ragged", append(good[:5:5], calibrate.BalanceLoad{Applied: []float64{1, 2, 3}, Outputs: []float64{1, 2}}), false,
			"balance: load 6 has 3 components and 2 outputs, load 1 has 3 and 3"},
		{"NaN output", append(good[:5:5], calibrate.BalanceLoad{Applied: []float64{1, 2, 3}, Outputs: []float64{1, math.NaN(), 2}}), false,
			"balance: load 6: a value is not a finite number"},
		{"too few loads for second order", good[:9], true, "balance: 9 terms need at least 10 loads, have 9"},
		{"an output never moves", []calibrate.BalanceLoad{
			{[]float64{1}, []float64{1, 0}}, {[]float64{2}, []float64{2, 0}}, {[]float64{3}, []float64{3, 0}}}, false,
			"balance: output 2 is zero (or too large) in every load: apply loads that move it"},
		{"outputs move together", []calibrate.BalanceLoad{
			{[]float64{1}, []float64{1, 2}}, {[]float64{2}, []float64{2, 4}}, {[]float64{3}, []float64{3, 6}}, {[]float64{5}, []float64{-1, -2}}}, false,
			"balance: the loads do not separate the 2 terms: apply combined loads that vary each output independently"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := calibrate.FitBalance(tc.loads, tc.second)
			require.Error(t, err)
			assert.ErrorIs(t, err, calibrate.ErrPoints)
			assert.Equal(t, "calibration points cannot be fitted: "+tc.want, err.Error())
		})
	}
	b, err := calibrate.FitBalance(good, false)
	require.NoError(t, err)
	for _, got := range [][]float64{b.Apply([]float64{1, 2}), b.Apply(nil), calibrate.Balance{Components: 2, Outputs: 1}.Apply([]float64{1})} {
		for _, v := range got {
			assert.True(t, math.IsNaN(v))
		}
	}
	assert.True(t, math.IsNaN(b.ApplyValues([]float64{1})[0].U))
}
