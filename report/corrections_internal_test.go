package report

import (
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/rig"
	"liftyard/storage"
)

// Ensure that the report's "Corrections applied" list names each
// correction the rig file applied and says "none" for the others, and that
// a roof run (no balance) gets no list.
func TestCorrections_Listed(t *testing.T) {
	g := &rig.Rig{Kind: rig.KindFoil,
		Tare:     []rig.TareChannel{{Channel: "n_fore"}, {Channel: "n_aft"}},
		Blockage: &rig.Blockage{SectionAreaM2: 2, ModelVolumeM3: 0.002, SolidK: 0.9, Wake: true, UFrac: 0.25}}
	r := &Report{Run: storage.Run{Kind: "foil"}, Rig: g}
	got := r.corrections()
	require.Len(t, got, 3)
	assert.Contains(t, got[0], "subtracted from n_fore, n_aft")
	assert.Contains(t, got[1], "Balance interaction matrix: none")
	assert.True(t, strings.HasPrefix(got[2], "Blockage (Barlow, Rae & Pope 1999"), got[2])
	assert.Contains(t, got[2], "0.9·V/C^1.5 = 6.36×10⁻⁴ on C = 2 m²", "ε_sb = 0.9·0.002/2^1.5 = 0.000 636 4")

	r = &Report{Run: storage.Run{Kind: "roof"}, Rig: &rig.Rig{Kind: rig.KindRoof}}
	assert.Nil(t, r.corrections())
}
