package rig_test

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/rig"
)

const corrBase = `name = "c"
kind = "foil"
fluid = "fresh_water"

[reference]
area_m2 = 0.09
length_m = 0.15

[[channel]]
name = "n_fore"
quantity = "force"
unit = "kgf"
capacity = "50 kgf"
calibration = { poly = [0, 1], u = 0.01 }

[[channel]]
name = "axial"
quantity = "force"
unit = "N"
capacity = "100 N"
calibration = { poly = [0, 1], u = 0.02 }

[[channel]]
name = "pitot"
quantity = "pressure"
unit = "Pa"
capacity = "5 kPa"
calibration = { poly = [0, 1], u = 2 }

[lift]
normal = ["n_fore"]
axial = ["axial"]
angle = 2.0
dynamic_pressure = "pitot"
`

// Ensure that [[tare]], [balance] and [blockage] are read with their
// defaults, keep the channels' units, and survive Format → Parse.
func TestParse_Corrections(t *testing.T) {
	r, err := rig.Parse("c.toml", []byte(corrBase+`
[[tare]]
channel = "n_fore"
coef = [0.5, 1.2, -3.0]
u = 0.02

[balance]
outputs = ["n_fore", "axial"]
matrix = [[1.01, 0.02, 0.0, 1e-4, 0.0], [0.03, 0.98, 0.0, 0.0, 2e-4]]
u = [0.01, 0.03]

[blockage]
section_area_m2 = 2.5
model_volume_m3 = 0.0015
`))
	require.NoError(t, err)
	require.Len(t, r.Tare, 1)
	assert.Equal(t, rig.TareChannel{Channel: "n_fore", Coef: [3]float64{0.5, 1.2, -3}, U: 0.02}, r.Tare[0], "in the channel's unit (kgf), like a calibration")
	require.NotNil(t, r.Balance)
	assert.Equal(t, []string{"n_fore", "axial"}, r.Balance.Components, "components default to the outputs")
	assert.True(t, r.Balance.SecondOrder(), "2 outputs + 3 products per row")
	require.NotNil(t, r.Blockage)
	assert.Equal(t, rig.BlockageKWing, r.Blockage.SolidK, "a foil takes the wing factor")
	assert.True(t, r.Blockage.Wake)
	assert.Equal(t, rig.BlockageUFrac, r.Blockage.UFrac)
	// ε_sb = 0.90·0.0015/2.5^1.5 = 0.000 341 53 (by hand).
	assert.InDelta(t, 0.00034153, r.Blockage.SolidEpsFrac(), 1e-8)

	again, err := rig.Parse("again.toml", rig.Format(r))
	require.NoError(t, err, "%s", rig.Format(r))
	assert.Equal(t, r.Tare, again.Tare)
	assert.Equal(t, r.Balance, again.Balance)
	assert.Equal(t, r.Blockage, again.Blockage)
}

// Ensure that every rig file shipped before the corrections existed still
// parses, with no correction: the sections are optional and default to
// none (their results are checked unchanged by process's and estimate's
// golden tests).
func TestParse_OldRigsHaveNoCorrections(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("..", "testdata", "rigs", "*.toml"))
	require.NoError(t, err)
	require.NotEmpty(t, files)
	for _, f := range files {
		data, err := os.ReadFile(f)
		require.NoError(t, err)
		r, err := rig.Parse(f, data)
		require.NoError(t, err, f)
		assert.Nil(t, r.Tare, f)
		assert.Nil(t, r.Balance, f)
		assert.Nil(t, r.Blockage, f)
		again, err := rig.Parse(f, rig.Format(r))
		require.NoError(t, err, f)
		assert.Nil(t, again.Tare, "%s: Format writes no empty section", f)
		assert.Nil(t, again.Balance, f)
		assert.Nil(t, again.Blockage, f)
	}
}
