package storage

import (
	"context"
	"errors"
	"fmt"
	"sync/atomic"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
	"liftyard/estimate"
)

// Writer defaults.
const (
	// DefaultInterval is the longest an item waits before it is committed.
	// docs/design.md §5 allows a crash to lose "at most the last uncommitted batch";
	// 200 ms of data is what a user would accept losing, and five commits a
	// second cost a few ms of fsync each on an SSD, 10–50 ms on an SD card.
	DefaultInterval = 200 * time.Millisecond

	// DefaultMaxBlocks commits early when this many blocks are pending, so a
	// burst (a reconnect flushing a broker backlog) never builds one huge
	// transaction.
	DefaultMaxBlocks = 512

	// DefaultQueue is the capacity of the channel NewQueue makes: 2048 items
	// hold several seconds of blocks from a few sources (MQTT blocks of
	// 50–100 ms), enough to ride out a slow commit on an SD card without
	// dropping, yet bounded.
	DefaultQueue = 2048
)

// WriterConfig configures a Writer. A zero WriterConfig uses the defaults.
type WriterConfig struct {
	// Interval is the longest an item waits in memory before it is committed,
	// counted from the first item of a batch. Zero means DefaultInterval.
	Interval time.Duration
	// MaxBlocks commits as soon as this many blocks are pending. Zero means
	// DefaultMaxBlocks.
	MaxBlocks int
	// Queue is the capacity of the channel returned by NewQueue. Zero means
	// DefaultQueue.
	Queue int
}

// Item is one thing to store for the Writer's run: exactly one of its fields
// is set. The Writer takes ownership of the pointed-to values.
type Item struct {
	Block   *acquire.Block
	Segment *estimate.Segment
	Event   *Event
}

// Writer is the single goroutine that writes a recording run to the store:
// it collects items and commits them in one bbolt read-write transaction
// per interval, so a run of thousands of blocks per second costs a few
// fsyncs per second. Run must be called once; the counters may be read from
// any goroutine at any time.
type Writer struct {
	s     *Store
	runID uint64
	cfg   WriterConfig

	started       atomic.Bool
	blocks        atomic.Uint64
	samples       atomic.Uint64
	commits       atomic.Uint64
	rejected      atomic.Uint64
	lastCommitNs  atomic.Int64
	lastCommitted atomic.Int64 // Unix ns of the host clock at the last commit
}

// NewWriter returns a Writer for run id, which must exist when Run commits.
func (s *Store) NewWriter(runID uint64, cfg WriterConfig) *Writer {
	if cfg.Interval <= 0 {
		cfg.Interval = DefaultInterval
	}
	if cfg.MaxBlocks <= 0 {
		cfg.MaxBlocks = DefaultMaxBlocks
	}
	if cfg.Queue <= 0 {
		cfg.Queue = DefaultQueue
	}
	return &Writer{s: s, runID: runID, cfg: cfg}
}

// NewQueue makes the bounded channel that producers feed with Offer and Run
// reads, with capacity cfg.Queue.
func (w *Writer) NewQueue() chan Item { return make(chan Item, w.cfg.Queue) }

// RunID returns the run the Writer writes to.
func (w *Writer) RunID() uint64 { return w.runID }

// Committed returns how many blocks and sample times are on disk so far.
func (w *Writer) Committed() (blocks, samples uint64) {
	return w.blocks.Load(), w.samples.Load()
}

// Commits returns how many transactions the Writer has committed.
func (w *Writer) Commits() uint64 { return w.commits.Load() }

// Rejected returns how many blocks the Writer refused because they could not
// be stored (each also logged as an EventRejected event).
func (w *Writer) Rejected() uint64 { return w.rejected.Load() }

// LastCommit returns how long the last commit took, fsync included.
func (w *Writer) LastCommit() time.Duration { return time.Duration(w.lastCommitNs.Load()) }

