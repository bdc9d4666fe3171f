package storage_test

import (
	"errors"
	"path/filepath"
	"testing"
	"time"

	"liftyard/estimate"
	"liftyard/storage"
)

// Ensure that marks round-trip through the file (reopened, also read-only),
// are kept per run, replace earlier marks, clear with nil, and that bad
// marks or an unknown run are refused without writing.
func TestMarks_RoundTrip(t *testing.T) {
	path := filepath.Join(t.TempDir(), "marks.db")
	s, err := storage.Open(path, storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	a, b := mustCreateRun(t, s), mustCreateRun(t, s)
	t0 := time.Date(2025, 6, 14, 9, 31, 0, 123456000, time.UTC)
	marks := []estimate.Mark{
		{Start: t0.Add(12 * time.Second), End: t0.Add(15500 * time.Millisecond), Label: "carriage steady, 2 m/s"},
		{Start: t0.Add(20 * time.Second), End: t0.Add(24 * time.Second)},
	}
	if err := s.PutMarks(a, marks); err != nil {
		t.Fatal(err)
	}
	if got, err := s.Marks(b); err != nil || got == nil || len(got) != 0 {
		t.Errorf("other run: %v, %v; want an empty slice", got, err)
	}
	bad := []estimate.Mark{marks[1], marks[0]}
	if err := s.PutMarks(a, bad); !errors.Is(err, storage.ErrBadRecord) || !errors.Is(err, estimate.ErrMarks) {
		t.Errorf("out of order: %v", err)
	}
	if err := s.PutMarks(999, marks); !errors.Is(err, storage.ErrNotFound) {
		t.Errorf("unknown run: %v", err)
	}
	if _, err := s.Marks(999); !errors.Is(err, storage.ErrNotFound) {
		t.Errorf("unknown run: %v", err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}

	ro, err := storage.Open(path, storage.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	got, err := ro.Marks(a)
	ro.Close()
	if err != nil || len(got) != 2 {
		t.Fatalf("reopened: %v, %v", got, err)
	}
	for i := range marks {
		if !got[i].Start.Equal(marks[i].Start) || !got[i].End.Equal(marks[i].End) || got[i].Label != marks[i].Label {
			t.Errorf("mark %d: %+v, stored %+v", i, got[i], marks[i])
		}
	}

	s = MustOpenStoreAt(t, path, storage.Options{})
	if err := s.PutMarks(a, marks[:1]); err != nil {
		t.Fatal(err)
	}
	if got, _ := s.Marks(a); len(got) != 1 {
		t.Errorf("replaced: %d marks, want 1", len(got))
	}
	if err := s.PutMarks(a, nil); err != nil {
		t.Fatal(err)
	}
	if got, _ := s.Marks(a); len(got) != 0 {
		t.Errorf("cleared: %d marks", len(got))
	}
	// Marks do not disturb the run list or the run itself.
	if runs, err := s.Runs(); err != nil || len(runs) != 2 {
		t.Errorf("runs: %d, %v", len(runs), err)
	}
}

// Ensure that a read-only store refuses to store marks.
func TestMarks_ReadOnly(t *testing.T) {
	path := filepath.Join(t.TempDir(), "ro.db")
	s, err := storage.Open(path, storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	id := mustCreateRun(t, s)
	s.Close()
	ro := MustOpenStoreAt(t, path, storage.Options{ReadOnly: true})
	t0 := time.Date(2025, 6, 14, 9, 31, 0, 0, time.UTC)
	if err := ro.PutMarks(id, []estimate.Mark{{Start: t0, End: t0.Add(time.Second)}}); err == nil {
		t.Error("read-only store stored marks")
	}
}
