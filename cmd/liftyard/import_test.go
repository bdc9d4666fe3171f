package main

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

var (
	towtankRig = filepath.Join("..", "..", "testdata", "rigs", "foil-towtank.toml")
	// importCSV is a raw record of the simulated tow-tank foil, made by
	// TestImportData_UpToDate (go test ./cmd/liftyard -run ImportData -update).
	importCSV  = filepath.Join("..", "..", "testdata", "import", "foil-towtank-raw.csv")
	designCSV  = filepath.Join("..", "..", "testdata", "rigs", "design", "foil-towtank-design.csv")
	importStep = []float64{-4, 0, 4, 8, 12}
)

// importBlocks is the length of the generated record: five 2.5 s holds and
// the four 0.5 s moves between them at 100 Hz, in blocks of 10 samples.
const importBlocks = 145

// towtankSim is the simulator behind importCSV: the example rig's foil
// swept once through importStep (an invented scenario, seeded).
func towtankSim(t *testing.T) *sim.Rig {
	t.Helper()
	r, err := rig.Load(towtankRig)
	require.NoError(t, err)
	fl, err := estimate.Properties(r.Fluid, r.Conditions)
	require.NoError(t, err)
	s, err := sim.New(r, sim.Config{
		QPa: estimate.DynamicPressure(fl.RhoKgPerM3, defaultSpeed(r.Fluid)), Seed: 6, RateHz: 100, BlockSamples: 10,
		StepsDeg: importStep, Hold: 2500 * time.Millisecond, Move: 500 * time.Millisecond,
		Start: time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC),
	}, fl.RhoKgPerM3)
	require.NoError(t, err)
	return s
}

// generateRawCSV writes the simulator's blocks through the store and
// storage.ExportRaw, the same writer a user's export goes through.
func generateRawCSV(t *testing.T, s *sim.Rig) []byte {
	t.Helper()
	return generateRawCSVN(t, s, importBlocks)
}

// generateRawCSVN is generateRawCSV for n blocks.
func generateRawCSVN(t *testing.T, s *sim.Rig, n int) []byte {
	t.Helper()
	store, err := storage.Open(filepath.Join(t.TempDir(), "gen.db"), storage.Options{})
	require.NoError(t, err)
	defer store.Close()
	id, err := store.CreateRun(storage.Run{Rig: "foil-towtank", Started: time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)})
	require.NoError(t, err)
	w := store.NewWriter(id, storage.WriterConfig{})
	in := make(chan storage.Item, n)
	for range n {
		b := s.Next()
		in <- storage.Item{Block: &b}
	}
	close(in)
	require.NoError(t, w.Run(t.Context(), in))
	var buf bytes.Buffer
	require.NoError(t, store.ExportRaw(&buf, id))
	return buf.Bytes()
}

// Ensure that the committed raw record is exactly what the seeded simulator
// makes (regenerate with -update and read the diff).
func TestImportData_UpToDate(t *testing.T) {
	got := generateRawCSV(t, towtankSim(t))
	if *updateGolden {
		require.NoError(t, os.WriteFile(importCSV, got, 0o644))
	}
	want, err := os.ReadFile(importCSV)
	require.NoError(t, err)
	require.True(t, bytes.Equal(want, got), "testdata/import/foil-towtank-raw.csv is stale: run go test ./cmd/liftyard -run ImportData -update")
}

// exportRows runs `export --what segments --format json` on run ref.
func exportRows(t *testing.T, db, ref string) []map[string]any {
	t.Helper()
	code, out, errOut := runCLI(t, "export", "--db", db, "--run", ref, "--what", "segments", "--format", "json")
	require.Equal(t, 0, code, errOut)
	var rows []map[string]any
	require.NoError(t, json.Unmarshal([]byte(out), &rows))
	return rows
}

// Ensure the issue 6 "must show": `import` of a raw CSV generated from the
// simulator for testdata/rigs/foil-towtank.toml, then `export --what
// segments --format json`, gives one row per angle step with cl within
// cl_u95 of the simulator's true C_L; the run is complete, keeps its raw
// samples and says where it came from.
func TestImport_SegmentsAgreeWithTruth(t *testing.T) {
	foil := towtankSim(t).Foil()
	db := filepath.Join(t.TempDir(), "import.db")
	code, out, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", db, importCSV)
	require.Equal(t, 0, code, errOut)
	require.Equal(t, "1\n", out, "import prints the run id")

	rows := exportRows(t, db, "1")
	require.Len(t, rows, len(importStep), "one row per angle step")
	for i, row := range rows {
		step := importStep[i]
		alpha := row["alpha_deg"].(float64)
		require.InDelta(t, step, alpha, 0.2, "row %d", i)
		truth, _ := foil.Truth(rig.Rad(step))
		cl, u95 := row["cl"].(float64), row["cl_u95"].(float64)
		t.Logf("α %.2f°: C_L %.4f ± %.4f, truth %.4f", alpha, cl, u95, truth)
		if math.Abs(cl-truth) > u95 {
			t.Errorf("step %g°: cl %.4f ± %.4f misses truth %.4f", step, cl, u95, truth)
		}
		if row["design_cl"] != nil || row["en"] != nil {
			t.Errorf("step %g°: design_cl %v en %v without a design curve", step, row["design_cl"], row["en"])
		}
	}
	store, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer store.Close()
	run, err := store.Run(1)
	require.NoError(t, err)
	require.Equal(t, storage.StatusComplete, run.Status)
	require.Equal(t, uint64(importBlocks*10), run.Samples, "every sample stored")
	require.Contains(t, run.Note, "imported from foil-towtank-raw.csv")
}

