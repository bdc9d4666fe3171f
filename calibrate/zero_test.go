package calibrate_test

import (
	"math"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/calibrate"
	"liftyard/rig"
)

// Ensure that a zero is the mean of the flow-off samples per channel,
// skipping NaN (no sample), with N the count of the sparsest channel.
func TestCaptureZero(t *testing.T) {
	at := time.Date(2026, 12, 1, 9, 0, 0, 0, time.UTC)
	blocks := []calibrate.Block{
		{Series: []calibrate.Series{{Channel: "n_fore", Values: []float64{1, 2, math.NaN()}}, {Channel: "pitot", Values: []float64{0.5, 0.7, 0.6}}}},
		{Series: []calibrate.Series{{Channel: "n_fore", Values: []float64{3}}, {Channel: "pitot", Values: []float64{0.6}}}},
	}
	z, err := calibrate.CaptureZero(at, blocks)
	require.NoError(t, err)
	assert.Equal(t, at, z.T)
	assert.InDelta(t, 2.0, z.Values["n_fore"], 1e-15)
	assert.InDelta(t, 0.6, z.Values["pitot"], 1e-15)
	assert.Equal(t, 3, z.N)

	for _, tc := range []struct {
		name   string
		blocks []calibrate.Block
		want   string
	}{
		{"nothing", nil, "capture zero: no flow-off samples"},
		{"a channel without samples", []calibrate.Block{{Series: []calibrate.Series{
			{Channel: "n_fore", Values: []float64{1}}, {Channel: "n_aft", Values: []float64{math.NaN()}}}}},
			`capture zero: channel "n_aft" has no samples in the flow-off capture`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := calibrate.CaptureZero(at, tc.blocks)
			require.EqualError(t, err, tc.want)
		})
	}
}

// Ensure that a zero that drifts linearly during a run is removed exactly
// from every sample and reported. Invented run: a 10-minute tow in which
// the normal-force bridge's zero creeps from 2.0 N to 2.6 N (thermal drift)
// and the pitot's from −1.5 Pa to −1.2 Pa.
func TestDrift_CorrectsAndReports(t *testing.T) {
	start := time.Date(2026, 12, 1, 9, 0, 0, 0, time.UTC)
	end := start.Add(10 * time.Minute)
	zeroAt := func(ch string, tt time.Time) float64 {
		f := float64(tt.Sub(start)) / float64(end.Sub(start))
		if ch == "n_fore" {
			return 2.0 + 0.6*f
		}
		return -1.5 + 0.3*f
	}
	flowOff := func(tt time.Time) []calibrate.Block {
		return []calibrate.Block{{Series: []calibrate.Series{
			{Channel: "n_fore", Values: []float64{zeroAt("n_fore", tt), zeroAt("n_fore", tt)}},
			{Channel: "pitot", Values: []float64{zeroAt("pitot", tt)}}}}}
	}
	zs, err := calibrate.CaptureZero(start, flowOff(start))
	require.NoError(t, err)
	ze, err := calibrate.CaptureZero(end, flowOff(end))
	require.NoError(t, err)
	d := calibrate.Drift{Start: zs, End: ze}

	// A block of 100 samples at 10 ms, 3 min 20 s into the run, on the
	// aligned host timeline; the true loads are 120 N + i·0.1 N and 450 Pa.
	t0 := start.Add(200 * time.Second)
	b := calibrate.Block{AlignedT0Us: t0.UnixMicro(), T0Us: 42, DtUs: 10000,
		Series: []calibrate.Series{{Channel: "n_fore", Values: make([]float64, 100)}, {Channel: "pitot", Values: make([]float64, 100)}}}
	for i := range 100 {
		ti := t0.Add(time.Duration(i) * 10 * time.Millisecond)
		b.Series[0].Values[i] = 120 + 0.1*float64(i) + zeroAt("n_fore", ti)
		b.Series[1].Values[i] = 450 + zeroAt("pitot", ti)
	}
	b.Series[1].Values[7] = math.NaN()
	d.Correct(&b)
	for i := range 100 {
		assert.InDelta(t, 120+0.1*float64(i), b.Series[0].Values[i], 1e-12, "n_fore sample %d", i)
		if i != 7 {
			assert.InDelta(t, 450, b.Series[1].Values[i], 1e-12, "pitot sample %d", i)
		}
	}
	assert.True(t, math.IsNaN(b.Series[1].Values[7]), "NaN stays NaN")

	rep := d.Report()
	require.Len(t, rep, 2)
	for i, w := range []calibrate.DriftLine{
		{Channel: "n_fore", StartSI: 2.0, EndSI: 2.6, ChangeSI: 0.6},
		{Channel: "pitot", StartSI: -1.5, EndSI: -1.2, ChangeSI: 0.3},
	} {
		assert.Equal(t, w.Channel, rep[i].Channel)
		assert.InDelta(t, w.StartSI, rep[i].StartSI, 1e-12)
		assert.InDelta(t, w.EndSI, rep[i].EndSI, 1e-12)
		assert.InDelta(t, w.ChangeSI, rep[i].ChangeSI, 1e-12)
	}

	// Outside the run the zero is held, not extrapolated; unknown channels
	// have no zero.
	assert.Equal(t, 2.0, d.At("n_fore", start.Add(-time.Hour)))
	assert.Equal(t, 2.6, d.At("n_fore", end.Add(time.Hour)))
	assert.InDelta(t, 2.3, d.At("n_fore", start.Add(5*time.Minute)), 1e-15)
	assert.Equal(t, 0.0, d.At("alpha", start))
	assert.Equal(t, 2.0, calibrate.Drift{Start: zs}.At("n_fore", end), "only a start zero: held")
}

