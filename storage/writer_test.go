package storage_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"testing/synctest"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/estimate"
	"liftyard/storage"
)

// Ensure that 1000 blocks fed fast are committed in a few transactions,
// not one each, and that closing the channel commits the last batch.
func TestWriter_Batches(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{Interval: time.Hour, MaxBlocks: 300})
	in := w.NewQueue()
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()
	for i := range 1000 {
		in <- storage.Item{Block: testBlock("bal", uint64(i), 10, "n", "a")}
	}
	close(in)
	if err := <-errc; err != nil {
		t.Fatal(err)
	}
	// 3 commits at MaxBlocks (900 blocks) and the last 100 on close.
	if c := w.Commits(); c != 4 {
		t.Errorf("commits = %d, want 4", c)
	}
	if b, n := w.Committed(); b != 1000 || n != 10000 {
		t.Errorf("committed %d blocks, %d samples", b, n)
	}
	if got := readBlocks(t, s, id); len(got) != 1000 {
		t.Errorf("stored %d blocks", len(got))
	}
	if r, _ := s.Run(id); r.Samples != 10000 {
		t.Errorf("run samples = %d", r.Samples)
	}
	if w.LastCommit() <= 0 || w.LastCommitted().IsZero() {
		t.Errorf("last commit %v at %v", w.LastCommit(), w.LastCommitted())
	}
}

// Ensure that cancelling ctx loses nothing already handed to the Writer:
// what is queued is drained and committed, and Run returns nil.
func TestWriter_CancelDrainsQueue(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{Interval: time.Hour, Queue: 600})
	in := w.NewQueue()
	for i := range 500 {
		in <- storage.Item{Block: testBlock("bal", uint64(i), 10, "n")}
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel() // cancelled before Run even looks: the queue is all there is
	if err := w.Run(ctx, in); err != nil {
		t.Fatal(err)
	}
	if b, _ := w.Committed(); b != 500 {
		t.Errorf("committed %d of 500 queued blocks", b)
	}
	if got := readBlocks(t, s, id); len(got) != 500 {
		t.Errorf("stored %d blocks", len(got))
	}
}

// Ensure that Run may be called only once.
func TestWriter_RunTwice(t *testing.T) {
	s := MustOpenStore(t)
	w := s.NewWriter(mustCreateRun(t, s), storage.WriterConfig{})
	in := make(chan storage.Item)
	close(in)
	if err := w.Run(context.Background(), in); err != nil {
		t.Fatal(err)
	}
	if err := w.Run(context.Background(), in); err == nil {
		t.Error("second Run returned nil")
	}
}

// Ensure that a Writer for a run that does not exist fails with
// ErrNotFound at its first commit.
func TestWriter_MissingRun(t *testing.T) {
	s := MustOpenStore(t)
	w := s.NewWriter(7, storage.WriterConfig{})
	in := make(chan storage.Item, 1)
	in <- storage.Item{Block: testBlock("bal", 0, 1, "n")}
	close(in)
	if err := w.Run(context.Background(), in); err == nil {
		t.Fatal("Run for a missing run returned nil")
	}
}

