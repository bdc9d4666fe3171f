package storage_test

import (
	"context"
	"errors"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"liftyard/storage"
)

// fault is a switchable commit failure: on, every commit fails with ENOSPC
// as on a full disk.
type fault struct{ on atomic.Bool }

func (f *fault) hook() error {
	if f.on.Load() {
		return syscall.ENOSPC
	}
	return nil
}

// notices records what a Writer said through OnNotice.
type notices struct {
	mu   sync.Mutex
	list []storage.Notice
}

func (n *notices) add(x storage.Notice) { n.mu.Lock(); n.list = append(n.list, x); n.mu.Unlock() }

func (n *notices) kinds() []string {
	n.mu.Lock()
	defer n.mu.Unlock()
	var ks []string
	for _, x := range n.list {
		ks = append(ks, x.Kind)
	}
	return ks
}

func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(2 * time.Millisecond)
	}
}

func eventKinds(t *testing.T, s *storage.Store, id uint64) []string {
	t.Helper()
	evs, err := s.Events(id)
	if err != nil {
		t.Fatal(err)
	}
	var ks []string
	for _, e := range evs {
		ks = append(ks, e.Kind)
	}
	return ks
}

// Ensure that a Writer whose commits fail for a while (a full disk that is
// then cleared) says so at once, keeps taking items without blocking the
// sender, and stores every one of them once commits work again.
func TestWriter_RetriesUntilSpaceReturns(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	var f fault
	var said notices
	w := s.NewWriter(id, storage.WriterConfig{Interval: 5 * time.Millisecond, Retry: 10 * time.Millisecond, OnNotice: said.add,
		FreeBytes: func() (uint64, error) { return 1 << 40, nil }})
	storage.SetFailHook(w, f.hook)
	in := make(chan storage.Item) // unbuffered: every send waits for Run to take it
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()

	send := func(from, to int) {
		for i := from; i < to; i++ {
			select {
			case in <- storage.Item{Block: testBlock("bal", uint64(i), 10, "n", "a")}:
			case <-time.After(5 * time.Second):
				t.Fatalf("the writer stopped taking items at block %d", i)
			}
		}
	}
	send(0, 100)
	waitFor(t, "the first commit", func() bool { b, _ := w.Committed(); return b == 100 })
	f.on.Store(true)
	send(100, 200)
	waitFor(t, "the failure", func() bool { return w.State().Failing })
	st := w.State()
	if !errors.Is(st.Err, syscall.ENOSPC) || st.Since.IsZero() {
		t.Errorf("state while failing: %+v", st)
	}
	if got := said.kinds(); len(got) != 1 || got[0] != storage.EventStoreFailed {
		t.Errorf("notices while failing = %v, want one %s", got, storage.EventStoreFailed)
	}
	if !strings.Contains(st.Warning(), "STORE FAILING") {
		t.Errorf("warning = %q", st.Warning())
	}
	send(200, 400) // more while failing: taken at once, held
	waitFor(t, "a few retries", func() bool { return w.State().FailedCommits >= 3 })
	if b, _ := w.Committed(); b != 100 {
		t.Fatalf("committed %d blocks while every commit failed", b)
	}
	f.on.Store(false) // space returns
	waitFor(t, "the recovery", func() bool { return !w.State().Failing })
	send(400, 450)
	close(in)
	if err := <-errc; err != nil {
		t.Fatalf("Run = %v, want nil: everything was stored after the retry", err)
	}
	if b, n := w.Committed(); b != 450 || n != 4500 {
		t.Errorf("committed %d blocks, %d samples; want 450, 4500", b, n)
	}
	if got := readBlocks(t, s, id); len(got) != 450 {
		t.Errorf("stored %d blocks, want 450", len(got))
	}
	if r, _ := s.Run(id); r.Samples != 4500 {
		t.Errorf("run samples = %d, want 4500", r.Samples)
	}
	st = w.State()
	if st.LostSamples != 0 || st.LostItems != 0 || st.Failing || st.FailedCommits < 3 {
		t.Errorf("final state %+v", st)
	}
	kinds := strings.Join(eventKinds(t, s, id), " ")
	if kinds != storage.EventStoreFailed+" "+storage.EventStoreRecovered {
		t.Errorf("events = %q, want the failure then the recovery", kinds)
	}
	if got := said.kinds(); len(got) != 2 || got[1] != storage.EventStoreRecovered {
		t.Errorf("notices = %v", got)
	}
}

