package process_test

import (
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/process"
)

var rotorRig = filepath.Join("..", "testdata", "rigs", "rotor-cylinder.toml")

// Ensure that the live estimate of a rotor carries its spin ratio with a
// U95 that covers the set one, and its spin (issue 12), and that over
// seeded records of seven spin steps the steady test finds seven segments
// and C_L covers the truth for at least 90 % of the 35 points.
func TestPipeline_RotorLiveAndSegments(t *testing.T) {
	r, _ := loadRig(t, rotorRig)
	r.Lift.Design = ""
	fl, err := estimate.Properties(r.Fluid, r.Conditions)
	require.NoError(t, err)
	inside, total := 0, 0
	for seed := range uint64(5) {
		s, err := sim.New(r, sim.Config{QPa: estimate.DynamicPressure(fl.RhoKgPerM3, 8), Seed: seed, RateHz: 100, BlockSamples: 10,
			Hold: 6 * time.Second, Move: time.Second}, fl.RhoKgPerM3)
		require.NoError(t, err)
		cal, err := calibrate.NewCalibrator(r)
		require.NoError(t, err)
		p, err := process.New(r, cal, process.Options{Now: func() time.Time { return time.Unix(0, 0) }})
		require.NoError(t, err)
		var segs []estimate.Segment
		n := int((7*7.0 - 1) * 10)
		for i := range n {
			b := s.Next()
			segs = append(segs, p.Step(&b).Segments...)
			if seed == 0 && i == 7*10+50 { // 5 s into the S = 0.5 hold
				lv, ok := p.Live()
				require.True(t, ok)
				assert.InDelta(t, 0.5, lv.SpinRatio.X, lv.SpinRatio.U95(), "live S within its U95 of the set 0.5")
				assert.InDelta(t, 0.5*8/0.05, lv.OmegaRadPerS, 1, "ω = S·V/R")
			}
		}
		segs = append(segs, p.Flush()...)
		require.Len(t, segs, 7, "seed %d: one segment per spin step", seed)
		for i, g := range segs {
			truth, _ := s.Rotor().Truth(s.Config().SpinSteps[i])
			total++
			if abs(g.CL.X-truth) <= g.CL.U95() {
				inside++
			}
		}
	}
	t.Logf("C_L within U95 of the truth: %d of %d", inside, total)
	assert.GreaterOrEqual(t, float64(inside)/float64(total), 0.9)
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}