// Ensure that a batch is committed Interval after its first item, not
// before, and that an idle Writer commits nothing (fake clock).
func TestWriter_Interval(t *testing.T) {
	s := MustOpenStore(t) // the file is opened outside the bubble
	id := mustCreateRun(t, s)
	synctest.Test(t, func(t *testing.T) {
		w := s.NewWriter(id, storage.WriterConfig{Interval: 200 * time.Millisecond})
		in := w.NewQueue()
		var wg sync.WaitGroup
		wg.Go(func() {
			if err := w.Run(t.Context(), in); err != nil {
				t.Error(err)
			}
		})
		time.Sleep(time.Second)
		synctest.Wait()
		if c := w.Commits(); c != 0 {
			t.Fatalf("idle writer committed %d times", c)
		}
		for i := range 3 {
			in <- storage.Item{Block: testBlock("bal", uint64(i), 10, "n")}
			time.Sleep(50 * time.Millisecond) // items at 0, 50, 100 ms
		}
		time.Sleep(49 * time.Millisecond) // 199 ms after the first item
		synctest.Wait()
		if c := w.Commits(); c != 0 {
			t.Fatalf("committed %d times before the interval", c)
		}
		time.Sleep(time.Millisecond)
		synctest.Wait()
		if c := w.Commits(); c != 1 {
			t.Fatalf("commits = %d at the interval, want 1", c)
		}
		if b, _ := w.Committed(); b != 3 {
			t.Fatalf("committed %d blocks, want 3", b)
		}
		// The next item starts a new interval.
		in <- storage.Item{Block: testBlock("bal", 3, 10, "n")}
		time.Sleep(199 * time.Millisecond)
		synctest.Wait()
		if c := w.Commits(); c != 1 {
			t.Fatalf("commits = %d, want still 1", c)
		}
		time.Sleep(time.Millisecond)
		synctest.Wait()
		if c := w.Commits(); c != 2 {
			t.Fatalf("commits = %d, want 2", c)
		}
		close(in)
		wg.Wait()
	})
}

// Ensure that Offer never blocks, drops the oldest item when the queue is
// full, and counts every drop.
func TestOffer_DropsOldest(t *testing.T) {
	ch := make(chan storage.Item, 3)
	var dropped storage.Drops
	for i := range 5 {
		if !storage.Offer(ch, storage.Item{Block: testBlock("bal", uint64(i), 1, "n")}, &dropped) {
			t.Fatalf("Offer %d refused with no competing producer", i)
		}
	}
	if d, n := dropped.Items.Load(), dropped.Samples.Load(); d != 2 || n != 2 {
		t.Errorf("dropped %d items of %d samples, want 2 blocks of 1", d, n)
	}
	var seqs []uint64
	for len(ch) > 0 {
		seqs = append(seqs, (<-ch).Block.Seq)
	}
	if len(seqs) != 3 || seqs[0] != 2 || seqs[1] != 3 || seqs[2] != 4 {
		t.Errorf("queue holds seqs %v, want the newest [2 3 4]", seqs)
	}
	// A nil counter is allowed.
	if !storage.Offer(ch, storage.Item{Block: testBlock("bal", 9, 1, "n")}, nil) {
		t.Error("Offer with nil counter failed")
	}
}

// Ensure that a full queue gives up raw blocks, never results: a segment at
// the head of the queue survives any number of offers.
func TestOffer_NeverDropsResults(t *testing.T) {
	ch := make(chan storage.Item, 3)
	var dropped storage.Drops
	seg := &estimate.Segment{Index: 7}
	ch <- storage.Item{Segment: seg}
	for i := range 10 {
		storage.Offer(ch, storage.Item{Block: testBlock("bal", uint64(i), 1, "n")}, &dropped)
	}
	found := false
	for len(ch) > 0 {
		if it := <-ch; it.Segment == seg {
			found = true
		}
	}
	if !found {
		t.Fatal("the segment result was dropped from a full queue")
	}
	if d := dropped.Items.Load(); d != 8 {
		t.Errorf("dropped = %d, want 8 blocks", d)
	}
}

// Ensure that with many producers racing on a full queue, every item is
// either received or counted as dropped: none vanishes uncounted.
func TestOffer_ConcurrentAccounting(t *testing.T) {
	ch := make(chan storage.Item, 8)
	var dropped storage.Drops
	var received atomic.Uint64
	done := make(chan struct{})
	go func() {
		defer close(done)
		for range ch {
			received.Add(1)
		}
	}()
	var wg sync.WaitGroup
	const producers, each = 8, 2000
	for range producers {
		wg.Go(func() {
			for range each {
				storage.Offer(ch, storage.Item{}, &dropped)
			}
		})
	}
	wg.Wait()
	close(ch)
	<-done
	if got := received.Load() + dropped.Items.Load(); got != producers*each {
		t.Errorf("received %d + dropped %d = %d, want %d", received.Load(), dropped.Items.Load(), got, producers*each)
	}
}

