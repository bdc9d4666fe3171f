package main

import (
	"bytes"
	"math"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/sim"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// tareRigTOML is an invented wind-tunnel foil on two normal cells and one
// axial cell, read in kgf so that the printed tare is converted back from
// SI, with an angle channel for the sweep.
const tareRigTOML = `name = "tare-foil"
kind = "foil"
fluid = "air"

[reference]
area_m2 = 0.12
length_m = 0.2
span_m = 0.6

[[source]]
name = "sim"
type = "simulated"

[[channel]]
name = "n_fore"
quantity = "force"
unit = "kgf"
capacity = "20 kgf"
calibration = { poly = [0.0, 1.0], u = 0.002 }

[[channel]]
name = "n_aft"
quantity = "force"
unit = "kgf"
capacity = "20 kgf"
calibration = { poly = [0.0, 1.0], u = 0.002 }

[[channel]]
name = "axial"
quantity = "force"
unit = "kgf"
capacity = "20 kgf"
calibration = { poly = [0.0, 1.0], u = 0.002 }

[[channel]]
name = "pitot"
quantity = "pressure"
unit = "Pa"
capacity = "1 kPa"
calibration = { poly = [0.0, 1.0], u = 0.5 }

[[channel]]
name = "alpha"
quantity = "angle"
unit = "deg"
calibration = { poly = [0.0, 1.0], u = 0.02 }

[lift]
normal = ["n_fore", "n_aft"]
axial = ["axial"]
angle = "alpha"
dynamic_pressure = "pitot"
`

// Ensure that `liftyard tare` fits the weight tare of a recorded flow-off
// angle sweep and prints [[tare]] tables that, pasted into the rig file,
// parse and hold the simulated tare in the channels' own unit (kgf).
func TestTare_PrintsRigTables(t *testing.T) {
	r, err := rig.Parse("tare.toml", []byte(tareRigTOML))
	require.NoError(t, err)
	w := map[string][3]float64{"n_fore": {2, 6, -9}, "n_aft": {1, 4, -7}, "axial": {0.5, -8, 1}} // N (invented)
	steps := []float64{-6, -2, 2, 6, 10, 14}
	s, err := sim.New(r, sim.Config{QPa: 1, FlowOff: true, StepsDeg: steps, Hold: 3 * time.Second, Move: time.Second,
		Seed: 4, WeightTare: w}, 0)
	require.NoError(t, err)
	db := filepath.Join(t.TempDir(), "tare.db")
	store, err := storage.Open(db, storage.Options{})
	require.NoError(t, err)
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: r, RigTOML: tareRigTOML, Offline: true})
	require.NoError(t, err)
	var blocks acquire.Blocks
	for range int(float64(len(steps)) * 4 * s.Config().RateHz / float64(s.Config().BlockSamples)) {
		b := s.Next()
		b.Received = time.UnixMicro(b.T0Us)
		blocks = append(blocks, b)
	}
	_, err = process.Replay(t.Context(), blocks, rec.Pipeline(), rec.Keep)
	require.NoError(t, err)
	_, err = rec.Finish(t.Context(), nil, nil)
	require.NoError(t, err)
	require.NoError(t, store.Close())

	var out, errb bytes.Buffer
	code := run(t.Context(), []string{"tare", "--db", db, "--run", "latest"}, &out, &errb)
	require.Equal(t, 0, code, "stderr: %s", errb.String())
	assert.Contains(t, errb.String(), "n_fore [kgf]", "the holds table names the unit")
	withTare, err := rig.Parse("tared.toml", []byte(tareRigTOML+"\n"+out.String()))
	require.NoError(t, err, "the printed tables parse:\n%s", out.String())
	require.Len(t, withTare.Tare, 3)
	const kgf = 9.80665 // N per kgf (NIST SP 811 B.9, exact)
	for _, tc := range withTare.Tare {
		// Over ±10° the constant and cos α nearly coincide, so the test
		// compares the tare itself across the swept range, not a and c.
		for _, deg := range []float64{-6, 0, 5, 10, 14} {
			a := rig.Rad(deg)
			tare := func(c [3]float64) float64 { return c[0] + c[1]*math.Sin(a) + c[2]*math.Cos(a) }
			assert.InDelta(t, tare(w[tc.Channel])/kgf, tare(tc.Coef), 3*tc.U+1e-4, "%s tare at %g° (kgf)", tc.Channel, deg)
		}
		assert.Positive(t, tc.U)
		assert.Less(t, tc.U, 0.01, "%s: u is the fit's residual SD, kgf", tc.Channel)
	}

	code = run(t.Context(), []string{"tare", "--db", db}, &out, &errb)
	assert.Equal(t, 2, code, "--run is required")
}
