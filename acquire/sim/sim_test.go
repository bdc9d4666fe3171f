package sim_test

import (
	"math"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/rig"
)

// testRig is an invented foil rig: two normal cells and one axial cell in
// 24-bit counts, a pitot in counts, an angle encoder in 0.01° counts.
func testRig() *rig.Rig {
	force := rig.Calibration{Poly: []float64{-12.5, 0.0025}, U: 0.1}
	return &rig.Rig{
		Name: "sim test", Kind: rig.KindFoil, Fluid: rig.FluidFreshWater,
		Conditions: rig.Conditions{TempK: 288.15, PressurePa: 101325},
		Reference:  rig.Reference{AreaM2: 0.09, LengthM: 0.15, SpanM: 0.6},
		Sources:    []rig.Source{{Name: "carriage", Type: rig.SourceMQTT}},
		Channels: []rig.Channel{
			{Name: "n_fore", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, CapacitySI: 500, Calibration: force},
			{Name: "n_aft", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, CapacitySI: 500, Calibration: force},
			{Name: "axial", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, CapacitySI: 200, Calibration: rig.Calibration{Poly: []float64{3.0, -0.001}}},
			{Name: "pitot", Quantity: rig.QuantityPressure, Unit: "kPa", ToSI: rig.Affine{Scale: 1000}, CapacitySI: 5000, Calibration: rig.Calibration{Poly: []float64{0, 1e-6, 1e-14}}},
			{Name: "alpha", Quantity: rig.QuantityAngle, Unit: "deg", ToSI: rig.Affine{Scale: math.Pi / 180}, Calibration: rig.Calibration{Poly: []float64{0, 0.01}}},
		},
		Lift: rig.Lift{Normal: []string{"n_fore", "n_aft"}, Axial: []string{"axial"}, AngleChannel: "alpha", DynamicPressure: "pitot", PitotCoeff: 1},
	}
}

// Ensure that the simulator's raw readings, calibrated with the rig's own
// calibrations, give back the true coefficients over a steady step: this is
// what makes the demo's results checkable.
func TestRig_CalibratedReadingsGiveTruth(t *testing.T) {
	r := testRig()
	s, err := sim.New(r, sim.Config{QPa: 2000, StepsDeg: []float64{6}, Seed: 7}, 0)
	require.NoError(t, err)
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)

	var sumN, sumA, sumQ, sumAlpha float64
	var n int
	for range 200 { // 200 blocks × 20 samples = 20 s at 200 Hz
		raw := s.Next()
		for _, ser := range raw.Series {
			if ser.Channel == "n_fore" {
				for _, v := range ser.Raw {
					require.Equal(t, math.Round(v), v, "load-cell counts are whole numbers")
				}
			}
		}
		b := cal.Apply(&raw)
		for i := 0; i < b.Len(); i++ {
			sumN += b.Find("n_fore").Values[i] + b.Find("n_aft").Values[i]
			sumA += b.Find("axial").Values[i]
			sumQ += b.Find("pitot").Values[i]
			sumAlpha += b.Find("alpha").Values[i]
			n++
		}
	}
	alpha := sumAlpha / float64(n)
	assert.InDelta(t, 6.0, rig.Deg(alpha), 0.01)
	nBar, aBar, qBar := sumN/float64(n), sumA/float64(n), sumQ/float64(n)
	lift := nBar*math.Cos(alpha) - aBar*math.Sin(alpha)
	drag := nBar*math.Sin(alpha) + aBar*math.Cos(alpha)
	cl, cd := s.Foil().Truth(rig.Rad(6))
	// The loads follow the instantaneous q, so the ratio of means is the true
	// coefficient up to sensor noise and ADC steps (0.0025 N per count).
	assert.InEpsilon(t, cl, lift/(qBar*0.09), 0.002)
	assert.InDelta(t, cd, drag/(qBar*0.09), 0.002)
	assert.InEpsilon(t, 2000, qBar, 0.05, "mean q near the configured value")
}