// Ensure that a block whose encoding is larger than StoredPartBytes is
// stored in parts that give every reading back in order, each a block with
// the block's seq and period, its own first-sample time and the block's
// device-to-receive offset; that a block sent again adds nothing; and that
// the writer counts blocks, not parts.
func TestWriter_StoresLargeBlocksInParts(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{})
	in := w.NewQueue()
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background(), in) }()
	rng := rand.New(rand.NewPCG(7, 64))
	mk := func(seq uint64) *acquire.Block {
		b := &acquire.Block{Source: "scanner", Seq: seq, T0Us: int64(seq) * 1_000_000, DtUs: 10_000,
			Received: time.Date(2026, 12, 2, 9, 0, int(seq)+1, 250_000_000, time.UTC)}
		for c := range 64 {
			raw := make([]float64, 100)
			for i := range raw {
				raw[i] = math.Round(100*(-300+7.5*float64(c)+15*rng.NormFloat64())) / 100
			}
			b.Series = append(b.Series, acquire.Series{Channel: fmt.Sprintf("tap%02d", c+1), Raw: raw})
		}
		return b
	}
	sent := []*acquire.Block{mk(0), mk(1), mk(2)}
	for _, b := range sent {
		in <- storage.Item{Block: b}
	}
	again := *sent[1] // delivered twice (a broker's redelivery)
	in <- storage.Item{Block: &again}
	close(in)
	if err := <-errc; err != nil {
		t.Fatal(err)
	}
	if blocks, samples := w.Committed(); blocks != 4 || samples != 300 {
		t.Errorf("committed %d blocks, %d samples; want 4 (one sent twice), 300 sample times", blocks, samples)
	}
	r, err := s.Run(id)
	require.NoError(t, err)
	assert.EqualValues(t, 300, r.Samples, "the run's sample times (the block sent twice counted once)")

	var parts []acquire.Block
	require.NoError(t, s.RawBlocks(id, func(b acquire.Block) error { parts = append(parts, b); return nil }))
	require.Greater(t, len(parts), len(sent), "64 × 100 readings (about 14 kB) stored whole")
	next := 0 // sample index into sent, block by block
	for _, p := range parts {
		blk := sent[next/100]
		from := next % 100
		require.Equal(t, blk.Seq, p.Seq)
		require.Equal(t, blk.DtUs, p.DtUs)
		require.Equal(t, blk.T0Us+int64(from)*blk.DtUs, p.T0Us, "part of seq %d from sample %d", blk.Seq, from)
		offset := func(b *acquire.Block) time.Duration {
			return b.Received.Sub(time.UnixMicro(b.T0Us + int64(b.Len()-1)*b.DtUs))
		}
		require.Equal(t, offset(blk), offset(&p), "receive time less device time of the last sample")
		require.Len(t, p.Series, 64)
		for c, ser := range p.Series {
			require.Equal(t, blk.Series[c].Channel, ser.Channel)
			for i, v := range ser.Raw {
				require.Equal(t, math.Float64bits(blk.Series[c].Raw[from+i]), math.Float64bits(v))
			}
		}
		next += p.Len()
	}
	assert.Equal(t, 300, next, "sample times read back")
}

