package process_test

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

var (
	foilRig = filepath.Join("..", "testdata", "rigs", "foil-towtank.toml")
	roofRig = filepath.Join("..", "testdata", "rigs", "roof-yard.toml")
	// rawCSV is a raw record of the simulated tow-tank foil (an invented
	// scenario; cmd/liftyard's TestImportData_UpToDate makes it).
	rawCSV = filepath.Join("..", "testdata", "import", "foil-towtank-raw.csv")
)

func loadRig(t *testing.T, path string) (*rig.Rig, string) {
	t.Helper()
	text, err := os.ReadFile(path)
	require.NoError(t, err)
	r, err := rig.Parse(path, text)
	require.NoError(t, err)
	return r, string(text)
}

// Ensure that the one kind table picks the stage by rig kind: the roof gets
// the roof estimator, takes no flow-off zero and refuses user marks (also
// when a stored roof run is recomputed, before the store is read); a foil
// gets the force-balance estimator and its zero watch.
func TestNewStage_ByKind(t *testing.T) {
	roof, roofTOML := loadRig(t, roofRig)
	st, err := process.NewStage(roof, process.Options{})
	require.NoError(t, err)
	assert.IsType(t, &estimate.RoofEstimator{}, st)
	_, err = process.NewStage(roof, process.Options{Marks: []estimate.Mark{{Start: time.Unix(0, 0), End: time.Unix(30, 0)}}})
	assert.ErrorContains(t, err, "roof rig's segments are its fixed-length blocks")
	assert.False(t, process.MarksApply(roof))
	cal, err := calibrate.NewCalibrator(roof)
	require.NoError(t, err)
	p, err := process.New(roof, cal, process.Options{})
	require.NoError(t, err)
	_, err = p.Drift()
	assert.ErrorContains(t, err, `kind "roof" takes no flow-off zero`)
	_, _, err = process.Recompute(t.Context(), nil, storage.Run{ID: 3, Kind: "roof", RigTOML: roofTOML}, nil)
	assert.ErrorContains(t, err, "run 3 is a roof run", "refused before the (nil) store is read")

	foil, _ := loadRig(t, foilRig)
	st, err = process.NewStage(foil, process.Options{})
	require.NoError(t, err)
	assert.IsType(t, &estimate.Estimator{}, st)
	assert.True(t, process.MarksApply(foil))
	for _, k := range []rig.Kind{rig.KindFoil, rig.KindRotor, rig.KindBody, rig.KindRoof} {
		assert.True(t, process.HasKind(k), "kind %q has a processing stage", k)
	}
	assert.False(t, process.HasKind("kite"))
}

// Ensure that a missing design curve is refused as bad input (exit 2 in
// the command line) before any run is made, so nothing half-made is left.
func TestNewRecorder_BadDesignLeavesNoRun(t *testing.T) {
	foil, text := loadRig(t, foilRig)
	foil.Lift.Design = filepath.Join(t.TempDir(), "missing.csv")
	store := openStore(t)
	_, err := process.NewRecorder(store, process.RecorderConfig{Rig: foil, RigTOML: text})
	var ie *process.InputError
	require.ErrorAs(t, err, &ie)
	assert.ErrorContains(t, err, "[lift] design")
	runs, err := store.Runs()
	require.NoError(t, err)
	assert.Empty(t, runs)
}

func openStore(t *testing.T) *storage.Store {
	t.Helper()
	s, err := storage.Open(filepath.Join(t.TempDir(), "p.db"), storage.Options{})
	require.NoError(t, err)
	t.Cleanup(func() { s.Close() })
	return s
}

// recordFile imports the raw CSV as a run through the Recorder, as
// `liftyard import` does.
func recordFile(t *testing.T, store *storage.Store, r *rig.Rig, text string) (uint64, process.Finished) {
	t.Helper()
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: r, RigTOML: text, Offline: true,
		Now: func() time.Time { return time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC) }})
	require.NoError(t, err)
	src := &acquire.CSVFile{Path: rawCSV, Source: r.Sources[0].Name, BlockN: 10}
	segs, err := process.Replay(t.Context(), src, rec.Pipeline(), rec.Keep)
	require.NoError(t, err)
	require.NotEmpty(t, segs)
	fin, err := rec.Finish(t.Context(), nil, []acquire.HealthSnapshot{src.Health.Snapshot("file")})
	require.NoError(t, err)
	assert.Equal(t, storage.StatusComplete, fin.Status)
	assert.Equal(t, uint64(145), src.Health.Frames.Load(), "every block of the file was handed over once")
	return rec.RunID(), fin
}

