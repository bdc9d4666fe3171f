package main

import (
	"context"
	"encoding/binary"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
	bolt "go.etcd.io/bbolt"

	"liftyard/acquire/sim"
)

// date1970 matches a 1970 date as any output writes one (RFC 3339, or a
// date with the month's name).
var date1970 = regexp.MustCompile(`1970-\d\d-\d\d|\b\d{1,2} [A-Z][a-z]+ 1970\b|\b[A-Z][a-z]+ \d{1,2},? 1970\b`)

// no1970 fails when any output holds a 1970 date (a device clock shown as
// if it were Unix time).
func no1970(t *testing.T, what, out string) {
	t.Helper()
	require.NotEmpty(t, out, what)
	if loc := date1970.FindStringIndex(out); loc != nil {
		i := loc[0]
		t.Errorf("%s shows 1970: …%s…", what, out[max(0, i-80):min(len(out), i+80)])
	}
}

// get fetches url and returns its body.
func get(t *testing.T, url string) string {
	t.Helper()
	resp, err := http.Get(url)
	require.NoError(t, err)
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	require.NoError(t, err)
	require.Equal(t, http.StatusOK, resp.StatusCode, "%s: %s", url, b)
	return string(b)
}

// everyOutput gathers what a user sees of run 1 of db: the CLI listings and
// exports, a mark's listing, the report, and the dashboard's pages and API.
func everyOutput(t *testing.T, db string) map[string]string {
	t.Helper()
	out := map[string]string{}
	for _, args := range [][]string{
		{"runs", "--db", db},
		{"export", "--db", db, "--run", "1", "--format", "csv"},
		{"export", "--db", db, "--run", "1", "--format", "json"},
		{"export", "--db", db, "--run", "1", "--what", "values", "--format", "csv"},
		{"export", "--db", db, "--run", "1", "--what", "raw", "--format", "csv"},
		{"marks", "--db", db, "--run", "1", "--add", "1.0,2.0,first"},
		{"marks", "--db", db, "--run", "1", "--list"},
	} {
		code, stdout, stderr := runCLI(t, args...)
		require.Equal(t, 0, code, "%v: %s", args, stderr)
		key := args[0]
		if len(args) > 5 {
			key += " " + strings.Join(args[5:], " ")
		}
		out[key] = stdout + stderr
	}
	rep := filepath.Join(t.TempDir(), "report.html")
	code, _, stderr := runCLI(t, "report", "--db", db, "--run", "1", "--out", rep)
	require.Equal(t, 0, code, stderr)
	b, err := os.ReadFile(rep)
	require.NoError(t, err)
	out["report"] = string(b)
	url, stop := startServe(t, db)
	for _, p := range []string{"/runs", "/runs/1", "/api/v1/runs", "/api/v1/runs/1", "/api/v1/runs/1/segments", "/api/v1/runs/1/marks"} {
		out["GET "+p] = get(t, url+p)
	}
	require.NoError(t, stop())
	return out
}

// Ensure that a live run from a device whose clock counts from 0 (power-up)
// shows UTC wall time everywhere: segments, marks, exports, the report and
// the dashboard carry the time of day the run was made, never 1970
// (issue 13, "must show").
func TestWallClock_DeviceFromZero(t *testing.T) {
	db := filepath.Join(t.TempDir(), "demo.db")
	m := &Main{DBPath: db, Addr: "127.0.0.1:0"}
	ctx, cancel := context.WithTimeout(t.Context(), 6*time.Second)
	defer cancel()
	cfg := sim.Config{Seed: 11, StepsDeg: []float64{-2, 3}, Hold: 2200 * time.Millisecond, Move: 300 * time.Millisecond,
		Start: time.Unix(0, 0)} // the device clock starts at 0
	began := time.Now().UTC()
	_, err := runDemoSession(ctx, m, cfg)
	require.NoError(t, err)
	outs := everyOutput(t, db)
	for what, out := range outs {
		no1970(t, what, out)
	}
	// The segments are at the time of day the run was made.
	rows := exportRows(t, db, "1")
	require.NotEmpty(t, rows)
	for _, r := range rows {
		ts, err := time.Parse(time.RFC3339Nano, r["t_start"].(string))
		require.NoError(t, err)
		require.WithinDuration(t, began, ts, 2*time.Minute, "segment start")
	}
	// issue 13: a store written before marks were on the wall clock holds
	// them on the device clock (here 1970 + seconds): they still select the
	// same stretch, shown from the run's first sample and in UTC.
	code, listed, stderr := runCLI(t, "marks", "--db", db, "--run", "1", "--list")
	require.Equal(t, 0, code, stderr)
	bdb, err := bolt.Open(db, 0o600, &bolt.Options{Timeout: time.Second})
	require.NoError(t, err)
	require.NoError(t, bdb.Update(func(tx *bolt.Tx) error {
		key := binary.BigEndian.AppendUint64(nil, 1)
		return tx.Bucket([]byte("meta")).Bucket([]byte("marks")).Put(key,
			[]byte(`[{"start":"1970-01-01T00:00:01Z","end":"1970-01-01T00:00:02Z","label":"first"}]`))
	}))
	require.NoError(t, bdb.Close())
	code, legacy, stderr := runCLI(t, "marks", "--db", db, "--run", "1", "--list")
	require.Equal(t, 0, code, stderr)
	require.Equal(t, listed, legacy, "device-clock marks of an older store read as the same marks")
	require.Contains(t, legacy, "1.000")
	no1970(t, "legacy marks", legacy)

	// The raw export writes t_s on the aligned UTC timeline (docs/export.md):
	// the time of day the run was made, not the device's seconds from zero.
	raw := outs["export --what raw --format csv"]
	_, rest, _ := strings.Cut(raw, "\n")
	first, _, _ := strings.Cut(rest, ",")
	sec, err := strconv.ParseFloat(first, 64)
	require.NoError(t, err, "raw export: %.80s", raw)
	require.WithinDuration(t, began, time.UnixMicro(int64(sec*1e6)), 2*time.Minute, "raw export's first t_s: %.80s", raw)
}