// Ensure that small blocks are stored in group records that give every
// block back as it came (seq, device time, period, receive time, readings
// bit for bit), in time order, each once: a block sent again — in the same
// commit, a later one, or after the writer was restarted — is left out and
// not counted; a block that arrives late, inside a group's span, is put in
// its place; a change of channels starts a new record; and a second
// writer on the same run appends to the last group.
func TestWriter_GroupsSmallBlocks(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	t0 := time.Date(2026, 12, 2, 9, 0, 0, 0, time.UTC)
	chans := []string{"p01", "p02", "p03", "p04"}
	mk := func(seq uint64, chs []string) *acquire.Block {
		b := &acquire.Block{Source: "node", Seq: seq, T0Us: t0.UnixMicro() + int64(seq)*20_000, DtUs: 10_000,
			Received: t0.Add(time.Duration(seq)*20*time.Millisecond + 35*time.Millisecond + time.Duration(seq%7)*time.Microsecond)}
		for c, ch := range chs {
			b.Series = append(b.Series, acquire.Series{Channel: ch,
				Raw: []float64{float64(seq)/4 + float64(c), math.Round(1e2*math.Sin(float64(seq)+float64(c))) / 100}})
		}
		return b
	}
	var want []*acquire.Block
	send := func(w *storage.Writer, blocks ...*acquire.Block) {
		t.Helper()
		in := w.NewQueue()
		errc := make(chan error, 1)
		go func() { errc <- w.Run(context.Background(), in) }()
		for _, b := range blocks {
			in <- storage.Item{Block: b}
		}
		close(in)
		require.NoError(t, <-errc)
	}
	// 300 two-sample blocks of 4 channels (8 readings each), the odd
	// seqs 101–119 held back; 50 and 200 sent twice; then the held-back
	// ones late, one of them twice; then 40 blocks with a fifth channel.
	var first, late []*acquire.Block
	for seq := range uint64(300) {
		b := mk(seq, chans)
		want = append(want, b)
		if seq > 100 && seq < 120 && seq%2 == 1 {
			late = append(late, b)
			continue
		}
		first = append(first, b)
	}
	again50, again200 := *want[50], *want[200]
	first = append(first, &again50)
	w := s.NewWriter(id, storage.WriterConfig{MaxBlocks: 25})
	send(w, first...)
	blocks1, samples1 := w.Committed()
	w2 := s.NewWriter(id, storage.WriterConfig{MaxBlocks: 7}) // restarted
	again113 := *late[6]
	five := append(slices.Clone(chans), "vane")
	var more []*acquire.Block
	for seq := uint64(300); seq < 340; seq++ {
		more = append(more, mk(seq, five))
	}
	want = append(want, more...)
	send(w2, append(append(append([]*acquire.Block{&again200}, late...), &again113), more...)...)
	blocks2, samples2 := w2.Committed()
	assert.EqualValues(t, 291, blocks1, "blocks committed by the first writer (290 and one sent twice)")
	assert.EqualValues(t, 290*2, samples1, "new sample times of the first writer")
	assert.EqualValues(t, 1+10+1+40, blocks2)
	assert.EqualValues(t, (10+40)*2, samples2, "only the late and the new blocks add sample times")
	r, err := s.Run(id)
	require.NoError(t, err)
	assert.EqualValues(t, 340*2, r.Samples)

	var got []acquire.Block
	require.NoError(t, s.RawBlocks(id, func(b acquire.Block) error { got = append(got, b); return nil }))
	require.Len(t, got, len(want), "every block once")
	for i, b := range got {
		w := want[i]
		require.Equal(t, w.Seq, b.Seq, "block %d in time order", i)
		require.Equal(t, w.T0Us, b.T0Us)
		require.Equal(t, w.DtUs, b.DtUs)
		require.True(t, w.Received.Equal(b.Received), "seq %d received %v, want %v", w.Seq, b.Received, w.Received)
		require.Len(t, b.Series, len(w.Series))
		for c := range w.Series {
			require.Equal(t, w.Series[c].Channel, b.Series[c].Channel)
			for k, v := range w.Series[c].Raw {
				require.Equal(t, math.Float64bits(v), math.Float64bits(b.Series[c].Raw[k]), "seq %d %s[%d]", w.Seq, w.Series[c].Channel, k)
			}
		}
	}
	recs, err := storage.RawRecordCount(s, id, "node")
	require.NoError(t, err)
	t.Logf("%d blocks in %d records", len(got), recs)
	assert.Less(t, recs, len(got)/20, "small blocks share records")
}
