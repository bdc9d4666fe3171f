package main

import (
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/estimate"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// importedRun imports the committed raw record of the simulated tow-tank
// foil (five 2.5 s holds at -4°, 0°, 4°, 8°, 12° with 0.5 s moves, 100 Hz;
// an invented scenario) as run 1 of a new store and returns the store path.
func importedRun(t *testing.T) string {
	t.Helper()
	db := filepath.Join(t.TempDir(), "marks.db")
	code, _, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", db, importCSV)
	require.Equal(t, 0, code, errOut)
	return db
}

func storedSegments(t *testing.T, db string, id uint64) ([]estimate.Segment, storage.Run) {
	t.Helper()
	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	segs, err := st.Segments(id)
	require.NoError(t, err)
	run, err := st.Run(id)
	require.NoError(t, err)
	return segs, run
}

// Ensure that applying with no marks reproduces the stored segments (the
// replay path is the recorder's), that marks set in seconds from the first
// sample give one segment each — inside a hold within U95 of the truth,
// across a move with a much larger scatter — and that clearing them and
// applying again brings the automatic segments back.
func TestMarks_CLI(t *testing.T) {
	db := importedRun(t)
	orig, _ := storedSegments(t, db, 1)
	require.Len(t, orig, len(importStep))

	code, out, errOut := runCLI(t, "marks", "--db", db, "--run", "1", "--apply")
	require.Equal(t, 0, code, errOut)
	assert.Contains(t, out, "no marks")
	again, run := storedSegments(t, db, 1)
	require.Len(t, again, len(orig))
	for i := range orig {
		assert.InDelta(t, orig[i].CL.X, again[i].CL.X, 1e-9, "segment %d C_L", i)
		assert.InDelta(t, orig[i].CL.U, again[i].CL.U, 1e-9, "segment %d u(C_L)", i)
		assert.Equal(t, orig[i].N, again[i].N, "segment %d N", i)
	}
	assert.Contains(t, run.Note, process.UnmarkedNote)

	// The record starts 2026-03-14 09:00:00 UTC: 2.0 s and 09:00:04Z give
	// the same kind of time.
	code, _, errOut = runCLI(t, "marks", "--db", db, "--run", "1",
		"--add", "0.5,2.2,hold at -4°, checked on video", "--add", "2.0s,4.0", "--apply")
	require.Equal(t, 2, code, "a bad time is bad usage: %s", errOut)
	assert.Contains(t, errOut, `"2.0s" is neither seconds`)
	code, _, errOut = runCLI(t, "marks", "--db", db, "--run", "1", "--add", "0.5,2.2,a", "--add", "2.0,4.0")
	require.Equal(t, 2, code)
	assert.Contains(t, errOut, "overlaps mark 1")

	code, out, errOut = runCLI(t, "marks", "--db", db, "--run", "1",
		"--add", "0.5,2.2,hold at -4°, checked on video", "--add", "2026-03-14T09:00:02.4Z,2026-03-14T09:00:04Z", "--apply")
	require.Equal(t, 0, code, errOut)
	assert.Contains(t, errOut, "2 segments stored")
	assert.Contains(t, out, "hold at -4°, checked on video", "the label keeps its comma")
	assert.Contains(t, out, "2.400")
	marked, run := storedSegments(t, db, 1)
	require.Len(t, marked, 2)
	assert.Contains(t, run.Note, process.MarksNote)
	t0 := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	assert.True(t, marked[0].TStart.Equal(t0.Add(500*time.Millisecond)), "first sample %s", marked[0].TStart)
	assert.True(t, marked[0].TEnd.Equal(t0.Add(2200*time.Millisecond)), "last sample %s", marked[0].TEnd)
	assert.Equal(t, 171, marked[0].N, "0.5 s to 2.2 s at 100 Hz, both ends")
	truth, _ := towtankSim(t).Foil().Truth(rig.Rad(-4))
	assert.LessOrEqual(t, math.Abs(marked[0].CL.X-truth), marked[0].CL.U95(), "hold: C_L %.4f ± %.4f vs %.4f", marked[0].CL.X, marked[0].CL.U95(), truth)
	assert.Greater(t, marked[1].CL.U, 5*marked[0].CL.U, "across the move: u(C_L) %.5f vs %.5f in the hold", marked[1].CL.U, marked[0].CL.U)

	code, out, _ = runCLI(t, "marks", "--db", db, "--run", "latest", "--list")
	require.Equal(t, 0, code)
	assert.Equal(t, 3, strings.Count(out, "\n"), "header and two marks:\n%s", out)

	code, _, errOut = runCLI(t, "marks", "--db", db, "--run", "1", "--clear", "--apply")
	require.Equal(t, 0, code, errOut)
	back, _ := storedSegments(t, db, 1)
	require.Len(t, back, len(orig))
	assert.InDelta(t, orig[2].CL.X, back[2].CL.X, 1e-9)
}

// Ensure that bad usage of marks exits with status 2 and says what to fix.
func TestMarks_BadUsage(t *testing.T) {
	db := importedRun(t)
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"no run", []string{"--db", db}, "--run is required"},
		{"two actions", []string{"--db", db, "--run", "1", "--clear", "--list"}, "one of --add, --clear or --list"},
		{"no end", []string{"--db", db, "--run", "1", "--add", "3"}, "write START,END[,LABEL]"},
		{"reversed", []string{"--db", db, "--run", "1", "--add", "5,4"}, "mark 1 ends"},
		{"negative", []string{"--db", db, "--run", "1", "--add", "-1,4"}, "from 0 to 864000"},
		{"unknown run", []string{"--db", db, "--run", "9"}, "run 9"},
		{"no store", []string{"--db", filepath.Join(t.TempDir(), "none.db"), "--run", "1"}, "none.db"},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, errOut := runCLI(t, append([]string{"marks"}, c.args...)...)
			if code != 2 || !strings.Contains(errOut, c.want) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", code, errOut, c.want)
			}
		})
	}
	marks, _ := storedSegments(t, db, 1)
	require.Len(t, marks, len(importStep), "no bad command changed the run")
}