// Ensure that the stored raw blocks of a run, replayed through a new
// pipeline, give exactly the segments the run stored: the live path, the
// store and the offline path are one pipeline.
func TestReplay_StoredRunGivesStoredSegments(t *testing.T) {
	r, text := loadRig(t, foilRig)
	store := openStore(t)
	id, _ := recordFile(t, store, r, text)
	stored, err := store.Segments(id)
	require.NoError(t, err)
	require.Len(t, stored, 5, "five holds in the record")

	run, err := store.Run(id)
	require.NoError(t, err)
	again, unused, err := process.Recompute(t.Context(), store, run, nil)
	require.NoError(t, err)
	assert.Empty(t, unused)
	require.Len(t, again, len(stored))
	for i := range stored {
		assert.InDelta(t, stored[i].CL.X, again[i].CL.X, 1e-12, "segment %d C_L", i)
		assert.InDelta(t, stored[i].CL.U, again[i].CL.U, 1e-12, "segment %d u(C_L)", i)
		assert.True(t, stored[i].TStart.Equal(again[i].TStart), "segment %d start", i)
		assert.Equal(t, stored[i].N, again[i].N, "segment %d samples", i)
	}
}

// Ensure that a replay stops when its context is done and says so.
func TestReplay_StopsOnCancel(t *testing.T) {
	r, _ := loadRig(t, foilRig)
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	p, err := process.New(r, cal, process.Options{})
	require.NoError(t, err)
	ctx, cancel := context.WithCancel(t.Context())
	n := 0
	_, err = process.Replay(ctx, &acquire.CSVFile{Path: rawCSV, Source: "carriage", BlockN: 10}, p, func(b *acquire.Block, _ process.Step) error {
		if n++; n == 3 {
			cancel()
		}
		return nil
	})
	assert.ErrorIs(t, err, context.Canceled)
	assert.Equal(t, 3, n, "no block after the cancel")
}

// Ensure that user marks recompute a stored run: one segment per mark,
// and a mark holding too few samples is reported by its number.
func TestApplyMarks_OneSegmentPerMark(t *testing.T) {
	r, text := loadRig(t, foilRig)
	store := openStore(t)
	id, _ := recordFile(t, store, r, text)
	t0, err := process.RunStart(store, id)
	require.NoError(t, err)
	marks := []estimate.Mark{
		{Start: t0.Add(500 * time.Millisecond), End: t0.Add(2 * time.Second)},
		{Start: t0.Add(3500 * time.Millisecond), End: t0.Add(3500*time.Millisecond + time.Millisecond)}, // holds at most one sample
		{Start: t0.Add(6 * time.Second), End: t0.Add(8 * time.Second)},
	}
	require.NoError(t, store.PutMarks(id, marks))
	res, err := process.ApplyMarks(t.Context(), store, id)
	require.NoError(t, err)
	assert.Equal(t, 2, res.Segments)
	assert.Equal(t, []int{2}, res.Unused)
	assert.Contains(t, res.Note, process.MarksNote+" (3 marks)")
	segs, err := store.Segments(id)
	require.NoError(t, err)
	require.Len(t, segs, 2)
	assert.False(t, segs[0].TStart.Before(marks[0].Start))
	assert.False(t, segs[1].TEnd.After(marks[2].End))
}

// Ensure that a store that stops taking data (here its file is closed under
// the recorder, as a broken card would) makes the recording fail loudly:
// nothing blocks forever, and Finish says what happened (issue 9 review; a
// full disk is the same path).
func TestRecorder_StoreFailureIsLoud(t *testing.T) {
	r, text := loadRig(t, foilRig)
	store, err := storage.Open(filepath.Join(t.TempDir(), "broken.db"), storage.Options{})
	require.NoError(t, err)
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: r, RigTOML: text, Offline: true})
	require.NoError(t, err)
	src := &acquire.CSVFile{Path: rawCSV, Source: r.Sources[0].Name, BlockN: 10}
	n := 0
	done := make(chan error, 1)
	go func() {
		_, err := process.Replay(t.Context(), src, rec.Pipeline(), func(b *acquire.Block, st process.Step) error {
			if n++; n == 20 {
				assert.NoError(t, store.Close())
			}
			if err := rec.Keep(b, st); err != nil {
				return err
			}
			if n > 20 {
				// Give the writer time to hit the closed file before the
				// file runs out.
				select {
				case <-rec.StoreChanged():
				case <-time.After(20 * time.Millisecond):
				}
			}
			return nil
		})
		_, ferr := rec.Finish(t.Context(), err, nil)
		done <- errors.Join(err, ferr)
	}()
	select {
	case err := <-done:
		require.Error(t, err)
		assert.ErrorContains(t, err, "store is not taking data")
		assert.ErrorContains(t, err, "could not be stored")
		acc := rec.Accounting()
		assert.Equal(t, acc.Received, acc.Stored+acc.Rejected+acc.Dropped+acc.Lost, "%s", acc)
		assert.Positive(t, acc.Lost, "%s", acc)
		t.Log(err)
	case <-time.After(30 * time.Second):
		t.Fatal("the recorder hung on a failed store")
	}
}