// LastCommitted returns the store clock's time at the last commit, or the
// zero time before the first one: "data on disk up to here".
func (w *Writer) LastCommitted() time.Time {
	ns := w.lastCommitted.Load()
	if ns == 0 {
		return time.Time{}
	}
	return time.Unix(0, ns)
}

// Run stores the items from in until in is closed or ctx is done, then
// commits what it holds and returns. The sender closes in. On ctx done, Run
// also takes what is already queued in in (without waiting for more) and
// commits it, so a cancel loses nothing that was handed over. Run returns
// nil in both cases, and the first commit error otherwise (the pending batch
// is then lost, and the error says how much).
func (w *Writer) Run(ctx context.Context, in <-chan Item) error {
	if w.started.Swap(true) {
		return errors.New("storage writer: Run called twice")
	}
	var (
		b      batch
		timer  = time.NewTimer(time.Hour)
		timerC <-chan time.Time
	)
	timer.Stop()
	defer timer.Stop()

	flush := func() error {
		timer.Stop()
		timerC = nil
		if b.empty() {
			return nil
		}
		err := w.commit(&b)
		b.reset()
		return err
	}
	add := func(it Item) error {
		if b.empty() {
			timer.Reset(w.cfg.Interval)
			timerC = timer.C
		}
		b.add(it)
		if len(b.blocks) >= w.cfg.MaxBlocks {
			return flush()
		}
		return nil
	}

	for {
		select {
		case it, ok := <-in:
			if !ok {
				return flush()
			}
			if err := add(it); err != nil {
				return err
			}
		case <-timerC:
			if err := flush(); err != nil {
				return err
			}
		case <-ctx.Done():
			for {
				select {
				case it, ok := <-in:
					if ok {
						if err := add(it); err != nil {
							return err
						}
						continue
					}
				default:
				}
				return flush()
			}
		}
	}
}

// batch is what the Writer holds between commits.
type batch struct {
	blocks   []*acquire.Block
	segments []*estimate.Segment
	events   []Event
}

func (b *batch) empty() bool {
	return len(b.blocks) == 0 && len(b.segments) == 0 && len(b.events) == 0
}

func (b *batch) add(it Item) {
	if it.Block != nil {
		b.blocks = append(b.blocks, it.Block)
	}
	if it.Segment != nil {
		b.segments = append(b.segments, it.Segment)
	}
	if it.Event != nil {
		b.events = append(b.events, *it.Event)
	}
}

func (b *batch) reset() {
	clear(b.blocks)
	clear(b.segments)
	b.blocks, b.segments, b.events = b.blocks[:0], b.segments[:0], b.events[:0]
}

// encoded is a block ready to put.
type encoded struct {
	source string
	key    []byte
	value  []byte
	n      int
	blk    *acquire.Block // for the rollups
}