// Ensure that a raw CSV with relative t_s imports at the wall time given by
// --start or by its own "# start" line, to the same segments as the same
// file on Unix time, and is refused (exit 2, saying what to add) with
// neither: no imported run is dated 1970 (issue 13).
func TestImport_RelativeTimes(t *testing.T) {
	abs, err := os.ReadFile(importCSV)
	require.NoError(t, err)
	// The committed file starts at 1773478800 s = 2026-03-14T09:00:00Z.
	const origin = 1773478800
	lines := strings.Split(strings.TrimSpace(string(abs)), "\n")
	rel := []string{lines[0]}
	for _, l := range lines[1:] {
		ts, rest, _ := strings.Cut(l, ",")
		whole, frac, _ := strings.Cut(ts, ".")
		w, err := strconv.ParseInt(whole, 10, 64)
		require.NoError(t, err)
		rel = append(rel, strconv.FormatInt(w-origin, 10)+"."+frac+","+rest)
	}
	dir := t.TempDir()
	relPath := filepath.Join(dir, "rel.csv")
	require.NoError(t, os.WriteFile(relPath, []byte(strings.Join(rel, "\n")+"\n"), 0o644))
	hdrPath := filepath.Join(dir, "hdr.csv")
	require.NoError(t, os.WriteFile(hdrPath, []byte("# start 2026-03-14T09:00:00Z\n"+strings.Join(rel, "\n")+"\n"), 0o644))

	// Neither: refused, no store made.
	none := filepath.Join(dir, "none.db")
	code, _, stderr := runCLI(t, "import", "--rig", towtankRig, "--db", none, relPath)
	require.Equal(t, 2, code, stderr)
	require.Contains(t, stderr, "relative time")
	require.Contains(t, stderr, "--start")
	_, err = os.Stat(none)
	require.True(t, os.IsNotExist(err))

	want := func(db string, args ...string) []map[string]any {
		code, _, stderr := runCLI(t, append([]string{"import", "--rig", towtankRig, "--db", db}, args...)...)
		require.Equal(t, 0, code, stderr)
		return exportRows(t, db, "1")
	}
	absRows := want(filepath.Join(dir, "abs.db"), importCSV)
	startDB := filepath.Join(dir, "start.db")
	for name, rows := range map[string][]map[string]any{
		"--start":        want(startDB, "--start", "2026-03-14T09:00:00Z", relPath),
		"# start header": want(filepath.Join(dir, "hdr.db"), hdrPath),
	} {
		require.Len(t, rows, len(absRows), name)
		for i := range rows {
			require.Equal(t, absRows[i]["t_start"], rows[i]["t_start"], "%s: segment %d", name, i)
			require.Equal(t, absRows[i]["t_end"], rows[i]["t_end"], "%s: segment %d", name, i)
			require.Equal(t, absRows[i]["cl"], rows[i]["cl"], "%s: segment %d", name, i)
		}
	}
	for what, out := range everyOutput(t, startDB) {
		no1970(t, what, out)
	}
	// A bad --start is a usage error.
	code, _, stderr = runCLI(t, "import", "--rig", towtankRig, "--db", filepath.Join(dir, "bad.db"), "--start", "9am", relPath)
	require.Equal(t, 2, code, stderr)
	require.Contains(t, stderr, "RFC 3339")
}