// Ensure that a failing Writer holds at most MaxPendingBytes: past it the
// oldest raw blocks are given up and counted, the newest are stored when
// the store recovers, and Run says how much was lost.
func TestWriter_BoundsWhatItHolds(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	var f fault
	f.on.Store(true)
	var said notices
	const limit = 64 << 10
	w := s.NewWriter(id, storage.WriterConfig{Interval: time.Millisecond, Retry: 5 * time.Millisecond, MaxPendingBytes: limit,
		OnNotice: said.add, FreeBytes: func() (uint64, error) { return 1 << 40, nil }})
	storage.SetFailHook(w, f.hook)
	in := make(chan storage.Item)
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()
	const n = 300 // 300 blocks of 100 readings ≈ 270 kB held, > 64 KiB
	for i := range n {
		in <- storage.Item{Block: testBlock("bal", uint64(i), 100, "n")}
		if i == 0 {
			waitFor(t, "the failure", func() bool { return w.State().Failing })
		}
	}
	st := w.State()
	if st.PendingBytes > limit || st.LostBlocks == 0 {
		t.Errorf("holding %d bytes (limit %d), lost %d blocks", st.PendingBytes, limit, st.LostBlocks)
	}
	f.on.Store(false)
	waitFor(t, "the recovery", func() bool { return !w.State().Failing })
	close(in)
	err := <-errc
	if err == nil || !errors.Is(err, syscall.ENOSPC) || !strings.Contains(err.Error(), "could not be stored") {
		t.Fatalf("Run = %v, want the loss said and the commit error wrapped", err)
	}
	st = w.State()
	stored, samples := w.Committed()
	if stored+st.LostBlocks != n || samples+st.LostSamples != 100*n {
		t.Errorf("stored %d + lost %d blocks (%d + %d samples), want %d blocks in all", stored, st.LostBlocks, samples, st.LostSamples, n)
	}
	got := readBlocks(t, s, id)
	if len(got) != int(stored) || got[0].Seq != st.LostBlocks || got[len(got)-1].Seq != n-1 {
		t.Errorf("stored seqs %d..%d (%d blocks), want the newest %d..%d", got[0].Seq, got[len(got)-1].Seq, len(got), st.LostBlocks, n-1)
	}
	kinds := eventKinds(t, s, id)
	want := []string{storage.EventStoreFailed, storage.EventStoreLost, storage.EventStoreRecovered}
	if strings.Join(kinds, " ") != strings.Join(want, " ") {
		t.Errorf("events = %v, want %v", kinds, want)
	}
}

// Ensure that the free-space check warns at start when the disk is low,
// with the threshold in the message, and says so again when room returns.
func TestWriter_LowSpaceWarning(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	var free atomic.Uint64
	free.Store(100e6) // 100 MB, below LowSpaceBytes
	var said notices
	w := s.NewWriter(id, storage.WriterConfig{Interval: time.Millisecond, SpaceCheck: 5 * time.Millisecond, OnNotice: said.add,
		FreeBytes: func() (uint64, error) { return free.Load(), nil }})
	in := make(chan storage.Item)
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()
	waitFor(t, "the low-space notice", func() bool { return len(said.kinds()) == 1 })
	st := w.State()
	if !st.LowSpace || st.FreeBytes != 100e6 || st.LowSpaceThreshold < storage.LowSpaceBytes {
		t.Errorf("state = %+v", st)
	}
	if w := st.Warning(); !strings.Contains(w, "LOW DISK SPACE: 100.0 MB free") || !strings.Contains(w, "268.4 MB") {
		t.Errorf("warning = %q", w)
	}
	free.Store(50e9)
	waitFor(t, "the space-back notice", func() bool { return len(said.kinds()) == 2 })
	if w.State().LowSpace {
		t.Error("still low with 50 GB free")
	}
	close(in)
	if err := <-errc; err != nil {
		t.Fatal(err)
	}
	want := storage.EventLowSpace + " " + storage.EventSpaceOK
	if got := strings.Join(eventKinds(t, s, id), " "); got != want {
		t.Errorf("events = %q, want %q", got, want)
	}
}

// Ensure that FreeBytes reads the file system of a real directory.
func TestFreeBytes(t *testing.T) {
	n, err := storage.FreeBytes(t.TempDir())
	if err != nil || n == 0 {
		t.Fatalf("FreeBytes = %d, %v", n, err)
	}
}
