package storage_test

import (
	"context"
	"os"
	"path/filepath"
	"testing"

	"liftyard/storage"
)

// benchStore writes a store of about mb megabytes in one run of 3.3 kB
// blocks (4 channels × 100 samples, a typical MQTT block) and returns its
// path.
func benchStore(b *testing.B, mb int) string {
	b.Helper()
	path := filepath.Join(b.TempDir(), "big.db")
	s, err := storage.Open(path, storage.Options{})
	if err != nil {
		b.Fatal(err)
	}
	id := mustCreateRun(b, s)
	w := s.NewWriter(id, storage.WriterConfig{})
	in := w.NewQueue()
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()
	n := mb << 20 / 3300
	for i := range n {
		in <- storage.Item{Block: testBlock("bal", uint64(i), 100, "n_fore", "n_aft", "axial", "pitot")}
	}
	close(in)
	if err := <-errc; err != nil {
		b.Fatal(err)
	}
	if err := s.Close(); err != nil {
		b.Fatal(err)
	}
	return path
}

// BenchmarkOpenSurvey measures the two checks Open makes before a write,
// the structural walk (storage.Store.Survey) and bbolt's Check, on a store
// of about 100 MB of blocks (135 MB on disk).
func BenchmarkOpenSurvey(b *testing.B) {
	path := benchStore(b, 100)
	fi, _ := os.Stat(path)
	b.Logf("store %.0f MB", float64(fi.Size())/1e6)
	b.Run("open-readonly", func(b *testing.B) {
		for b.Loop() {
			s, err := storage.Open(path, storage.Options{ReadOnly: true})
			if err != nil {
				b.Fatal(err)
			}
			s.Close()
		}
	})
	s, err := storage.Open(path, storage.Options{ReadOnly: true})
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	b.Run("survey", func(b *testing.B) {
		for b.Loop() {
			if d, err := s.Survey(); err != nil || len(d) > 0 {
				b.Fatal(err, d)
			}
		}
	})
	b.Run("check", func(b *testing.B) {
		for b.Loop() {
			if err := s.Check(); err != nil {
				b.Fatal(err)
			}
		}
	})
}
