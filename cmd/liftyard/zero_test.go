package main

import (
	"context"
	"math"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// Ensure that a run whose load-cell zeros drift is corrected: the recorder
// takes flow-off zeros before and after the run, stores the drift, and
// replaces the segments with ones computed with the drift removed, which
// agree with the truth where the uncorrected ones do not (issue 5).
func TestRecord_ZeroDriftCorrected(t *testing.T) {
	r, err := demoRig("tcp://127.0.0.1:1") // the example rig; its source is replaced below
	require.NoError(t, err)
	r.Sources = []rig.Source{{Name: "carriage", Type: rig.SourceSimulated, RateHz: 200}}
	fluid, err := estimate.Properties(r.Fluid, r.Conditions)
	require.NoError(t, err)
	const driftNPerS = 0.4 // each load cell's zero creeps 0.4 N a second (invented)
	s, err := sim.New(r, sim.Config{QPa: estimate.DynamicPressure(fluid.RhoKgPerM3, 2), Seed: 13,
		StepsDeg: []float64{0, 6}, Hold: 2 * time.Second, Move: 500 * time.Millisecond,
		FlowOffBefore: 1500 * time.Millisecond, Sweeps: 1, ZeroDriftNPerS: driftNPerS}, fluid.RhoKgPerM3)
	require.NoError(t, err)

	db := filepath.Join(t.TempDir(), "drift.db")
	m := &Main{Rig: r, DBPath: db, Addr: "127.0.0.1:0", Sources: []Source{{Name: "carriage", Src: s, Health: &s.Health}}}
	// 1.5 s at rest, one sweep 0° → 6° → 0° (5 s), then at rest again.
	ctx, cancel := context.WithTimeout(t.Context(), 1500*time.Millisecond+5*time.Second+1500*time.Millisecond)
	defer cancel()
	require.NoError(t, m.Run(ctx))

	run := storedRun(t, db)
	assert.Contains(t, run.Note, "corrected for the zero drift")
	require.Len(t, run.Drift, 4, "zeros of n_fore, n_aft, a_main and pitot: %+v", run.Drift)
	for _, d := range run.Drift {
		if d.Channel == "pitot" {
			assert.InDelta(t, 0, d.ChangeSI, 2, "the pitot zero does not drift")
			continue
		}
		// The zeros are ~6.5 s apart (middles of the two rest stretches).
		assert.InDelta(t, driftNPerS*6.5, d.ChangeSI, 0.5, "%s drift", d.Channel)
	}

	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	segs, err := st.Segments(run.ID)
	require.NoError(t, err)
	require.NotEmpty(t, segs)
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	raw, err := process.CorrectDrift(t.Context(), st, run.ID, r, cal, calibrate.Drift{})
	require.NoError(t, err)
	require.Equal(t, len(segs), len(raw))
	worse := 0
	for i, seg := range segs {
		step := 0.0
		if rig.Deg(seg.AlphaRad.X) > 3 {
			step = 6
		}
		clTrue, _ := s.Foil().Truth(rig.Rad(step))
		assert.LessOrEqual(t, math.Abs(seg.CL.X-clTrue), seg.CL.U95(), "corrected segment %d at %g°: C_L %.4f ± %.4f vs %.4f", i, step, seg.CL.X, seg.CL.U95(), clTrue)
		if math.Abs(raw[i].CL.X-clTrue) > raw[i].CL.U95() {
			worse++
		}
	}
	assert.Positive(t, worse, "without the correction the drift shows: the test would not notice a broken correction otherwise")
}
