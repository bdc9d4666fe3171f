package rig_test

import (
	"errors"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/rig"
)

const typeBRig = `name = "span"
kind = "foil"
fluid = "air"
[reference]
area_m2 = 0.05
length_m = 0.1
[[source]]
name = "s"
type = "simulated"
[[channel]]
name = "n"
quantity = "force"
unit = "N"
capacity = "50 N"
calibration = { poly = [0, 1], u = 0.01, span_u_pct = 0.5 }
[[channel]]
name = "q"
quantity = "pressure"
unit = "Pa"
capacity = "1 kPa"
calibration = { poly = [0, 1], u = 0.2 }
[lift]
normal = ["n"]
angle = 4.0
dynamic_pressure = "q"
pitot_coefficient = 0.99
pitot_coefficient_u = 0.005
`

// Ensure that the optional Type B keys of issue 10 are read (span_u_pct in
// %, pitot_coefficient_u), default to 0 when absent, round-trip through
// Format, and that a bad span names its line.
func TestParse_TypeBKeys(t *testing.T) {
	r, err := rig.Parse("span.toml", []byte(typeBRig))
	require.NoError(t, err)
	n, _ := r.Channel("n")
	q, _ := r.Channel("q")
	assert.InDelta(t, 0.005, n.Calibration.SpanURel, 1e-15)
	assert.Zero(t, q.Calibration.SpanURel, "absent: no span term")
	assert.InDelta(t, 0.005, r.Lift.PitotCoeffU, 1e-15)

	back, err := rig.Parse("again.toml", rig.Format(r))
	require.NoError(t, err)
	n2, _ := back.Channel("n")
	assert.InDelta(t, n.Calibration.SpanURel, n2.Calibration.SpanURel, 1e-15)
	assert.InDelta(t, r.Lift.PitotCoeffU, back.Lift.PitotCoeffU, 1e-15)

	_, err = rig.Parse("bad.toml", []byte(strings.Replace(typeBRig, "span_u_pct = 0.5", "span_u_pct = -1", 1)))
	var re *rig.Error
	require.True(t, errors.As(err, &re), "%v", err)
	assert.ErrorContains(t, err, "bad.toml:15:42:")
	assert.ErrorContains(t, err, "span_u_pct must be a percentage from 0 to 100")
	_, err = rig.Parse("bad.toml", []byte(strings.Replace(typeBRig, "pitot_coefficient_u = 0.005", "pitot_coefficient_u = -0.1", 1)))
	assert.ErrorContains(t, err, "pitot_coefficient_u must be ≥ 0")
}