// Ensure that LoadDesign gives the thin-airfoil design the rig file's
// [lift] design_alpha_zero_deg (and 0 without it, as before).
func TestLoadDesign_ThinAirfoilAlphaZero(t *testing.T) {
	r, _ := loadRig(t, foilRig)
	r.Lift.Design = rig.DesignThinAirfoil
	d, err := process.LoadDesign(r)
	require.NoError(t, err)
	require.Equal(t, 0.0, d.(estimate.ThinAirfoil).AlphaZeroRad)
	r.Lift.DesignAlphaZeroRad = rig.Rad(-2.077)
	d, err = process.LoadDesign(r)
	require.NoError(t, err)
	cl, _, ok := d.At(rig.Rad(-2.077))
	require.True(t, ok)
	assert.InDelta(t, 0, cl.X, 1e-15, "C_L at the zero-lift angle")
}

// Ensure that a silent source gives one warning that names it, not also the
// stage's older "no new blocks" one (issue 13: two warnings said the same).
func TestRecorder_StaleWarnsOnce(t *testing.T) {
	r, text := loadRig(t, foilRig)
	store := openStore(t)
	now := time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: r, RigTOML: text, Offline: true,
		Now: func() time.Time { return now }})
	require.NoError(t, err)
	n := 0
	require.NoError(t, (&acquire.CSVFile{Path: rawCSV, Source: r.Sources[0].Name, BlockN: 10}).Replay(t.Context(), func(b acquire.Block) error {
		if n++; n > 60 {
			return nil
		}
		b.Received = now
		rec.Block(b)
		now = now.Add(100 * time.Millisecond)
		return nil
	}))
	now = now.Add(20 * time.Second) // the source falls silent
	l, ok := rec.Live()
	require.True(t, ok)
	assert.True(t, l.Stale)
	var named, idle int
	for _, w := range l.Warnings {
		if strings.Contains(w, r.Sources[0].Name) {
			named++
		}
		if strings.HasPrefix(w, estimate.IdleWarningPrefix) {
			idle++
		}
	}
	assert.Equal(t, 1, named, "warnings: %q", l.Warnings)
	assert.Zero(t, idle, "warnings: %q", l.Warnings)
	_, err = rec.Finish(t.Context(), nil, nil)
	require.NoError(t, err)
}

// Ensure that a live recording whose store fails goes on and says so: the
// live estimate's first warning names the failure, the "store" health line
// counts what was lost, and Finish returns an error whose accounting
// balances (issue 16).
func TestRecorder_LiveStoreFailureWarnsAndCounts(t *testing.T) {
	r, text := loadRig(t, foilRig)
	store, err := storage.Open(filepath.Join(t.TempDir(), "broken.db"), storage.Options{})
	require.NoError(t, err)
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: r, RigTOML: text})
	require.NoError(t, err)
	var blocks []acquire.Block
	require.NoError(t, (&acquire.CSVFile{Path: rawCSV, Source: r.Sources[0].Name, BlockN: 10}).Replay(t.Context(), func(b acquire.Block) error {
		blocks = append(blocks, b)
		return nil
	}))
	require.Greater(t, len(blocks), 60)
	for _, b := range blocks[:30] {
		b.Received = time.Now()
		rec.Block(b)
	}
	require.NoError(t, store.Close()) // every commit fails from here
	for i, b := range blocks[30:] {
		b.Received = time.Now()
		rec.Block(b)
		if i == 0 {
			select {
			case <-rec.StoreChanged():
			case <-time.After(10 * time.Second):
				t.Fatal("no word from the store within 10 s of its failure")
			}
		}
	}
	require.True(t, rec.StoreState().Failing)
	l, ok := rec.Live()
	require.True(t, ok)
	require.NotEmpty(t, l.Warnings)
	assert.True(t, strings.HasPrefix(l.Warnings[0], "STORE FAILING"), "warnings: %q", l.Warnings)
	_, err = rec.Finish(t.Context(), nil, nil)
	require.Error(t, err)
	acc := rec.Accounting()
	assert.ErrorContains(t, err, acc.String())
	assert.Equal(t, acc.Received, acc.Stored+acc.Rejected+acc.Dropped+acc.Lost, "%s", acc)
	assert.Positive(t, acc.Lost)
	h := rec.StoreHealth()
	assert.Equal(t, acc.Dropped+acc.Lost, h.SamplesDropped)
	assert.Equal(t, acc.Stored, h.Samples)
}