// Ensure that a rig's [lift] design CSV reaches the results: design_cl and
// en on every row; the attached steps agree with the invented design, and
// the stalled 12° step (the simulated foil stalls at 11°) does not.
func TestImport_DesignComparison(t *testing.T) {
	base, err := os.ReadFile(towtankRig)
	require.NoError(t, err)
	dir := t.TempDir() // the design CSV lives beside the rig file (a rig may name no file outside its folder)
	design, err := os.ReadFile(designCSV)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(dir, "design.csv"), design, 0o644))
	rigFile := filepath.Join(dir, "foil-designed.toml")
	require.NoError(t, os.WriteFile(rigFile, append(base, []byte("design = \"design.csv\"\n")...), 0o644))
	db := filepath.Join(t.TempDir(), "import.db")
	code, _, errOut := runCLI(t, "import", "--rig", rigFile, "--db", db, importCSV)
	require.Equal(t, 0, code, errOut)
	t.Log(errOut)
	require.Contains(t, errOut, "lift slope")
	require.Contains(t, errOut, "design (design curve")
	require.Contains(t, errOut, ": disagrees\n    1 of 5 points disagree")
	require.Contains(t, errOut, "all at or above 12.0°, with the measured lift below the design: stall")
	rows := exportRows(t, db, "latest")
	require.Len(t, rows, len(importStep))
	for i, row := range rows {
		en, ok := row["en"].(float64)
		require.True(t, ok, "row %d has en %v", i, row["en"])
		require.NotNil(t, row["design_cl"])
		if stalled := importStep[i] > 11; stalled != (math.Abs(en) > 1) {
			t.Errorf("step %g°: En %.2f (stalled %v)", importStep[i], en, stalled)
		}
	}
}

// Ensure that a bad raw file is refused before any run is made, with the
// line and column, exit status 2.
func TestImport_BadFile(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "raw.csv")
	require.NoError(t, os.WriteFile(bad, []byte("t_s,n_fore,n_aft,pitot\n0.00,1,2,3\n0.01,1,2,3\n0.02,1,2,1.2.3\n"), 0o644))
	other := filepath.Join(dir, "other.csv")
	require.NoError(t, os.WriteFile(other, []byte("t_s,x\n0,1\n1,2\n"), 0o644))
	db := filepath.Join(dir, "x.db")
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"bad cell", []string{"--rig", towtankRig, "--db", db, bad}, `raw.csv:4: column "pitot": "1.2.3" is not a number`},
		{"foreign channels", []string{"--rig", towtankRig, "--db", db, other}, "none of its channels (x)"},
		{"no file", []string{"--rig", towtankRig, "--db", db}, "give exactly one raw CSV file"},
		{"no rig", []string{"--db", db, bad}, "--rig is required"},
		// issue 15: the error names the sources to choose from.
		{"unknown source", []string{"--rig", towtankRig, "--db", db, "--source", "mast", bad}, `--source "mast" is not a [[source]] of rig "foil-towtank" (its sources: carriage)`},
		{"block for a foil", []string{"--rig", towtankRig, "--db", db, "--block", "10m", bad}, "for roof rigs only"},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, errOut := runCLI(t, append([]string{"import"}, c.args...)...)
			if code != 2 || !strings.Contains(errOut, c.want) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", code, errOut, c.want)
			}
		})
	}
	_, err := os.Stat(db)
	require.True(t, os.IsNotExist(err), "no store is made for a refused file")
}

