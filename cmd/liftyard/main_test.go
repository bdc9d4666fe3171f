package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire/sim"
	"liftyard/rig"
	"liftyard/storage"
)

// runCLI runs one command line in-process and returns its exit status and
// output.
func runCLI(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var out, errb bytes.Buffer
	code = run(t.Context(), args, &out, &errb)
	return code, out.String(), errb.String()
}

// demoForTest runs the demo pipeline (embedded broker, simulated carriage
// publishing through paho, recorder subscribing through paho, estimator,
// bbolt store, dashboard) for d with short angle steps, and returns the
// store path and the simulator.
func demoForTest(t *testing.T, d time.Duration, onReady func(url string, id uint64)) (string, *sim.Rig) {
	t.Helper()
	db := filepath.Join(t.TempDir(), "demo.db")
	m := &Main{DBPath: db, Addr: "127.0.0.1:0", OnReady: onReady}
	ctx, cancel := context.WithTimeout(t.Context(), d)
	defer cancel()
	cfg := sim.Config{Seed: 11, StepsDeg: []float64{-2, 3, 8}, Hold: 2200 * time.Millisecond, Move: 300 * time.Millisecond}
	s, err := runDemoSession(ctx, m, cfg)
	require.NoError(t, err)
	return db, s
}

// Ensure that the demo carries real data through every stage, through the
// embedded MQTT broker, into the store: each steady angle step gives one
// segment whose C_L agrees with the simulator's true C_L within its U95
// (issue 3, "must show").
func TestDemo_SegmentsAgreeWithTruth(t *testing.T) {
	db, s := demoForTest(t, 11*time.Second, nil)

	code, out, errOut := runCLI(t, "export", "--db", db, "--run", "latest", "--what", "segments", "--format", "json")
	require.Equal(t, 0, code, errOut)
	var rows []map[string]any
	require.NoError(t, json.Unmarshal([]byte(out), &rows))
	require.GreaterOrEqual(t, len(rows), 3, "one segment per 2.5 s step over 11 s")

	steps := map[float64]bool{-2: true, 3: true, 8: true}
	complete := 0
	for _, row := range rows {
		alphaDeg := row["alpha_deg"].(float64)
		nearest := 0.0
		for st := range steps {
			if abs(st-alphaDeg) < abs(nearest-alphaDeg) {
				nearest = st
			}
		}
		require.InDelta(t, nearest, alphaDeg, 0.1, "segment angle sits on a commanded step")
		if row["n"].(float64) < 300 { // the run may end inside a step
			continue
		}
		complete++
		clTrue, _ := s.Foil().Truth(rig.Rad(nearest))
		cl, u95 := row["cl"].(float64), row["cl_u95"].(float64)
		assert.Greater(t, u95, 0.0)
		assert.LessOrEqual(t, abs(cl-clTrue), u95, "segment at %g°: C_L %.4f ± %.4f vs true %.4f", nearest, cl, u95, clTrue)
		for _, k := range []string{"run", "segment", "t_start", "t_end", "n_eff", "q_pa", "q_u95_pa", "speed_m_s", "rho_kg_m3", "re", "cd", "cd_u95"} {
			assert.Contains(t, row, k)
		}
	}
	assert.GreaterOrEqual(t, complete, 2)

	code, out, errOut = runCLI(t, "runs", "--db", db, "--json")
	require.Equal(t, 0, code, errOut)
	var runs []storage.Run
	require.NoError(t, json.Unmarshal([]byte(out), &runs))
	require.Len(t, runs, 1)
	r := runs[0]
	assert.Equal(t, storage.StatusComplete, r.Status)
	assert.Equal(t, "foil-towtank", r.Rig)
	assert.Equal(t, len(rows), r.Segments)
	require.NotEmpty(t, r.Sources)
	assert.Equal(t, "carriage", r.Sources[0].Source)
	assert.Greater(t, r.Sources[0].Frames, uint64(50), "blocks came through the broker")
	assert.Equal(t, r.Sources[0].Samples, r.Samples, "every received sample is stored")
	assert.Zero(t, r.Sources[0].Rejected+r.Sources[0].Gaps+r.Sources[0].BlocksDropped)
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// Ensure that the demo's embedded rig is the example rig shipped in
// testdata, so the documented example is the one the demo runs.
func TestDemoRig_IsTheExample(t *testing.T) {
	want, err := os.ReadFile("../../testdata/rigs/foil-towtank.toml")
	require.NoError(t, err)
	assert.Equal(t, string(want), string(demoRigTOML), "refresh it: cp testdata/rigs/foil-towtank.toml cmd/liftyard/demo-rig.toml")
}

// Ensure that usage errors exit 2, runtime failures 1, help 0, and that
// check names the line of a bad rig file (docs/design.md §3.1 exit statuses).
func TestCLI_ExitStatus(t *testing.T) {
	bad := filepath.Join(t.TempDir(), "bad.toml")
	require.NoError(t, os.WriteFile(bad, []byte("name = \"x\"\nkind = \"foil\"\nfluid = \"lava\"\n"), 0o644))
	tests := []struct {
		name     string
		args     []string
		code     int
		inStdout string
		inStderr string
	}{
		{"no args", nil, 2, "Commands:", ""},
		{"help", []string{"help"}, 0, "demo", ""},
		{"unknown verb", []string{"fly"}, 2, "", `unknown command "fly"`},
		{"verb help", []string{"demo", "--help"}, 0, "--for", ""},
		{"bad flag", []string{"runs", "--nope"}, 2, "", "unknown flag --nope"},
		{"check good", []string{"check", "../../testdata/rigs/foil-towtank.toml"}, 0, "ok", ""},
		{"check roof", []string{"check", "../../testdata/rigs/roof-yard.toml"}, 0, "ok", ""},
		{"check bad", []string{"check", bad}, 2, "", "bad.toml:3:"},
		{"check missing file", []string{"check", "/nonexistent.toml"}, 2, "", "no such file"},
		{"runs missing db", []string{"runs", "--db", "/nonexistent.db"}, 2, "", "no such file"},
		{"export bad what", []string{"export", "--what", "everything"}, 2, "", `--what "everything"`},
		{"report without run", []string{"report"}, 2, "", "--run missing"},
		{"calibrate without channel", []string{"calibrate"}, 2, "", "--channel is required"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			code, out, errOut := runCLI(t, tt.args...)
			assert.Equal(t, tt.code, code, "stdout %q stderr %q", out, errOut)
			assert.Contains(t, out, tt.inStdout)
			assert.Contains(t, errOut, tt.inStderr)
			if tt.code == 2 && tt.inStderr != "" {
				assert.False(t, strings.Contains(errOut, "panic"))
			}
		})
	}
}
