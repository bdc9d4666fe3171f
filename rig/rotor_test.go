package rig_test

import (
	"errors"
	"os"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/rig"
)

// Ensure that the example rotor rig parses with its radius uncertainty
// (radius_u_m, issue 12), round-trips through Format, that a rig without
// the key reads it as 0, and that a bad value names its line.
func TestParse_RotorRadiusU(t *testing.T) {
	text, err := os.ReadFile("../testdata/rigs/rotor-cylinder.toml")
	require.NoError(t, err)
	r, err := rig.Parse("rotor-cylinder.toml", text)
	require.NoError(t, err)
	assert.Equal(t, rig.KindRotor, r.Kind)
	assert.InDelta(t, 0.05, r.Reference.RadiusM, 1e-15)
	assert.InDelta(t, 0.0001, r.Reference.RadiusUM, 1e-15)
	assert.Equal(t, "projected", r.Reference.AreaKind)
	again, err := rig.Parse("again.toml", rig.Format(r))
	require.NoError(t, err)
	assert.Equal(t, r.Reference, again.Reference)

	old := strings.Replace(string(text), "radius_u_m = 0.0001", "", 1)
	r, err = rig.Parse("old.toml", []byte(old))
	require.NoError(t, err)
	assert.Zero(t, r.Reference.RadiusUM, "a rig without radius_u_m reads as before")

	bad := strings.Replace(string(text), "radius_u_m = 0.0001", "radius_u_m = -0.1", 1)
	_, err = rig.Parse("bad.toml", []byte(bad))
	require.Error(t, err)
	var re rig.Errors
	require.True(t, errors.As(err, &re), "%v", err)
	assert.Contains(t, err.Error(), "bad.toml:23:")
	assert.Contains(t, err.Error(), "radius_u_m must be ≥ 0")
}