// Ensure that `export --what values` gives the calibrated values of an
// imported run with SI units in the header, equal to the rig's calibration
// of the raw file's readings.
func TestExport_Values(t *testing.T) {
	db := filepath.Join(t.TempDir(), "import.db")
	code, _, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", db, importCSV)
	require.Equal(t, 0, code, errOut)
	code, out, errOut := runCLI(t, "export", "--db", db, "--run", "1", "--what", "values", "--format", "csv")
	require.Equal(t, 0, code, errOut)
	lines := strings.Split(strings.TrimSpace(out), "\n")
	require.Equal(t, "t_s,n_fore_n,n_aft_n,a_main_n,pitot_pa,alpha_rad,t_water_k", lines[0])
	require.Len(t, lines, 1+importBlocks*10)
	raw, err := os.ReadFile(importCSV)
	require.NoError(t, err)
	rawLines := strings.Split(strings.TrimSpace(string(raw)), "\n")
	require.Equal(t, "t_s,n_fore,n_aft,a_main,pitot,alpha,t_water", rawLines[0])
	for _, i := range []int{1, 500, len(lines) - 1} {
		v, r := strings.Split(lines[i], ","), strings.Split(rawLines[i], ",")
		require.Equal(t, r[0], v[0], "same sample time")
		num := func(s string) float64 { x, err := strconv.ParseFloat(s, 64); require.NoError(t, err); return x }
		// n_fore: poly [-12.5, 0.0025] in N; alpha: [-180, 0.087890625] in degrees.
		require.InDelta(t, -12.5+0.0025*num(r[1]), num(v[1]), 1e-9)
		require.InDelta(t, (-180+0.087890625*num(r[5]))*math.Pi/180, num(v[5]), 1e-12)
		require.InDelta(t, 0.01*num(r[6])+273.15, num(v[6]), 1e-9)
	}
}

// Ensure that reprocessing the demo's run (raw blocks through the embedded
// broker, replayed in arrival order with their receive times) reproduces
// its segments to 1e-9 when the rig is unchanged (the path is deterministic:
// the same blocks meet the same aligner, calibrator and estimator), and that
// a corrected calibration, both normal-force cells reading 2 % high, shifts
// C_L by exactly 0.02·(C_L·cos²α + C_D·sin α·cos α), the normal force's
// share of the lift (L = N cos α − A sin α, docs/design.md §4).
func TestReprocess_DemoRun(t *testing.T) {
	db, _ := demoForTest(t, 6*time.Second, nil)
	code, out, errOut := runCLI(t, "reprocess", "--db", db, "--run", "1")
	require.Equal(t, 0, code, errOut)
	require.Equal(t, "2\n", out)
	orig, again := exportRows(t, db, "1"), exportRows(t, db, "2")
	require.GreaterOrEqual(t, len(orig), 2, "the demo gives a segment per 2.5 s step")
	require.Len(t, again, len(orig))
	for i := range orig {
		for _, k := range []string{"cl", "cl_u95", "cd", "alpha_deg", "q_pa", "n"} {
			require.InDelta(t, orig[i][k], again[i][k], 1e-9, "segment %d %s", i, k)
		}
	}

	corrected := strings.NewReplacer(
		"poly = [-12.5, 0.0025]", "poly = [-12.75, 0.00255]",
		"poly = [-9.8, 0.00251]", "poly = [-9.996, 0.0025602]").Replace(string(demoRigTOML))
	require.NotEqual(t, string(demoRigTOML), corrected, "the demo rig's normal-force calibrations changed")
	rigFile := filepath.Join(t.TempDir(), "corrected.toml")
	require.NoError(t, os.WriteFile(rigFile, []byte(corrected), 0o644))
	code, out, errOut = runCLI(t, "reprocess", "--db", db, "--run", "1", "--rig", rigFile)
	require.Equal(t, 0, code, errOut)
	require.Equal(t, "3\n", out)
	fixed := exportRows(t, db, "3")
	require.Len(t, fixed, len(orig))
	for i := range orig {
		cl, cd := orig[i]["cl"].(float64), orig[i]["cd"].(float64)
		a := rig.Rad(orig[i]["alpha_deg"].(float64))
		want := cl + 0.02*(cl*math.Cos(a)*math.Cos(a)+cd*math.Sin(a)*math.Cos(a))
		require.InDelta(t, want, fixed[i]["cl"].(float64), 1e-9, "segment %d", i)
	}
	store, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer store.Close()
	r2, err := store.Run(2)
	require.NoError(t, err)
	require.Equal(t, storage.StatusComplete, r2.Status)
	require.Contains(t, r2.Note, "reprocessed from run 1")
	r3, err := store.Run(3)
	require.NoError(t, err)
	require.Contains(t, r3.Note, "with rig file")
	require.Equal(t, corrected, r3.RigTOML)
}

// Ensure reprocess refuses bad usage with exit status 2.
func TestReprocess_BadUsage(t *testing.T) {
	db := filepath.Join(t.TempDir(), "none.db")
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"no run", []string{"--db", db}, "--run is required"},
		{"no store", []string{"--db", db, "--run", "1"}, "store " + db},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, errOut := runCLI(t, append([]string{"reprocess"}, c.args...)...)
			if code != 2 || !strings.Contains(errOut, c.want) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", code, errOut, c.want)
			}
		})
	}
}
