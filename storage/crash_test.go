package storage_test

import (
	"context"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/storage"
)

// crashChildEnv names the store the crash child writes to.
const crashChildEnv = "LIFTYARD_STORAGE_CRASH_CHILD"

// Geometry of the crash child's batches: the Writer commits only when
// crashBatch blocks are pending (its interval is an hour), so every commit
// holds exactly crashBatch blocks of crashSamples samples.
const (
	crashBatch   = 50
	crashSamples = 10
)

// TestCrashChild is not a test of its own: TestWriter_SurvivesKill runs it
// in a child process, where it records blocks through the real Writer as
// fast as it can until it is killed.
func TestCrashChild(t *testing.T) {
	path := os.Getenv(crashChildEnv)
	if path == "" {
		return // only meaningful as a child
	}
	s, err := storage.Open(path, storage.Options{Timeout: 5 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	id, err := s.CreateRun(storage.Run{Rig: "crash", Kind: "foil", AreaM2: 1})
	if err != nil {
		t.Fatal(err)
	}
	w := s.NewWriter(id, storage.WriterConfig{Interval: time.Hour, MaxBlocks: crashBatch, Queue: 256})
	in := w.NewQueue()
	go func() {
		for seq := uint64(0); ; seq++ {
			in <- storage.Item{Block: testBlock("balance", seq, crashSamples, "n_fore", "n_aft", "axial", "pitot")}
		}
	}()
	w.Run(context.Background(), in) // never returns: the parent kills us
}

// Ensure that a recorder killed with SIGKILL at a random moment leaves a
// file that passes bbolt's consistency check, holds whole batches only,
// with keys in order and no block missing before the last commit, and
// marks the run interrupted on the next open. Five kills on the same file.
func TestWriter_SurvivesKill(t *testing.T) {
	path := filepath.Join(t.TempDir(), "crash.db")
	rng := rand.New(rand.NewPCG(2025, 6))
	stored := map[uint64]int{} // run id → blocks found after its crash
	total := 0
	for kill := range 5 {
		cmd := exec.Command(os.Args[0], "-test.run=^TestCrashChild$")
		cmd.Env = append(os.Environ(), crashChildEnv+"="+path)
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		delay := time.Duration(100+rng.IntN(701)) * time.Millisecond
		time.Sleep(delay)
		if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		if err := cmd.Wait(); err == nil {
			t.Fatalf("kill %d: child exited cleanly before the kill", kill)
		}

		s, err := storage.Open(path, storage.Options{Timeout: 5 * time.Second})
		if err != nil {
			t.Fatalf("kill %d after %v: reopen: %v", kill, delay, err)
		}
		if err := s.Check(); err != nil {
			t.Fatalf("kill %d: %v", kill, err)
		}
		r, err := s.LatestRun()
		if err != nil {
			t.Fatalf("kill %d: %v", kill, err)
		}
		if r.Status != storage.StatusInterrupted {
			t.Errorf("kill %d: run %d status %q, want interrupted", kill, r.ID, r.Status)
		}
		n := 0
		var lastT0 int64
		err = s.RawBlocks(r.ID, func(b acquire.Block) error {
			if b.Seq != uint64(n) {
				t.Fatalf("kill %d: block %d has seq %d (a hole or reorder)", kill, n, b.Seq)
			}
			if n > 0 && b.T0Us <= lastT0 {
				t.Fatalf("kill %d: t0 %d after %d: keys not increasing", kill, b.T0Us, lastT0)
			}
			lastT0 = b.T0Us
			n++
			return nil
		})
		if err != nil {
			t.Fatalf("kill %d: %v", kill, err)
		}
		if n%crashBatch != 0 {
			t.Errorf("kill %d: %d blocks stored, not a whole number of %d-block batches", kill, n, crashBatch)
		}
		if r.Samples != uint64(n*crashSamples) {
			t.Errorf("kill %d: run record says %d samples, raw holds %d", kill, r.Samples, n*crashSamples)
		}
		// Earlier runs are untouched by later crashes.
		for id, want := range stored {
			got := 0
			if err := s.RawBlocks(id, func(acquire.Block) error { got++; return nil }); err != nil || got != want {
				t.Errorf("kill %d: run %d now holds %d blocks (%v), had %d", kill, id, got, err, want)
			}
		}
		stored[r.ID] = n
		total += n
		t.Logf("kill %d after %v: run %d kept %d blocks (%d batches)", kill, delay, r.ID, n, n/crashBatch)
		if err := s.Close(); err != nil {
			t.Fatal(err)
		}
	}
	if total == 0 {
		t.Fatal("no child committed anything before its kill; the test proved nothing")
	}
}
