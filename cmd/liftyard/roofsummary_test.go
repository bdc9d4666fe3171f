package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/calibrate"
	"liftyard/estimate"
)

// Ensure that import and reprocess summarise a roof run in the roof's own
// terms — blocks, zones, net Cp and block peaks — and not with the lift
// curve of a foil (issue 11: "96 steady segments … no lift-curve fit").
func TestPrintRoofSummary(t *testing.T) {
	segs := []estimate.Segment{
		{Zone: "corner", Block: 0, CpMean: calibrate.Value{X: -1.2049, U: 0.05, Dof: math.Inf(1)}, CpPeak: -2.5, CpPeakU: 0.1, DirectionRad: math.NaN()},
		{Zone: "corner", Tap: "t1", Block: 0, CpMean: calibrate.Value{X: -1.3}},
		{Zone: "corner", Block: 1, CpMean: calibrate.Value{X: -1.1, U: 0.05, Dof: math.Inf(1)}, CpPeak: -2.4, CpPeakU: 0.1, DirectionRad: math.NaN(), SamplesUnblocked: 37},
	}
	var b bytes.Buffer
	printRoofSummary(&b, segs)
	out := b.String()
	assert.Contains(t, out, "2 blocks")
	assert.Contains(t, out, "block 0 corner   net Cp −1.205 ± 0.098, block peak −2.50 ± 0.20 (q at mast)")
	assert.Contains(t, out, "37 samples fell in no block")
	assert.Contains(t, out, "not a design approval")
	assert.NotContains(t, out, "t1", "per-tap rows stay in the export")
	assert.NotContains(t, out, "lift", "no foil lines")
	assert.Equal(t, 5, strings.Count(out, "\n"))
}

// Ensure that `check` warns (and still passes) when a roof's tributary
// areas do not add up to its reference area (issue 11).
func TestCheck_TributaryAreas(t *testing.T) {
	text, err := os.ReadFile("../../testdata/rigs/roof-yard.toml")
	require.NoError(t, err)
	dir := t.TempDir()
	for _, tc := range []struct {
		name, text, want string
	}{
		{"adds up", string(text), ""},
		{"one tap short", strings.Replace(string(text), "area_m2   = 6.0", "area_m2   = 7.5", 1), "add up to 6 m², the reference area is 7.5 m² (-20.0 %)"},
	} {
		path := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-")+".toml")
		require.NoError(t, os.WriteFile(path, []byte(tc.text), 0o644))
		var out, errb bytes.Buffer
		require.Equal(t, 0, run(t.Context(), []string{"check", path}, &out, &errb), "%s: %s", tc.name, errb.String())
		if tc.want == "" {
			assert.NotContains(t, out.String(), "warning", tc.name)
		} else {
			assert.Contains(t, out.String(), tc.want, tc.name)
		}
	}
}
