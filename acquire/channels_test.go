package acquire_test

import (
	"math"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/rig"
)

// Ensure that the channel monitor counts samples, missing samples and
// saturation against the raw range exactly, measures the sample rate from
// host arrival times, reports staleness, and raises one saturation event per
// episode (issue 4: channel health).
func TestMonitor_ChannelHealth(t *testing.T) {
	r := &rig.Rig{Channels: []rig.Channel{{Name: "n", RawMin: -100, RawMax: 100}, {Name: "q"}}}
	m := acquire.NewMonitor(r)
	t0 := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	var events []acquire.Event
	for k := range 30 { // 3 s of 100 ms blocks, 20 samples each: 200 Hz
		n := make([]float64, 20)
		q := make([]float64, 20)
		for i := range n {
			n[i], q[i] = 10, 5
		}
		if k == 10 || k == 11 { // a two-block saturation episode
			n[3], n[4] = 100, -120
		}
		if k == 20 {
			n[7] = 100 // a second episode
		}
		q[0] = math.NaN()
		b := acquire.Block{Source: "amp", DtUs: 5000, Received: t0.Add(time.Duration(k) * 100 * time.Millisecond),
			Series: []acquire.Series{{Channel: "n", Raw: n}, {Channel: "q", Raw: q}}}
		events = append(events, m.Observe(&b)...)
	}
	snap := m.Snapshot(t0.Add(2950 * time.Millisecond))
	require.Len(t, snap, 2)
	n, q := snap[0], snap[1]
	assert.Equal(t, "n", n.Channel)
	assert.Equal(t, uint64(600), n.Samples)
	assert.Equal(t, uint64(5), n.Saturated)
	assert.Equal(t, uint64(30), q.Missing)
	assert.Equal(t, uint64(570), q.Samples)
	assert.InDelta(t, 200, n.RateHz, 1)
	assert.InDelta(t, 190, q.RateHz, 1, "19 finite samples per 100 ms block")
	assert.False(t, n.Stale)
	require.Len(t, events, 2, "one event per saturation episode")
	assert.Equal(t, acquire.EventSaturated, events[0].Kind)
	assert.Equal(t, t0.Add(time.Second), events[0].T)

	later := m.Snapshot(t0.Add(5 * time.Second))
	assert.True(t, later[0].Stale, "no sample for over a second")
	assert.Zero(t, later[0].RateHz)
}

// Ensure that a 200 Hz channel whose blocks arrive with jitter (a broker
// delaying every other block) shows 200 Hz exactly: the
// rate comes from the device's own spacing, not from arrival times
// (issue 13: a 200 Hz channel showed 190 Hz).
func TestMonitor_RateIgnoresArrivalJitter(t *testing.T) {
	m := acquire.NewMonitor(&rig.Rig{Channels: []rig.Channel{{Name: "n"}}})
	t0 := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	var at time.Time
	for k := range 40 { // 4 s of 100 ms blocks at 200 Hz
		// Even blocks arrive 2 ms after they end, odd ones 90 ms late.
		delay := 2 * time.Millisecond
		if k%2 == 1 {
			delay = 90 * time.Millisecond
		}
		at = t0.Add(time.Duration(k+1)*100*time.Millisecond + delay)
		b := acquire.Block{Source: "amp", DtUs: 5000, Received: at, Series: []acquire.Series{{Channel: "n", Raw: make([]float64, 20)}}}
		m.Observe(&b)
	}
	assert.InDelta(t, 200, m.Snapshot(at)[0].RateHz, 1e-9)
}

// Ensure that each source's data-age clock measures its own block period and
// calls it stale once it has been silent for StaleBlocks periods — a slow
// source is not stale after a fast one's limit (issue 13: data-age clock).
func TestMonitor_Ages(t *testing.T) {
	m := acquire.NewMonitor(&rig.Rig{})
	t0 := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	block := func(src string, at time.Duration) {
		b := acquire.Block{Source: src, DtUs: 5000, Received: t0.Add(at), Series: []acquire.Series{{Channel: src + "_x", Raw: []float64{1, 2}}}}
		m.Observe(&b)
	}
	for k := range 21 { // fast: every 100 ms to 2 s; slow: every 500 ms
		block("fast", time.Duration(k)*100*time.Millisecond)
		if k%5 == 0 {
			block("slow", time.Duration(k)*100*time.Millisecond)
		}
	}
	ages := m.Ages(t0.Add(2150 * time.Millisecond))
	require.Len(t, ages, 2)
	assert.Equal(t, "fast", ages[0].Source)
	assert.Equal(t, 100*time.Millisecond, ages[0].BlockPeriod)
	assert.Equal(t, 250*time.Millisecond, ages[0].Limit)
	assert.Equal(t, 150*time.Millisecond, ages[0].Age)
	assert.False(t, ages[0].Stale)
	assert.Equal(t, 500*time.Millisecond, ages[1].BlockPeriod)
	assert.False(t, ages[1].Stale)

	assert.False(t, m.Ages(t0.Add(2250 * time.Millisecond))[0].Stale, "silent for exactly 2.5 periods: not yet")
	ages = m.Ages(t0.Add(2260 * time.Millisecond))
	assert.True(t, ages[0].Stale)
	assert.False(t, ages[1].Stale, "260 ms is half a period of the slow source")
	chans := m.Snapshot(t0.Add(2260 * time.Millisecond))
	assert.True(t, chans[0].Stale, "the fast source's channel follows its source's limit")
	assert.False(t, chans[1].Stale)

	// A burst of queued blocks arriving together does not shrink the
	// period below the device time a block covers.
	b := acquire.Block{Source: "burst", DtUs: 5000, Received: t0, Series: []acquire.Series{{Channel: "b_x", Raw: make([]float64, 20)}}}
	for range 5 {
		m.Observe(&b)
	}
	assert.Equal(t, 100*time.Millisecond, m.Ages(t0)[2].BlockPeriod, "20 samples at 200 Hz")

	block("fast", 2300*time.Millisecond) // restarted
	assert.False(t, m.Ages(t0.Add(2310 * time.Millisecond))[0].Stale)
	assert.Equal(t, acquire.MinStale, acquire.StaleLimit(time.Millisecond), "a floor against host jitter")
	assert.Equal(t, acquire.StaleAfter, acquire.StaleLimit(0), "period unknown")
}
