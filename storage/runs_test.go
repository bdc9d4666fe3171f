package storage_test

import (
	"errors"
	"math"
	"strings"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/storage"
)

// Ensure that a run round-trips, rig file included, and that FinishRun sets
// the end, status and source health.
func TestRun_RoundTrip(t *testing.T) {
	s := MustOpenStore(t)
	in := storage.Run{
		Rig: "tow-fin-a", Kind: "foil", Fluid: "fresh_water",
		RigTOML: "name = \"tow-fin-a\"\nkind = \"foil\"\n", AreaM2: 0.12, AreaKind: "planform",
		Note: "α sweep −4…12°",
		ID:   99, Status: storage.StatusComplete, Samples: 7, // ignored by CreateRun
	}
	id, err := s.CreateRun(in)
	if err != nil {
		t.Fatal(err)
	}
	if id != 1 {
		t.Errorf("first id = %d, want 1", id)
	}
	got, err := s.Run(id)
	if err != nil {
		t.Fatal(err)
	}
	if got.ID != id || got.Status != storage.StatusRecording || got.Samples != 0 || got.Started.IsZero() {
		t.Errorf("new run = %+v", got)
	}
	if got.RigTOML != in.RigTOML || got.Note != in.Note || got.AreaM2 != 0.12 || got.AreaKind != "planform" {
		t.Errorf("fields lost: %+v", got)
	}

	ended := time.Date(2025, 6, 14, 10, 0, 0, 123456789, time.UTC)
	src := []acquire.HealthSnapshot{{Source: "balance", Frames: 10, Samples: 1000, Rejected: 2,
		RejectedBy: map[string]uint64{"crc": 2}, Gaps: 1}}
	if err := s.FinishRun(id, ended, storage.StatusComplete, src); err != nil {
		t.Fatal(err)
	}
	got, err = s.Run(id)
	if err != nil {
		t.Fatal(err)
	}
	if got.Status != storage.StatusComplete || !got.Ended.Equal(ended) || len(got.Sources) != 1 ||
		got.Sources[0].RejectedBy["crc"] != 2 || got.Sources[0].Gaps != 1 {
		t.Errorf("finished run = %+v", got)
	}
}

// Ensure that bad runs and bad finishes are refused with ErrBadRecord or
// ErrNotFound.
func TestRun_Errors(t *testing.T) {
	s := MustOpenStore(t)
	if _, err := s.CreateRun(storage.Run{AreaM2: math.NaN()}); !errors.Is(err, storage.ErrBadRecord) {
		t.Errorf("NaN area: %v", err)
	}
	id := mustCreateRun(t, s)
	if err := s.FinishRun(id, time.Now(), storage.StatusRecording, nil); !errors.Is(err, storage.ErrBadRecord) {
		t.Errorf("finish as recording: %v", err)
	}
	if err := s.FinishRun(42, time.Now(), storage.StatusComplete, nil); !errors.Is(err, storage.ErrNotFound) {
		t.Errorf("finish missing run: %v", err)
	}
	if _, err := s.Run(42); !errors.Is(err, storage.ErrNotFound) {
		t.Errorf("missing run: %v", err)
	}
	for name, f := range map[string]func() error{
		"RawBlocks": func() error { return s.RawBlocks(42, func(acquire.Block) error { return nil }) },
		"Segments":  func() error { _, err := s.Segments(42); return err },
		"Events":    func() error { _, err := s.Events(42); return err },
		"ExportRaw": func() error { return s.ExportRaw(&strings.Builder{}, 42) },
	} {
		if err := f(); !errors.Is(err, storage.ErrNotFound) {
			t.Errorf("%s of missing run: %v, want ErrNotFound", name, err)
		}
	}
}

// Ensure that Runs lists newest first and LatestRun finds the newest, or
// ErrNotFound in an empty store.
func TestRuns_NewestFirst(t *testing.T) {
	s := MustOpenStore(t)
	if _, err := s.LatestRun(); !errors.Is(err, storage.ErrNotFound) {
		t.Fatalf("LatestRun on empty store: %v", err)
	}
	if runs, err := s.Runs(); err != nil || len(runs) != 0 {
		t.Fatalf("Runs on empty store: %v, %v", runs, err)
	}
	for range 3 {
		mustCreateRun(t, s)
	}
	runs, err := s.Runs()
	if err != nil {
		t.Fatal(err)
	}
	var ids []uint64
	for _, r := range runs {
		ids = append(ids, r.ID)
	}
	if len(ids) != 3 || ids[0] != 3 || ids[1] != 2 || ids[2] != 1 {
		t.Errorf("Runs ids = %v, want [3 2 1]", ids)
	}
	if !runs[0].Started.After(runs[2].Started) {
		t.Errorf("newest run started %v, oldest %v", runs[0].Started, runs[2].Started)
	}
	latest, err := s.LatestRun()
	if err != nil || latest.ID != 3 {
		t.Errorf("LatestRun = %d, %v", latest.ID, err)
	}
}

