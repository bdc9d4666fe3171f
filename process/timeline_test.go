package process_test

import (
	"math"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/process"
	"liftyard/rig"
)

// Ensure that a stored run's timeline comes from its raw blocks through the
// pipeline: no more points than asked, in time order from the run's first
// sample, and inside each stored segment the timeline's q and C_L agree
// with the segment's (both are means of the same calibrated samples, the
// timeline's over the 2 s live window).
func TestRunTimeline_AgreesWithSegments(t *testing.T) {
	r, text := loadRig(t, foilRig)
	store := openStore(t)
	id, _ := recordFile(t, store, r, text)
	run, err := store.Run(id)
	require.NoError(t, err)
	segs, err := store.Segments(id)
	require.NoError(t, err)

	tl, err := process.RunTimeline(t.Context(), store, run, 50)
	require.NoError(t, err)
	assert.Equal(t, rig.KindFoil, tl.Kind)
	t0, err := process.RunStart(store, id)
	require.NoError(t, err)
	assert.True(t, tl.Start.Equal(t0), "timeline starts at the marks' clock: %s vs %s", tl.Start, t0)
	require.NotEmpty(t, tl.T)
	assert.LessOrEqual(t, len(tl.T), 50)
	assert.Greater(t, len(tl.T), 40, "a run without gaps fills nearly every bin")
	for _, v := range [][]float64{tl.QPa, tl.AlphaDeg, tl.CL, tl.SpinRatio} {
		assert.Len(t, v, len(tl.T))
	}
	for i := 1; i < len(tl.T); i++ {
		require.True(t, tl.T[i].After(tl.T[i-1]), "point %d in time order", i)
	}
	assert.Greater(t, tl.T[0].Year(), 2000, "wall time, not a device clock from 1970")
	for _, v := range tl.SpinRatio {
		assert.True(t, math.IsNaN(v), "a foil has no spin ratio")
	}
	assert.False(t, tl.T[0].Before(t0), "no point before the run's first sample")

	// At each segment's middle the 2 s live window lies inside the
	// segment (each is about 2.1 s long).
	fine, err := process.RunTimeline(t.Context(), store, run, 400)
	require.NoError(t, err)
	for _, sg := range segs {
		mid := sg.TStart.Add(sg.TEnd.Sub(sg.TStart) / 2)
		i := nearest(fine.T, mid)
		assert.Less(t, fine.T[i].Sub(mid).Abs(), 100*time.Millisecond, "segment %d has a point near its middle", sg.Index)
		assert.InDelta(t, sg.QPa.X, fine.QPa[i], 0.02*sg.QPa.X, "segment %d q", sg.Index)
		assert.InDelta(t, sg.CL.X, fine.CL[i], 0.02*math.Abs(sg.CL.X)+0.01, "segment %d C_L", sg.Index)
		assert.InDelta(t, sg.AlphaRad.X*180/math.Pi, fine.AlphaDeg[i], 0.1, "segment %d α", sg.Index)
	}

	_, err = process.RunTimeline(t.Context(), store, run, 0)
	assert.ErrorContains(t, err, "timeline points 0")
}

func nearest(ts []time.Time, t time.Time) int {
	best := 0
	for i, ti := range ts {
		if ti.Sub(t).Abs() < ts[best].Sub(t).Abs() {
			best = i
		}
	}
	return best
}
