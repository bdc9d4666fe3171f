package dashboard

import (
	"encoding/json"
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/calibrate"
	"liftyard/estimate"
)

// Ensure that the live API carries a rotor's spin ratio with its U95 and
// its spin in rpm (issue 12), that other kinds' live JSON has no spin keys,
// and that the rotor's live layout swaps the α tile for S and rpm tiles.
func TestLiveJSON_Rotor(t *testing.T) {
	l := estimate.Live{SpinRatio: calibrate.Value{X: 1.5, U: 0.01, Dof: math.Inf(1)}, OmegaRadPerS: 100 * math.Pi} // 3000 rpm
	b, err := json.Marshal(toLiveJSON(l))
	require.NoError(t, err)
	var m map[string]any
	require.NoError(t, json.Unmarshal(b, &m))
	assert.InDelta(t, 1.5, m["spin_ratio"], 1e-12)
	assert.InDelta(t, 0.0196, m["spin_ratio_u95"], 1e-4)
	assert.InDelta(t, 3000, m["spin_rpm"], 1e-9, "100π rad/s = 3000 rpm (NIST SP 811 B.9)")

	b, err = json.Marshal(toLiveJSON(estimate.Live{}))
	require.NoError(t, err)
	assert.NotContains(t, string(b), "spin_")

	assert.Equal(t, "balance rotor", viewOf("rotor").Layout)
	assert.Equal(t, "balance", viewOf("foil").Layout)
}