// Ensure that the weight-tare model reading = a + b·sin α + c·cos α
// recovers its parameters from a noise-free flow-off sweep, and that At
// gives the tare at any angle. Invented model: 2.4 kg on the balance.
func TestFitTare_RecoversModel(t *testing.T) {
	const w = 2.4 * 9.80665 // N
	want := map[string][3]float64{
		"normal": {0.3, 0, -w}, // the weight acts against the normal force at α = 0
		"axial":  {-0.1, w, 0},
		"moment": {0.02, 0.004 * w, -0.011 * w}, // N·m, centre of gravity 4 mm aft and 11 mm above the moment centre
	}
	var alpha []float64
	readings := map[string][]float64{}
	for deg := -10.0; deg <= 30; deg += 4 {
		a := rig.Rad(deg)
		alpha = append(alpha, a)
		for ch, c := range want {
			readings[ch] = append(readings[ch], c[0]+c[1]*math.Sin(a)+c[2]*math.Cos(a))
		}
	}
	tare, err := calibrate.FitTare(alpha, readings)
	require.NoError(t, err)
	for ch, c := range want {
		f := tare.Channels[ch]
		for j := range 3 {
			assert.InDelta(t, c[j], f.Coef[j], 1e-9, "%s coef %d", ch, j)
		}
		assert.Equal(t, 8, f.Dof)
		a := rig.Rad(12.5)
		assert.InDelta(t, c[0]+c[1]*math.Sin(a)+c[2]*math.Cos(a), tare.At(ch, a), 1e-12)
	}
	assert.Equal(t, 0.0, tare.At("pitot", 0.1), "no tare for a channel not in the sweep")

	for _, tc := range []struct {
		name     string
		alpha    []float64
		readings map[string][]float64
		want     string
	}{
		{"three angles", alpha[:3], map[string][]float64{"n": {1, 2, 3}}, "weight tare: need at least 4 angles, have 3"},
		{"readings short", alpha[:4], map[string][]float64{"n": {1, 2, 3}}, `weight tare: channel "n" has 3 readings for 4 angles`},
		{"NaN reading", alpha[:4], map[string][]float64{"n": {1, 2, math.NaN(), 3}}, `weight tare: channel "n", angle 3: reading is not a finite number`},
		{"one angle only", []float64{0.1, 0.1, 0.1, 0.1}, map[string][]float64{"n": {1, 2, 1, 2}},
			"weight tare: the angles do not separate the constant, sin α and cos α: sweep over a wider range of angles"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := calibrate.FitTare(tc.alpha, tc.readings)
			require.Error(t, err)
			assert.Equal(t, "calibration points cannot be fitted: "+tc.want, err.Error())
		})
	}
}
