package calibrate_test

import (
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
)

// Ensure that K95 is the two-sided 95 % Student t quantile: JCGM 100:2008
// Table G.2 and standard t tables (values as listed in
// docs/references.md §9.2, recomputed there from the regularised incomplete beta).
func TestK95_StudentT(t *testing.T) {
	for _, tc := range []struct {
		dof, want float64
	}{
		{1, 12.706}, {2, 4.303}, {3, 3.182}, {5, 2.571}, {10, 2.228}, {20, 2.086}, {50, 2.009},
		{math.Inf(1), 1.960},
	} {
		assert.InDelta(t, tc.want, calibrate.K95(tc.dof), 5e-4, "ν = %g", tc.dof)
	}
	assert.Equal(t, calibrate.K95(1), calibrate.K95(0.3), "ν below 1 is treated as 1")
	v := calibrate.Value{X: 3, U: 0.5, Dof: 10}
	assert.InDelta(t, 2.228*0.5, v.U95(), 5e-4)
}

// Ensure that a polynomial evaluates in ascending powers (value = c0 + c1·r + c2·r²).
func TestPoly_Eval(t *testing.T) {
	p := calibrate.Poly{Coef: []float64{-12.5, 0.0025, 1e-9}}
	r := 40000.0
	assert.InDelta(t, -12.5+0.0025*r+1e-9*r*r, p.Eval(r), 1e-12)
	assert.Equal(t, 0.0, calibrate.Poly{}.Eval(5))
}

// Ensure that the calibrator applies each channel's polynomial, converts the
// channel's unit to SI, scales the calibration uncertainty the same way, and
// keeps NaN (no sample) as NaN.
func TestCalibrator_Apply(t *testing.T) {
	r := &rig.Rig{Channels: []rig.Channel{
		{Name: "load", Quantity: rig.QuantityForce, Unit: "kgf", ToSI: rig.Affine{Scale: 9.80665},
			Calibration: rig.Calibration{Poly: []float64{1, 0.01}, U: 0.02}},
		{Name: "temp", Quantity: rig.QuantityTemperature, Unit: "°C", ToSI: rig.Affine{Scale: 1, Offset: 273.15},
			Calibration: rig.Calibration{Poly: []float64{0, 0.1}, U: 0.1}},
	}}
	c, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	b := acquire.Block{Source: "s", Seq: 4, T0Us: 10, DtUs: 5, Series: []acquire.Series{
		{Channel: "load", Raw: []float64{100, math.NaN()}},
		{Channel: "temp", Raw: []float64{150, 151}},
		{Channel: "undeclared", Raw: []float64{1, 2}},
	}}
	out := c.Apply(&b)
	require.Len(t, out.Series, 2, "channels the rig does not declare are left out")
	load := out.Find("load")
	require.NotNil(t, load)
	assert.InDelta(t, 2*9.80665, load.Values[0], 1e-12) // 1 + 0.01·100 = 2 kgf
	assert.True(t, math.IsNaN(load.Values[1]))
	assert.InDelta(t, 0.02*9.80665, load.U, 1e-12)
	temp := out.Find("temp")
	assert.InDelta(t, 288.15, temp.Values[0], 1e-9)
	assert.InDelta(t, 0.1, temp.U, 1e-12, "an offset does not scale the uncertainty")
	assert.Equal(t, int64(10), out.T0Us)
	assert.Equal(t, 2, out.Len())
}

// Ensure that a stored-calibration reference is refused with a message that
// says what to do, until stored calibrations exist.
func TestNewCalibrator_StoredIDNotYet(t *testing.T) {
	r := &rig.Rig{Channels: []rig.Channel{{Name: "n", Calibration: rig.Calibration{ID: "cal-7"}}}}
	_, err := calibrate.NewCalibrator(r)
	require.Error(t, err)
	assert.Contains(t, err.Error(), `channel "n": stored calibration "cal-7"`)
}