// Ensure that ResolveRun takes ids and "latest" and names bad references.
func TestResolveRun(t *testing.T) {
	s := MustOpenStore(t)
	mustCreateRun(t, s)
	mustCreateRun(t, s)
	for _, tc := range []struct {
		ref     string
		want    uint64
		wantErr error
		msg     string
	}{
		{ref: "1", want: 1},
		{ref: "2", want: 2},
		{ref: "latest", want: 2},
		{ref: " latest ", want: 2},
		{ref: "3", wantErr: storage.ErrNotFound, msg: "run 3"},
		{ref: "0", wantErr: storage.ErrBadRef, msg: `run "0" is neither a run id`},
		{ref: "-1", wantErr: storage.ErrBadRef, msg: `run "-1"`},
		{ref: "last", wantErr: storage.ErrBadRef, msg: `run "last" is neither a run id (1, 2, ...) nor "latest"`},
		{ref: "", wantErr: storage.ErrBadRef, msg: `run ""`},
		{ref: "0x2", wantErr: storage.ErrBadRef, msg: `run "0x2"`},
	} {
		got, err := s.ResolveRun(tc.ref)
		if tc.wantErr == nil {
			if err != nil || got != tc.want {
				t.Errorf("ResolveRun(%q) = %d, %v; want %d", tc.ref, got, err, tc.want)
			}
			continue
		}
		if !errors.Is(err, tc.wantErr) || !strings.Contains(err.Error(), tc.msg) {
			t.Errorf("ResolveRun(%q) error = %v; want %v containing %q", tc.ref, err, tc.wantErr, tc.msg)
		}
	}
}

// Ensure that opening read-write marks runs left recording as interrupted,
// with the last block's time as their end and an event saying why, and
// that a read-only open changes nothing in the file but shows the run as
// interrupted: it could not open while a recorder held the file (issue 16).
func TestOpen_MarksInterrupted(t *testing.T) {
	path := t.TempDir() + "/s.db"
	s, err := storage.Open(path, storage.Options{Now: newTestClock().Now})
	if err != nil {
		t.Fatal(err)
	}
	id := mustCreateRun(t, s)
	done := mustCreateRun(t, s)
	if err := s.FinishRun(done, time.Now(), storage.StatusComplete, nil); err != nil {
		t.Fatal(err)
	}
	writeBlocks(t, s, id, testBlock("bal", 0, 10, "n"), testBlock("bal", 1, 10, "n"))
	s.Close() // the "crash": run 1 is never finished

	ro := MustOpenStoreAt(t, path, storage.Options{ReadOnly: true})
	if r, _ := ro.Run(id); r.Status != storage.StatusInterrupted {
		t.Errorf("read-only Run shows status %q, want interrupted", r.Status)
	}
	if r, _ := ro.LatestRun(); r.ID != done || r.Status != storage.StatusComplete {
		t.Errorf("read-only LatestRun = run %d %q", r.ID, r.Status)
	}
	if runs, _ := ro.Runs(); len(runs) != 2 || runs[1].Status != storage.StatusInterrupted {
		t.Errorf("read-only Runs = %+v", runs)
	}
	if evs, _ := ro.Events(id); len(evs) != 0 {
		t.Errorf("read-only open wrote events: %+v", evs)
	}
	ro.Close()

	s = MustOpenStoreAt(t, path, storage.Options{})
	r, err := s.Run(id)
	if err != nil {
		t.Fatal(err)
	}
	if r.Status != storage.StatusInterrupted {
		t.Errorf("status = %q, want interrupted", r.Status)
	}
	if want := testBlock("bal", 1, 10).Received; !r.Ended.Equal(want) {
		t.Errorf("ended = %v, want last block's %v", r.Ended, want)
	}
	if r.Samples != 20 {
		t.Errorf("samples = %d, want 20", r.Samples)
	}
	evs, err := s.Events(id)
	if err != nil || len(evs) != 1 || evs[0].Kind != storage.EventInterrupted {
		t.Errorf("events = %+v, %v", evs, err)
	}
	if r, _ := s.Run(done); r.Status != storage.StatusComplete {
		t.Errorf("complete run became %q", r.Status)
	}
}
