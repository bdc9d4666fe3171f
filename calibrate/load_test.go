package calibrate_test

import (
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/calibrate"
	"liftyard/rig"
)

// Ensure that a load cell is flagged at 80 % of its rated capacity (warning)
// and at 100 % (alarm), by the magnitude of the load in either direction,
// with exact sample counts (docs/design.md §5; the 80 % level is common practice).
func TestLoadMonitor_WarningAndAlarm(t *testing.T) {
	r := &rig.Rig{Channels: []rig.Channel{
		{Name: "n_fore", Quantity: rig.QuantityForce, CapacitySI: 500},
		{Name: "alpha", Quantity: rig.QuantityAngle}, // not rated: not watched
	}}
	m := calibrate.NewLoadMonitor(r)
	feed := func(vals ...float64) []calibrate.LoadHealth {
		b := calibrate.Block{Series: []calibrate.Series{{Channel: "n_fore", Values: vals}, {Channel: "alpha", Values: vals}}}
		return m.Observe(&b)
	}
	assert.Empty(t, feed(100, 200, math.NaN()))
	rose := feed(100, -410, 300) // 82 % in compression
	require.Len(t, rose, 1)
	assert.Equal(t, calibrate.LoadWarning, rose[0].State)
	rose = feed(520, 100)
	require.Len(t, rose, 1)
	assert.Equal(t, calibrate.LoadAlarm, rose[0].State)
	assert.Empty(t, feed(510), "still in alarm: no new rise")
	assert.Empty(t, feed(10), "falling back is not a rise")

	snap := m.Snapshot()
	require.Len(t, snap, 1)
	h := snap[0]
	assert.Equal(t, calibrate.LoadAlarm, h.State, "the alarm is held after the load fell back")
	assert.Equal(t, calibrate.LoadOK, h.Now)
	assert.True(t, h.Latched)
	assert.Equal(t, uint64(3), h.Warnings, "-410, 520, 510")
	assert.Equal(t, uint64(2), h.Alarms, "520, 510")
	assert.InDelta(t, 520.0/500, h.MaxFrac, 1e-12)
	assert.InDelta(t, 10.0/500, h.PeakFrac, 1e-12)
	assert.Equal(t, "N", h.Unit)
}

// Ensure that an alarm latches: a cell pushed to 118 % and back to 20 %
// stays in alarm until acknowledged; an acknowledgement while still
// overloaded is taken, and the next overloaded block latches again; a
// warning (80 %) never latches (issue 13: overload latch).
func TestLoadMonitor_AlarmLatchesUntilAcknowledged(t *testing.T) {
	r := &rig.Rig{Channels: []rig.Channel{{Name: "n_fore", Quantity: rig.QuantityForce, CapacitySI: 100}}}
	m := calibrate.NewLoadMonitor(r)
	feed := func(v float64) calibrate.LoadHealth {
		b := calibrate.Block{Series: []calibrate.Series{{Channel: "n_fore", Values: []float64{v}}}}
		m.Observe(&b)
		return m.Snapshot()[0]
	}
	h := feed(85)
	assert.Equal(t, calibrate.LoadWarning, h.State)
	assert.False(t, h.Latched, "a warning is not held")
	assert.Equal(t, calibrate.LoadOK, feed(20).State)
	assert.False(t, m.Acknowledge("n_fore"), "nothing to acknowledge")

	assert.Equal(t, calibrate.LoadAlarm, feed(118).State)
	for range 5 {
		h = feed(20)
	}
	assert.Equal(t, calibrate.LoadAlarm, h.State)
	assert.Equal(t, calibrate.LoadOK, h.Now)
	assert.InDelta(t, 0.2, h.PeakFrac, 1e-12)
	assert.Equal(t, calibrate.LoadAlarm, m.State())
	assert.False(t, m.Acknowledge("alpha"), "unknown channel")
	assert.True(t, m.Acknowledge("n_fore"))
	h = m.Snapshot()[0]
	assert.Equal(t, calibrate.LoadOK, h.State)
	assert.False(t, h.Latched)
	assert.Equal(t, calibrate.LoadOK, m.State())

	feed(130)
	assert.True(t, m.Acknowledge("n_fore"), "taken while still overloaded")
	assert.Equal(t, calibrate.LoadAlarm, m.Snapshot()[0].State, "still at 130 %")
	assert.True(t, feed(125).Latched, "the next overloaded block latches again")
}
