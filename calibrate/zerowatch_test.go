package calibrate_test

import (
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/calibrate"
	"liftyard/rig"
)

// Ensure that the zero watch takes the flow-off zero before a run (applied
// live once the flow comes on) and the one after it, only for the load cells
// and the pitot (an angle has no zero), and refuses when either end had no
// flow-off stretch.
func TestZeroWatch_BeforeAndAfter(t *testing.T) {
	r := &rig.Rig{
		Channels: []rig.Channel{{Name: "n", Quantity: rig.QuantityForce, CapacitySI: 500},
			{Name: "q", Quantity: rig.QuantityPressure, CapacitySI: 5000}, {Name: "alpha", Quantity: rig.QuantityAngle}},
		Lift: rig.Lift{Normal: []string{"n"}, DynamicPressure: "q", AngleChannel: "alpha"},
	}
	z := calibrate.NewZeroWatch(r)
	require.NotNil(t, z)
	t0 := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC).UnixMicro()
	block := func(k int, n, q float64) *calibrate.Block {
		vals := func(v float64) []float64 { return []float64{v, v, v, v, v, v, v, v, v, v} }
		return &calibrate.Block{Source: "s", T0Us: t0 + int64(k)*100_000, DtUs: 10_000, Series: []calibrate.Series{
			{Channel: "n", Values: vals(n)}, {Channel: "q", Values: vals(q)}, {Channel: "alpha", Values: vals(0.1)}}}
	}
	k := 0
	for range 10 { // 1 s at rest: n reads 2 N (its zero), q 10 Pa (0.5 % of the flow)
		z.Observe(block(k, 2, 10))
		k++
	}
	assert.Nil(t, z.Live(), "no zero until the flow comes on")
	_, err := z.Drift()
	require.EqualError(t, err, "the flow never came on")
	for range 30 { // 3 s of flow
		z.Observe(block(k, 50, 2000))
		k++
	}
	live := z.Live()
	require.NotNil(t, live)
	assert.InDelta(t, 2, live.At("n", time.UnixMicro(t0)), 1e-12)
	assert.Zero(t, live.At("alpha", time.UnixMicro(t0)), "an angle has no zero")
	_, err = z.Drift()
	require.ErrorContains(t, err, "no flow-off zero after the run")
	for range 10 { // 1 s at rest again; the zero has crept to 3 N
		z.Observe(block(k, 3, 5))
		k++
	}
	d, err := z.Drift()
	require.NoError(t, err)
	rep := d.Report()
	require.Len(t, rep, 2)
	assert.Equal(t, "n", rep[0].Channel)
	assert.InDelta(t, 1, rep[0].ChangeSI, 1e-12)
	assert.Equal(t, "q", rep[1].Channel)
	assert.InDelta(t, -5, rep[1].ChangeSI, 1e-12)
	// Half-way between the two zeros, the zero is half-way too: the rest
	// stretches lose ZeroGuard on the side of the flow (0–0.5 s and 4.5–5 s,
	// mid-points 0.25 s and 4.75 s).
	assert.InDelta(t, 2.5, d.At("n", time.UnixMicro(t0+2_500_000)), 1e-9)

	// issue 10: rest is judged against the run's own flow, not the pitot's
	// rated range, so a pitot without one still gives a zero; a rig with no
	// dynamic-pressure channel cannot tell flow-off.
	r.Channels[1].CapacitySI = 0
	assert.NotNil(t, calibrate.NewZeroWatch(r))
	r.Lift.DynamicPressure = ""
	assert.Nil(t, calibrate.NewZeroWatch(r))
}