// commit writes b in one transaction: the blocks, segments and events, and
// the run record's Samples and Segments counts.
func (w *Writer) commit(b *batch) (err error) {
	defer guard(&err, fmt.Sprintf("store run %d", w.runID))()
	now := w.s.now()
	// Encode outside the transaction: the write lock is held for the puts
	// only. A block that cannot be encoded is counted and logged, and the
	// rest of the batch is stored.
	enc := make([]encoded, 0, len(b.blocks))
	events := b.events
	var rejected uint64
	for _, blk := range b.blocks {
		var err error
		if blk.Source == "" {
			err = fmt.Errorf("block seq %d has no source name: %w", blk.Seq, ErrBadRecord)
		}
		var val []byte
		if err == nil {
			val, err = encodeBlock(nil, blk)
		}
		if err != nil {
			rejected++
			events = append(events, Event{T: now, Kind: EventRejected, Source: blk.Source, Message: err.Error()})
			continue
		}
		enc = append(enc, encoded{source: blk.Source, key: blockKey(nil, blk), value: val, n: blk.Len(), blk: blk})
	}
	segs := make([][]byte, len(b.segments))
	for i, sg := range b.segments {
		data, err := encodeSegment(sg)
		if err != nil {
			return fmt.Errorf("store run %d: %w", w.runID, err)
		}
		segs[i] = data
	}

	var nBlocks, nSamples uint64
	start := time.Now()
	err = w.s.db.Update(func(tx *bolt.Tx) error {
		nBlocks, nSamples = 0, 0 // Update may not re-run fn, but keep it idempotent
		roll := rollupSet{}      // trend rollups of the new blocks (rollup.go)
		r, err := getRun(tx, w.runID)
		if err != nil {
			return err
		}
		if len(enc) > 0 {
			raw := tx.Bucket(bucketRaw)
			raw.FillPercent = appendFill
			hadBlocks := raw.Bucket(u64(w.runID)) != nil
			rb, err := raw.CreateBucketIfNotExists(u64(w.runID))
			if err != nil {
				return err
			}
			rb.FillPercent = appendFill
			var sb *bolt.Bucket
			var sbName string
			for _, e := range enc {
				if sb == nil || e.source != sbName {
					if sb, err = rb.CreateBucketIfNotExists([]byte(e.source)); err != nil {
						return fmt.Errorf("source %q: %w", e.source, err)
					}
					sb.FillPercent = appendFill
					sbName = e.source
				}
				if sb.Get(e.key) == nil { // a repeated block replaces, not adds
					nSamples += uint64(e.n)
					roll.add(e.blk)
				}
				if err := sb.Put(e.key, e.value); err != nil {
					return err
				}
				nBlocks++
			}
			if err := putRollups(tx, w.runID, roll, hadBlocks); err != nil {
				return err
			}
		}
		if len(segs) > 0 {
			res := tx.Bucket(bucketResults)
			res.FillPercent = appendFill
			sb, err := res.CreateBucketIfNotExists(u64(w.runID))
			if err != nil {
				return err
			}
			sb.FillPercent = appendFill
			for i, data := range segs {
				if err := sb.Put(segmentKey(b.segments[i].Index), data); err != nil {
					return err
				}
			}
			n := 0 // Stats() does not see this tx's puts; count keys
			c := sb.Cursor()
			for k, _ := c.First(); k != nil; k, _ = c.Next() {
				n++
			}
			r.Segments = n
		}
		for _, ev := range events {
			if ev.T.IsZero() {
				ev.T = now
			}
			if err := putEvent(tx, w.runID, ev); err != nil {
				return err
			}
		}
		r.Samples += nSamples
		return putRun(tx, r)
	})
	if err != nil {
		return writeError(fmt.Sprintf("store run %d: commit of %d blocks, %d segments, %d events lost",
			w.runID, len(enc), len(segs), len(events)), err)
	}
	w.lastCommitNs.Store(int64(time.Since(start)))
	w.lastCommitted.Store(now.UnixNano())
	w.blocks.Add(nBlocks)
	w.samples.Add(nSamples)
	w.rejected.Add(rejected)
	w.commits.Add(1)
	return nil
}

// Offer puts it on ch without ever blocking (the recorder → storage edge
// policy: acquisition never waits for the disk). When ch is full it drops
// the oldest queued raw block to make room and adds 1 to dropped (if not
// nil) for each item discarded. Results and events are never the ones
// dropped: one found at the head goes back to the tail. It returns true when
// it was queued, and false when, with other producers racing for the room
// (or a queue full of results), it gave up and dropped it itself (also
// counted). dropped counts items, whatever they hold.
func Offer(ch chan Item, it Item, dropped *atomic.Uint64) bool {
	count := func() {
		if dropped != nil {
			dropped.Add(1)
		}
	}
	for range 4 {
		select {
		case ch <- it:
			return true
		default:
		}
		select {
		case old := <-ch:
			if old.Block == nil && (old.Segment != nil || old.Event != nil) {
				select {
				case ch <- old:
				default:
					count() // a racing producer took the room back
				}
				continue
			}
			count()
		default:
		}
	}
	count()
	return false
}
