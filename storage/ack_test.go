package storage_test

import (
	"context"
	"sync/atomic"
	"testing"
	"time"

	"liftyard/storage"
)

// Ensure that a block's Ack is called only once the commit holding it is on
// disk (a read transaction at the moment of the Ack finds the block), that a
// block the store rejects is acknowledged too (it is counted), and that a
// failed commit acknowledges nothing: a broker keeps what the store lost.
func TestWriter_AckAfterCommit(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{Interval: time.Hour, MaxBlocks: 5})
	in := w.NewQueue()
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()

	var acked atomic.Int32
	stored := make(map[uint64]bool) // seq → found on disk at its Ack (the writer's goroutine only)
	onDisk := func(seq uint64) bool {
		for _, b := range readBlocks(t, s, id) {
			if b.Seq == seq {
				return true
			}
		}
		return false
	}
	for i := range 12 {
		b := testBlock("bal", uint64(i), 4, "n")
		b.Ack = func() { stored[b.Seq] = onDisk(b.Seq); acked.Add(1) }
		in <- storage.Item{Block: b}
	}
	bad := testBlock("", 99, 4, "n") // no source name: rejected at commit
	badAcked := make(chan bool, 1)
	bad.Ack = func() { badAcked <- true }
	in <- storage.Item{Block: bad}
	// Two commits at MaxBlocks have happened (10 blocks); the last 2 and
	// the bad one wait for the hour-long interval.
	deadline := time.Now().Add(5 * time.Second)
	for acked.Load() < 10 && time.Now().Before(deadline) {
		time.Sleep(5 * time.Millisecond)
	}
	time.Sleep(50 * time.Millisecond)
	if n := acked.Load(); n != 10 {
		t.Fatalf("%d blocks acknowledged before the third commit, want the 10 committed", n)
	}
	close(in)
	if err := <-errc; err != nil {
		t.Fatal(err)
	}
	if n := acked.Load(); n != 12 {
		t.Errorf("%d of 12 blocks acknowledged after the last commit", n)
	}
	for seq := range uint64(12) {
		if !stored[seq] {
			t.Errorf("block %d was acknowledged before it was on disk", seq)
		}
	}
	select {
	case <-badAcked:
	default:
		t.Error("a rejected (counted) block was never acknowledged: the broker would stop sending")
	}
	if w.Rejected() != 1 {
		t.Errorf("rejected = %d", w.Rejected())
	}

	// A commit that fails (the run does not exist) acknowledges nothing.
	w2 := s.NewWriter(id+100, storage.WriterConfig{})
	in2 := make(chan storage.Item, 1)
	lost := testBlock("bal", 0, 1, "n")
	lost.Ack = func() { t.Error("a block whose commit failed was acknowledged") }
	in2 <- storage.Item{Block: lost}
	close(in2)
	if err := w2.Run(context.Background(), in2); err == nil {
		t.Fatal("commit for a missing run succeeded")
	}
}

// Ensure that a block Offer drops to make room is acknowledged when it is
// counted, and that the queued ones are not.
func TestOffer_AcksDropped(t *testing.T) {
	ch := make(chan storage.Item, 2)
	var dropped storage.Drops
	acked := make([]bool, 5)
	for i := range 5 {
		b := testBlock("bal", uint64(i), 1, "n")
		b.Ack = func() { acked[i] = true }
		storage.Offer(ch, storage.Item{Block: b}, &dropped)
	}
	want := []bool{true, true, true, false, false}
	for i := range want {
		if acked[i] != want[i] {
			t.Errorf("block %d acknowledged = %v, want %v (dropped %d)", i, acked[i], want[i], dropped.Items.Load())
		}
	}
}

// Ensure that AckBatch blocks waiting for their acknowledgement are
// committed without waiting for the interval (a broker's in-flight window
// must not fill), while as many blocks without one still wait.
func TestWriter_AckBatchCommitsEarly(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{Interval: time.Hour})
	in := w.NewQueue()
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()
	for i := range storage.AckBatch - 1 {
		in <- storage.Item{Block: testBlock("bal", uint64(i), 2, "n")} // no Ack: the hour-long interval applies
	}
	time.Sleep(100 * time.Millisecond)
	if c := w.Commits(); c != 0 {
		t.Fatalf("%d commits before the interval without acknowledgements waiting", c)
	}
	var acked atomic.Int32
	for i := range storage.AckBatch {
		b := testBlock("bal", uint64(100+i), 2, "n")
		b.Ack = func() { acked.Add(1) }
		in <- storage.Item{Block: b}
	}
	deadline := time.Now().Add(5 * time.Second)
	for acked.Load() < int32(storage.AckBatch) && time.Now().Before(deadline) {
		time.Sleep(5 * time.Millisecond)
	}
	if n := acked.Load(); n != int32(storage.AckBatch) || w.Commits() != 1 {
		t.Errorf("%d of %d acknowledged after %d commits: the batch waited for the interval", n, storage.AckBatch, w.Commits())
	}
	close(in)
	if err := <-errc; err != nil {
		t.Fatal(err)
	}
}
