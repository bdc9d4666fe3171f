package sim_test

import (
	"context"
	"math"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/rig"
)

func yardRig(t *testing.T) *rig.Rig {
	t.Helper()
	r, err := rig.Load("../../testdata/rigs/roof-yard.toml")
	require.NoError(t, err)
	return r
}

// Ensure that the roof simulator sends every tap, the pitot and the vane in
// rig order, and that its readings, calibrated with the rig's own
// calibrations, give back the set pressure coefficients: mean(p_i)/mean(q)
// per tap tends to Cp_i (the taps follow q quasi-steadily).
func TestRoof_CalibratedReadingsGiveTruth(t *testing.T) {
	r := yardRig(t)
	s, err := sim.NewRoof(r, sim.RoofConfig{QPa: 400, Seed: 1, ZoneCp: map[string]float64{"corner": -2.0},
		TapCp: map[string]float64{"t12": -0.3}, DirectionRad: rig.Rad(270)})
	require.NoError(t, err)
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)

	sum := map[string]float64{}
	var ratio [12]float64
	n := 0
	for range 300 { // 30 s at 200 Hz
		raw := s.Next()
		require.Equal(t, "scanner", raw.Source)
		names := make([]string, len(raw.Series))
		for i, se := range raw.Series {
			names[i] = se.Channel
		}
		require.Equal(t, []string{"p01", "p02", "p03", "p04", "p05", "p06", "p07", "p08", "p09", "p10", "p11", "p12", "q_ref", "vane"}, names)
		b := cal.Apply(&raw)
		q := b.Find("q_ref").Values
		for k, se := range b.Series {
			for i, v := range se.Values {
				sum[se.Channel] += v
				if k < 12 {
					ratio[k] += v / q[i]
				}
			}
		}
		n += b.Len()
	}
	qBar := sum["q_ref"] / float64(n)
	// Mean q = Q·(1 + I²) for q = Q·(1 + u′/U)² with I = 0.15; the gusts'
	// integral time of 0.5 s leaves about 30 independent seconds: ±5 %.
	assert.InDelta(t, 400*(1+0.15*0.15), qBar, 0.05*400)
	assert.InDelta(t, 270, rig.Deg(sum["vane"]/float64(n)), 0.1)
	for k, tp := range r.Taps {
		want := map[string]float64{"corner": -2.0, "edge": -1.5 + 0.2, "field": -0.9 + 0.2}[tp.Zone]
		if tp.Name == "t12" {
			want = -0.3
		}
		// Local fluctuation sd 0.15·Q with 0.05 s integral time: about 300
		// independent samples, so the mean ratio is within ±0.02.
		assert.InDelta(t, want, ratio[k]/float64(n), 0.02, "tap %s", tp.Name)
	}
	// TrueCp is net (external − internal cp 0.2), area-weighted.
	assert.InDelta(t, -2.2, s.TrueCp("corner"), 1e-12)
	assert.InDelta(t, -1.5, s.TrueCp("edge"), 1e-12)
	assert.InDelta(t, (3*(-0.9)+(-0.5))/4, s.TrueCp("field"), 1e-12)
	assert.InDelta(t, (4*-2.2+4*-1.5+3*-0.9-0.5)/12, s.TrueCp("roof"), 1e-12)
	assert.True(t, math.IsNaN(s.TrueCp("nowhere")))
}

// Ensure that the same seed gives the same readings, CalibrationErrors
// shifts each channel by a fixed amount, and FlowOff gives q = 0.
func TestRoof_SeedsCalibrationErrorsFlowOff(t *testing.T) {
	r := yardRig(t)
	a, err := sim.NewRoof(r, sim.RoofConfig{QPa: 300, Seed: 9})
	require.NoError(t, err)
	b, err := sim.NewRoof(r, sim.RoofConfig{QPa: 300, Seed: 9})
	require.NoError(t, err)
	assert.Equal(t, a.Next(), b.Next())

	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	off, err := sim.NewRoof(r, sim.RoofConfig{FlowOff: true, Seed: 2, NoiseFrac: 1e-9})
	require.NoError(t, err)
	offErr, err := sim.NewRoof(r, sim.RoofConfig{FlowOff: true, Seed: 2, NoiseFrac: 1e-9, CalibrationErrors: true})
	require.NoError(t, err)
	r0, r1 := off.Next(), offErr.Next()
	c0, c1 := cal.Apply(&r0), cal.Apply(&r1)
	// Flow off: every pressure reads zero within one ADC count (0.0762 Pa
	// for the tap transducers, 0.0305 Pa for the pitot: the rig's c1).
	for _, se := range c0.Series[:13] {
		for _, v := range se.Values {
			require.InDelta(t, 0, v, 0.08, se.Channel)
		}
	}
	// With calibration errors the zero readings move by a constant offset
	// that differs from channel to channel (standard u 1.5 Pa per tap).
	moved := 0
	for k, se := range c1.Series[:12] {
		d := se.Values[0] - c0.Series[k].Values[0]
		for _, v := range se.Values {
			require.InDelta(t, d, v-c0.Series[k].Values[0], 0.16)
		}
		if math.Abs(d) > 0.2 {
			moved++
		}
	}
	assert.GreaterOrEqual(t, moved, 8, "calibration errors of u = 1.5 Pa should move most of the 12 taps by more than 0.2 Pa")
}

// Ensure that NewRoof refuses what it cannot simulate, with a message.
func TestNewRoof_Errors(t *testing.T) {
	r := yardRig(t)
	_, err := sim.NewRoof(r, sim.RoofConfig{})
	assert.ErrorContains(t, err, "QPa")
	noTaps := *r
	noTaps.Taps = nil
	_, err = sim.NewRoof(&noTaps, sim.RoofConfig{QPa: 100})
	assert.ErrorContains(t, err, "tap")
	noQ := *r
	noQ.Lift.DynamicPressure = ""
	_, err = sim.NewRoof(&noQ, sim.RoofConfig{QPa: 100})
	assert.ErrorContains(t, err, "dynamic_pressure")
	_, err = sim.NewRoof(nil, sim.RoofConfig{QPa: 100})
	assert.Error(t, err)
}

// Ensure that Run is an acquire.Source: it sends blocks in real time,
// counts them in Health and returns nil when cancelled.
func TestRoof_Run(t *testing.T) {
	r := yardRig(t)
	s, err := sim.NewRoof(r, sim.RoofConfig{QPa: 300, BlockSamples: 2, RateHz: 400})
	require.NoError(t, err)
	var src acquire.Source = s
	out := make(chan acquire.Block, 64)
	ctx, cancel := context.WithTimeout(context.Background(), 100*time.Millisecond)
	defer cancel()
	require.NoError(t, src.Run(ctx, out))
	got := len(out)
	assert.Greater(t, got, 3)
	assert.Equal(t, uint64(got), s.Health.Frames.Load())
	assert.Equal(t, uint64(2*got), s.Health.Samples.Load())
	b := <-out
	assert.False(t, b.Received.IsZero())
	assert.Equal(t, 2, b.Len())
}
