package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/rig"
)

// simRoofRig is the example roof rig with its serial tap scanner replaced
// by a simulated source of the same name.
func simRoofRig(t *testing.T) (*rig.Rig, string) {
	t.Helper()
	text, err := os.ReadFile("../../testdata/rigs/roof-yard.toml")
	require.NoError(t, err)
	src := "[[source]]\nname = \"scanner\"\ntype = \"simulated\"\n\n"
	re := regexp.MustCompile(`(?s)\[\[source\]\].*?\n# Tap transducers`)
	toml := re.ReplaceAllString(string(text), src+"# Tap transducers")
	require.NotEqual(t, string(text), toml, "the source table was replaced")
	r, err := rig.Parse("sim-roof.toml", []byte(toml))
	require.NoError(t, err)
	return r, toml
}

// Ensure that a roof rig records end to end: the simulated tap scanner
// through the recorder, the roof estimator and the store, then `export
// --what segments --format json` gives one row per zone per block with the
// roof fields of docs/design.md §3.4, and each zone's net Cp mean lies within its
// U95 of the simulator's true value.
func TestRecord_RoofEndToEnd(t *testing.T) {
	r, toml := simRoofRig(t)
	fluid, err := estimate.Properties(r.Fluid, r.Conditions)
	require.NoError(t, err)
	q := estimate.DynamicPressure(fluid.RhoKgPerM3, 12) // a 12 m/s breeze at eave height (invented)
	s, err := sim.NewRoof(r, sim.RoofConfig{QPa: q, Seed: 11})
	require.NoError(t, err)

	db := filepath.Join(t.TempDir(), "roof.db")
	m := &Main{Rig: r, RigTOML: toml, DBPath: db, Addr: "127.0.0.1:0",
		Sources: []Source{{Name: "scanner", Src: s, Health: &s.Health}},
		Roof:    estimate.RoofConfig{Block: 2 * time.Second}}
	ctx, cancel := context.WithTimeout(t.Context(), 5*time.Second)
	defer cancel()
	require.NoError(t, m.Run(ctx))
	assert.Empty(t, m.Finished.Drift, "no zero-drift correction on a roof")

	var out, errOut bytes.Buffer
	code := run(t.Context(), []string{"export", "--db", db, "--run", "latest", "--what", "segments", "--format", "json"}, &out, &errOut)
	require.Equal(t, 0, code, "export: %s", errOut.String())
	var rows []map[string]any
	require.NoError(t, json.Unmarshal(out.Bytes(), &rows), "export JSON: %s", out.String())
	require.NotEmpty(t, rows)

	perZone := map[string]int{}
	for i, row := range rows {
		zone, ok := row["zone"].(string)
		require.True(t, ok, "row %d has no zone: %v", i, row)
		for _, k := range []string{"cp_mean", "cp_peak", "cp_u95", "cp_rms", "uplift_n", "q_pa"} {
			_, ok := row[k].(float64)
			assert.True(t, ok, "row %d (%s): %s = %v, want a number", i, zone, k, row[k])
		}
		assert.Nil(t, row["cl"], "row %d: a roof row has no C_L", i)
		cp, _ := row["cp_mean"].(float64)
		u, _ := row["cp_u95"].(float64)
		peak, _ := row["cp_peak"].(float64)
		truth := s.TrueCp(zone)
		require.False(t, math.IsNaN(truth), "zone %q unknown to the simulator", zone)
		assert.LessOrEqual(t, math.Abs(cp-truth), u, "block %v zone %s: cp_mean %.4f ± %.4f vs true %.4f", row["segment"], zone, cp, u, truth)
		assert.Less(t, peak, cp, "zone %s: the expected block extreme is more negative than the mean", zone)
		perZone[zone]++
	}
	for _, z := range []string{"corner", "edge", "field"} {
		assert.GreaterOrEqual(t, perZone[z], 1, "zone %s has a block", z)
	}
	// The corner has a design value, so it is compared (En not null).
	for _, row := range rows {
		if row["zone"] == "corner" && row["tap"] == nil {
			assert.Equal(t, -2.2, row["design_cp"])
			_, ok := row["en"].(float64)
			assert.True(t, ok, "corner en = %v", row["en"])
		}
	}
	t.Logf("%d roof rows, blocks per zone %v", len(rows), perZone)

	// issue 11: the block length is stored with the run and reprocess
	// reuses it (the rig file alone would give 10 minutes and no block);
	// reprocess prints the roof's own summary.
	run1 := storedRun(t, db)
	assert.Equal(t, 2.0, run1.BlockS)
	out.Reset()
	errOut.Reset()
	code = run(t.Context(), []string{"reprocess", "--db", db, "--run", "latest"}, &out, &errOut)
	require.Equal(t, 0, code, "reprocess: %s", errOut.String())
	assert.Contains(t, errOut.String(), "blocks")
	assert.Contains(t, errOut.String(), "net Cp")
	assert.NotContains(t, errOut.String(), "lift-curve")
	run2 := storedRun(t, db)
	assert.Equal(t, 2.0, run2.BlockS)
	assert.Equal(t, run1.Segments, run2.Segments, "the same blocks again")
	code = run(t.Context(), []string{"reprocess", "--db", db, "--run", "1", "--block", "1s"}, &out, &errOut)
	require.Equal(t, 0, code, "reprocess --block: %s", errOut.String())
	assert.Equal(t, 1.0, storedRun(t, db).BlockS, "--block overrides the run's own")
}
