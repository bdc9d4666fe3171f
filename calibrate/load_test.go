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
	assert.Equal(t, calibrate.LoadOK, h.State)
	assert.Equal(t, uint64(3), h.Warnings, "-410, 520, 510")
	assert.Equal(t, uint64(2), h.Alarms, "520, 510")
	assert.InDelta(t, 520.0/500, h.MaxFrac, 1e-12)
	assert.InDelta(t, 10.0/500, h.PeakFrac, 1e-12)
	assert.Equal(t, "N", h.Unit)
}