// Ensure that the turbulence is correlated in time, not white: the lag-1
// autocorrelation of q matches the AR(1) coefficient exp(−Δt/T_I).
func TestRig_TurbulenceIsCorrelated(t *testing.T) {
	r := testRig()
	s, err := sim.New(r, sim.Config{QPa: 2000, StepsDeg: []float64{0}, Seed: 3, IntegralTimeS: 0.05}, 0)
	require.NoError(t, err)
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	var q []float64
	for range 500 {
		raw := s.Next()
		b := cal.Apply(&raw)
		q = append(q, b.Find("pitot").Values...)
	}
	var mean float64
	for _, v := range q {
		mean += v
	}
	mean /= float64(len(q))
	var c0, c1 float64
	for i := range q {
		d := q[i] - mean
		c0 += d * d
		if i > 0 {
			c1 += d * (q[i-1] - mean)
		}
	}
	want := math.Exp(-(1.0 / 200) / 0.05) // 0.905
	assert.InDelta(t, want, c1/c0, 0.03)
}

// Ensure that the sweep goes up and back down through the steps, holding
// each one, and that the device clock advances by whole sample periods.
func TestRig_SweepAndClock(t *testing.T) {
	r := testRig()
	start := time.Date(2026, 12, 1, 9, 0, 0, 0, time.UTC)
	s, err := sim.New(r, sim.Config{QPa: 100, StepsDeg: []float64{0, 4, 8}, Hold: time.Second, Move: time.Second, Start: start}, 0)
	require.NoError(t, err)
	for _, tc := range []struct {
		tS      float64
		wantDeg float64
		holding bool
	}{
		{0.5, 0, true}, {1.5, 2, false}, {2.5, 4, true}, {4.5, 8, true}, {5.5, 6, false}, {6.5, 4, true}, {8.5, 0, true},
	} {
		a, h := s.AngleAt(tc.tS)
		assert.InDelta(t, tc.wantDeg, rig.Deg(a), 1e-9, "t=%v", tc.tS)
		assert.Equal(t, tc.holding, h, "t=%v", tc.tS)
	}
	b0, b1 := s.Next(), s.Next()
	assert.Equal(t, start.UnixMicro(), b0.T0Us)
	assert.Equal(t, int64(5000), b0.DtUs)
	assert.Equal(t, b0.T0Us+20*5000, b1.T0Us)
	assert.Equal(t, uint64(1), b1.Seq)
}

// Ensure that the flow is off before the sweep and after the last sweep
// (q = 0, loads at their zero), and that the load cells' zero drifts at the
// configured rate: the inputs a flow-off zero and drift correction need.
func TestRig_FlowOffAndZeroDrift(t *testing.T) {
	r := testRig()
	s, err := sim.New(r, sim.Config{QPa: 2000, StepsDeg: []float64{0, 4}, Hold: time.Second, Move: time.Second,
		FlowOffBefore: time.Second, Sweeps: 1, ZeroDriftNPerS: 0.25, NoiseFrac: 1e-9, TurbulenceIntensity: 1e-9}, 0)
	require.NoError(t, err)
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	// One sweep of 2 steps is 2 × (1 s + 1 s) = 4 s; then the flow is off.
	require.InDelta(t, 4.0, s.SweepS(), 1e-12)
	var qs, ns []float64
	for range 70 { // 7 s
		raw := s.Next()
		b := cal.Apply(&raw)
		qs = append(qs, b.Find("pitot").Values...)
		for i := range b.Len() {
			ns = append(ns, b.Find("n_fore").Values[i]+b.Find("n_aft").Values[i])
		}
	}
	sample := func(tS float64) int { return int(tS * 200) }
	assert.InDelta(t, 0, qs[sample(0.5)], 1e-3, "flow off before the sweep")
	assert.InDelta(t, 2000, qs[sample(1.5)], 1, "flow on during the sweep")
	assert.InDelta(t, 0, qs[sample(6.5)], 1e-3, "flow off after the last sweep")
	// With the flow off the normal load is just the two drifted zeros.
	assert.InDelta(t, 2*0.25*0.5, ns[sample(0.5)], 0.01)
	assert.InDelta(t, 2*0.25*6.5, ns[sample(6.5)], 0.01)
}
