package storage_test

import (
	"path/filepath"
	"sync"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/storage"
)

// testClock is a deterministic clock: each call returns the next second
// after a fixed start (an invented date, used only in tests).
type testClock struct {
	mu sync.Mutex
	t  time.Time
}

func newTestClock() *testClock {
	return &testClock{t: time.Date(2025, 6, 14, 9, 30, 0, 0, time.UTC)}
}

func (c *testClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.t = c.t.Add(time.Second)
	return c.t
}

// MustOpenStore opens a new store in a temporary directory with a test
// clock, and closes it when the test ends.
func MustOpenStore(tb testing.TB) *storage.Store {
	tb.Helper()
	return MustOpenStoreAt(tb, filepath.Join(tb.TempDir(), "liftyard.db"), storage.Options{})
}

// MustOpenStoreAt opens the store at path; opts.Now defaults to a test clock.
func MustOpenStoreAt(tb testing.TB, path string, opts storage.Options) *storage.Store {
	tb.Helper()
	if opts.Now == nil {
		opts.Now = newTestClock().Now
	}
	s, err := storage.Open(path, opts)
	if err != nil {
		tb.Fatalf("open store: %v", err)
	}
	tb.Cleanup(func() {
		if err := s.Close(); err != nil {
			tb.Errorf("close store: %v", err)
		}
	})
	return s
}

// mustCreateRun creates a run of an invented tow-rig scenario.
func mustCreateRun(tb testing.TB, s *storage.Store) uint64 {
	tb.Helper()
	id, err := s.CreateRun(storage.Run{Rig: "tow-fin-a", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.12, AreaKind: "planform"})
	if err != nil {
		tb.Fatalf("create run: %v", err)
	}
	return id
}

// testBlock returns block seq of source src with n samples on channels chs
// at 1 kHz, readings seq*1000 + i + channel index/10.
func testBlock(src string, seq uint64, n int, chs ...string) *acquire.Block {
	b := &acquire.Block{
		Source:   src,
		Seq:      seq,
		T0Us:     int64(seq) * int64(n) * 1000,
		DtUs:     1000,
		Received: time.Date(2025, 6, 14, 9, 30, 0, 0, time.UTC).Add(time.Duration(seq) * time.Millisecond),
	}
	for c, ch := range chs {
		raw := make([]float64, n)
		for i := range raw {
			raw[i] = float64(seq)*1000 + float64(i) + float64(c)/10
		}
		b.Series = append(b.Series, acquire.Series{Channel: ch, Raw: raw})
	}
	return b
}
