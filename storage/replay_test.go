package storage_test

import (
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/storage"
)

// Ensure that a replay merges the sources by arrival time, as the blocks
// came in live, and keeps every block.
func TestReplayBlocks_ArrivalOrder(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{})
	in := w.NewQueue()
	t0 := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	// The balance's device clock is far ahead of the pitot node's: device
	// time order would put all pitot blocks first.
	var want []string
	for k := range 10 {
		for _, src := range []string{"pitotnode", "balance"} {
			b := testBlock(src, uint64(k), 4, "x")
			b.T0Us = int64(k) * 20_000
			if src == "balance" {
				b.T0Us += 5_000_000_000
			}
			b.Received = t0.Add(time.Duration(2*k) * 10 * time.Millisecond)
			if src == "balance" {
				b.Received = b.Received.Add(10 * time.Millisecond)
			}
			want = append(want, src)
			in <- storage.Item{Block: b}
		}
	}
	close(in)
	if err := w.Run(t.Context(), in); err != nil {
		t.Fatal(err)
	}
	var got []string
	var last time.Time
	if err := s.ReplayBlocks(id, func(b acquire.Block) error {
		if b.Received.Before(last) {
			t.Errorf("block of %s at %v before %v", b.Source, b.Received, last)
		}
		last = b.Received
		got = append(got, b.Source)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if len(got) != len(want) {
		t.Fatalf("replayed %d blocks, want %d", len(got), len(want))
	}
	for i := range got {
		if got[i] != want[i] {
			t.Fatalf("block %d from %s, want %s (order %v)", i, got[i], want[i], got)
		}
	}
}
