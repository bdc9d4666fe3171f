//go:build linux

package storage

import (
	"context"
	"errors"
	"math/rand/v2"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
)

// Ensure that a commit that fails half-way through writing its pages (a
// real EFBIG from a file-size limit set on this process, past bbolt's
// high-water mark) leaves bbolt usable: the Writer holds the data, and when
// the limit is lifted its retry stores every block, the file passes bbolt's
// own consistency check, and the counts agree. This is the real-file twin
// of TestWriter_RetriesUntilSpaceReturns (Go ignores SIGXFSZ, so the write
// just fails).
func TestWriter_RecoversAfterRealWriteFailure(t *testing.T) {
	path := filepath.Join(t.TempDir(), "efbig.db")
	s, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	id, err := s.CreateRun(Run{Rig: "efbig", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	var hw int64
	if err := s.db.View(func(tx *bolt.Tx) error { hw = tx.Size(); return nil }); err != nil {
		t.Fatal(err)
	}
	var old syscall.Rlimit
	if err := syscall.Getrlimit(syscall.RLIMIT_FSIZE, &old); err != nil {
		t.Fatal(err)
	}
	restore := func() {
		if err := syscall.Setrlimit(syscall.RLIMIT_FSIZE, &old); err != nil {
			t.Fatal(err)
		}
	}
	t.Cleanup(restore)
	// 64 KiB past the pages in use: the first commits fit, a later one
	// fails while writing its pages.
	limit := &syscall.Rlimit{Cur: uint64(hw) + 64<<10, Max: old.Max}
	if err := syscall.Setrlimit(syscall.RLIMIT_FSIZE, limit); err != nil {
		t.Skipf("cannot set a file-size limit here: %v", err)
	}

	w := s.NewWriter(id, WriterConfig{Interval: 5 * time.Millisecond, Retry: 10 * time.Millisecond,
		FreeBytes: func() (uint64, error) { return 1 << 40, nil }})
	in := make(chan Item)
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()
	rng := rand.New(rand.NewPCG(16, 3))
	const n = 200 // 200 blocks of 4 × 100 random readings: 640 kB, ten times the room
	for i := range n {
		b := &acquire.Block{Source: "bal", Seq: uint64(i), T0Us: int64(i) * 100, DtUs: 1, Received: time.Unix(1773478800, int64(i))}
		for _, ch := range []string{"a", "b", "c", "d"} {
			raw := make([]float64, 100)
			for k := range raw {
				raw[k] = rng.Float64()
			}
			b.Series = append(b.Series, acquire.Series{Channel: ch, Raw: raw})
		}
		in <- Item{Block: b}
		time.Sleep(time.Millisecond)
	}
	deadline := time.Now().Add(10 * time.Second)
	for !w.State().Failing {
		if time.Now().After(deadline) {
			t.Fatal("no commit failed past the file-size limit")
		}
		time.Sleep(time.Millisecond)
	}
	if st := w.State(); !errors.Is(st.Err, syscall.EFBIG) {
		t.Fatalf("commit error %v, want EFBIG", st.Err)
	}
	restore() // space returns
	for w.State().Failing {
		if time.Now().After(deadline) {
			t.Fatal("the writer did not recover after the limit was lifted")
		}
		time.Sleep(time.Millisecond)
	}
	close(in)
	if err := <-errc; err != nil {
		t.Fatalf("Run = %v, want every block stored after the retry", err)
	}
	if b, _ := w.Committed(); b != n {
		t.Errorf("committed %d blocks, want %d", b, n)
	}
	r, err := s.Run(id)
	if err != nil {
		t.Fatal(err)
	}
	var samples int
	seqs := map[uint64]bool{} // a block larger than StoredPartBytes is stored in parts
	if err := s.RawBlocks(id, func(b acquire.Block) error { seqs[b.Seq] = true; samples += b.Len(); return nil }); err != nil {
		t.Fatal(err)
	}
	if blocks := len(seqs); blocks != n || uint64(samples) != r.Samples || r.Samples != 100*n {
		t.Errorf("stored %d blocks of %d samples, run says %d; want %d blocks", len(seqs), samples, r.Samples, n)
	}
	if err := s.db.View(func(tx *bolt.Tx) error {
		var first error
		for err := range tx.Check() { // drain: the checker runs until it is done
			if first == nil {
				first = err
			}
		}
		return first
	}); err != nil {
		t.Errorf("bbolt check after the failed commit: %v", err)
	}
}
