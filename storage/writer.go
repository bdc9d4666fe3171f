package storage

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"sync"
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

	// DefaultRetry is how often a Writer whose commit failed tries again
	// with everything it holds (docs/design.md §5, "when the disk fills");
	// less often when one attempt takes more than a quarter of it, so that
	// retries take at most a fifth of the writer's time.
	DefaultRetry = time.Second

	// DefaultMaxPendingBytes bounds what a failing Writer holds for its
	// retries: 64 MiB is about 20 minutes of a 6-channel rig at 1 kHz, and
	// small beside a field computer's memory. Past it the oldest raw blocks
	// are given up and counted (State().LostSamples).
	DefaultMaxPendingBytes = 64 << 20

	// DefaultSpaceCheck is how often the Writer looks at the free space of
	// the store's file system (and once when it starts).
	DefaultSpaceCheck = 10 * time.Second

	// LowSpaceBytes and LowSpaceLead set the free-space warning: the Writer
	// warns when the store's file system has less free space than
	// LowSpaceBytes, or than LowSpaceLead of data at the rate it has been
	// writing, whichever is more. 256 MiB is also bbolt's room for 16 of its
	// 16 MiB growth steps.
	LowSpaceBytes = 256 << 20
	LowSpaceLead  = 10 * time.Minute
)

// Event kinds a Writer stores in its run's log (each also passed to
// WriterConfig.OnNotice at once, so that the recorder logs it while the
// disk is still full).
const (
	// EventStoreFailed is stored when a commit fails after the ones before
	// it worked: the Writer keeps the data and retries.
	EventStoreFailed = "store_failed"
	// EventStoreRecovered is stored when a commit works again.
	EventStoreRecovered = "store_recovered"
	// EventStoreLost is stored when a failing Writer gives up data: its
	// pending data passed MaxPendingBytes, or the last commit failed.
	EventStoreLost = "store_lost"
	// EventLowSpace is stored when the store's file system runs low
	// (LowSpaceBytes, LowSpaceLead); EventSpaceOK when it has room again.
	EventLowSpace = "disk_low"
	EventSpaceOK  = "disk_ok"
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
	// Retry is how often a failed commit is tried again. Zero means
	// DefaultRetry.
	Retry time.Duration
	// MaxPendingBytes bounds the data a failing Writer holds for retry
	// (estimated in memory: 8 bytes a reading plus names). Zero means
	// DefaultMaxPendingBytes.
	MaxPendingBytes int64
	// SpaceCheck is how often free space is looked at. Zero means
	// DefaultSpaceCheck.
	SpaceCheck time.Duration
	// FreeBytes returns the free space for the store's file. Nil means the
	// file system's own figure (statfs of the store's directory); tests
	// set it.
	FreeBytes func() (uint64, error)
	// OnNotice, when set, is called on the Writer's goroutine at once when
	// its state changes (a failed commit, a recovery, data given up, low
	// space). It must not block. The same notice is stored as an event of
	// the run when the store takes data again.
	OnNotice func(Notice)
}

// Notice is a change in a Writer's state, for people: Kind is one of the
// EventStore* and EventLowSpace/EventSpaceOK kinds.
type Notice struct {
	T       time.Time
	Kind    string
	Message string
}

// WriterState is what a Writer knows about its store's health.
type WriterState struct {
	// Failing is true from a failed commit until one succeeds; Err is that
	// commit's error and Since the time of the first failure.
	Failing bool
	Err     error
	Since   time.Time
	// FailedCommits counts every failed commit attempt of the run.
	FailedCommits uint64
	// PendingBytes is the estimated size of what is held for the next
	// commit.
	PendingBytes int64
	// LostBlocks and LostSamples count the raw blocks (and their sample
	// times) the Writer was handed but gave up; LostItems the segments and
	// events. Every one is counted: received = stored + rejected + lost.
	LostBlocks, LostSamples, LostItems uint64
	// FreeBytes is the free space at the last check (FreeKnown false when
	// it could not be read); LowSpace is true while it is below
	// LowSpaceThreshold.
	FreeBytes         uint64
	FreeKnown         bool
	LowSpace          bool
	LowSpaceThreshold uint64
}

// Warning is the line a live display shows for s, or "" when the store is
// well: the failure first, then low space.
func (s WriterState) Warning() string {
	switch {
	case s.Failing:
		msg := fmt.Sprintf("STORE FAILING since %s UTC: %v. Data is held in memory (%s) and retried every few seconds",
			s.Since.UTC().Format("15:04:05"), s.Err, bytesText(uint64(max(s.PendingBytes, 0))))
		if s.LostSamples > 0 || s.LostItems > 0 {
			msg += fmt.Sprintf("; %d sample times and %d results/events could not be kept", s.LostSamples, s.LostItems)
		}
		return msg + ". Free space on the store's disk now."
	case s.LostSamples > 0 || s.LostItems > 0:
		return fmt.Sprintf("the store failed earlier in this run: %d sample times and %d results/events were not stored", s.LostSamples, s.LostItems)
	case s.LowSpace:
		return fmt.Sprintf("LOW DISK SPACE: %s free on the store's disk, less than %s; make room or stop the recording before the disk is full",
			bytesText(s.FreeBytes), bytesText(s.LowSpaceThreshold))
	}
	return ""
}

// bytesText is n in kB, MB or GB (powers of 1000, as df -H shows).
func bytesText(n uint64) string {
	switch {
	case n >= 1e9:
		return fmt.Sprintf("%.1f GB", float64(n)/1e9)
	case n >= 1e6:
		return fmt.Sprintf("%.1f MB", float64(n)/1e6)
	}
	return fmt.Sprintf("%.0f kB", float64(n)/1e3)
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
//
// A failed commit (a full disk, a file-size limit, an I/O error) never
// stops the Writer: it says so at once (OnNotice, State), keeps taking
// items so that nothing upstream waits, holds them with the failed batch up
// to MaxPendingBytes (the oldest raw blocks past that are given up and
// counted) and retries every Retry until a commit works again.
type Writer struct {
	s     *Store
	runID uint64
	cfg   WriterConfig

	started         atomic.Bool
	blocks          atomic.Uint64
	samples         atomic.Uint64
	commits         atomic.Uint64
	rejected        atomic.Uint64
	rejectedSamples atomic.Uint64
	bytes           atomic.Uint64 // bytes the committed block records added to the store
	lastCommitNs    atomic.Int64
	lastCommitted   atomic.Int64 // Unix ns of the host clock at the last commit

	mu    sync.Mutex
	state WriterState

	// failHook, when set (tests only), is called before each commit; an
	// error from it fails the commit as a full disk would.
	failHook func() error
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
	if cfg.Retry <= 0 {
		cfg.Retry = DefaultRetry
	}
	if cfg.MaxPendingBytes <= 0 {
		cfg.MaxPendingBytes = DefaultMaxPendingBytes
	}
	if cfg.SpaceCheck <= 0 {
		cfg.SpaceCheck = DefaultSpaceCheck
	}
	if cfg.FreeBytes == nil {
		dir := filepath.Dir(s.path)
		cfg.FreeBytes = func() (uint64, error) { return FreeBytes(dir) }
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

// RejectedSamples returns the sample times of the rejected blocks.
func (w *Writer) RejectedSamples() uint64 { return w.rejectedSamples.Load() }

// State returns the Writer's health now.
func (w *Writer) State() WriterState {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.state
}

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
// commits it, so a cancel loses nothing that was handed over.
//
// A failed commit does not end Run (see Writer). Run returns nil when
// everything it was handed is stored (or rejected as unstorable, with an
// event), and otherwise an error that says how much was lost and wraps the
// last commit error: the final commit failed, or data was given up past
// MaxPendingBytes while the store failed.
func (w *Writer) Run(ctx context.Context, in <-chan Item) error {
	if w.started.Swap(true) {
		return errors.New("storage writer: Run called twice")
	}
	var (
		b       batch
		timer   = time.NewTimer(time.Hour)
		timerC  <-chan time.Time
		lastErr error
	)
	timer.Stop()
	defer timer.Stop()
	space := time.NewTicker(w.cfg.SpaceCheck)
	defer space.Stop()
	sp := spaceWatch{last: time.Now()}
	w.checkSpace(&b, &sp)

	arm := func(d time.Duration) {
		if timerC == nil {
			timer.Reset(d)
			timerC = timer.C
		}
	}
	acks := 0 // blocks in the batch whose source acknowledges them at the commit
	flush := func() {
		timer.Stop()
		timerC = nil
		if b.empty() {
			return
		}
		start := time.Now()
		if err := w.commit(&b); err != nil {
			lastErr = err
			w.failed(&b, err)
			// A failed attempt with much held costs CPU (encoding, bbolt's
			// pages): at most a fifth of the time goes to retries.
			arm(max(w.cfg.Retry, 4*time.Since(start)))
			return
		}
		b.reset()
		acks = 0
		if w.recovered(&b) {
			arm(w.cfg.Interval) // store the recovery's event soon
		}
	}
	add := func(it Item) {
		if b.empty() {
			arm(w.cfg.Interval)
		}
		b.add(it)
		if it.Block != nil && it.Block.Ack != nil {
			acks++
		}
		if w.failing() {
			w.bound(&b)
			return // the retry timer decides
		}
		if len(b.blocks) >= w.cfg.MaxBlocks || acks >= AckBatch {
			flush()
		}
	}
	finish := func() error {
		flush()
		if !b.empty() && !w.failing() {
			flush() // the recovery's own event
		}
		if !b.empty() {
			w.giveUp(&b, "the last commit failed")
		}
		st := w.State()
		if st.LostSamples == 0 && st.LostItems == 0 {
			return nil // it may have failed for a while, but everything was stored
		}
		bl, sa := w.Committed()
		return fmt.Errorf("store run %d: %d blocks (%d sample times) and %d results/events could not be stored; %d blocks (%d sample times) are on disk up to the last good commit: %w",
			w.runID, st.LostBlocks, st.LostSamples, st.LostItems, bl, sa, lastErr)
	}

	for {
		select {
		case it, ok := <-in:
			if !ok {
				return finish()
			}
			add(it)
		case <-timerC:
			timerC = nil
			flush()
		case <-space.C:
			if w.checkSpace(&b, &sp) {
				arm(w.cfg.Interval)
			}
		case <-ctx.Done():
			for {
				select {
				case it, ok := <-in:
					if ok {
						add(it)
						continue
					}
				default:
				}
				return finish()
			}
		}
	}
}

func (w *Writer) failing() bool {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.state.Failing
}

// notice tells OnNotice at once and stores the same words as an event of
// the run with the next commit that works.
func (w *Writer) notice(b *batch, kind, msg string) {
	n := Notice{T: w.s.now(), Kind: kind, Message: msg}
	b.add(Item{Event: &Event{T: n.T, Kind: kind, Message: msg}})
	if w.cfg.OnNotice != nil {
		w.cfg.OnNotice(n)
	}
}

// failed records a failed commit of b: the first of a streak is a notice.
func (w *Writer) failed(b *batch, err error) {
	w.mu.Lock()
	first := !w.state.Failing
	w.state.FailedCommits++
	w.state.Err = err
	if first {
		w.state.Failing = true
		w.state.Since = w.s.now()
	}
	w.state.PendingBytes = b.bytes
	w.mu.Unlock()
	if first {
		w.notice(b, EventStoreFailed, fmt.Sprintf("the store failed to commit: %v; nothing is thrown away yet: the data is held in memory (up to %s) and the commit is retried every %s",
			err, bytesText(uint64(w.cfg.MaxPendingBytes)), w.cfg.Retry))
	}
	w.bound(b)
}

// recovered ends a failure streak after a commit worked; it reports
// whether it added an event to b.
func (w *Writer) recovered(b *batch) bool {
	w.mu.Lock()
	was, since, lost, lostItems := w.state.Failing, w.state.Since, w.state.LostSamples, w.state.LostItems
	w.state.Failing, w.state.Err, w.state.PendingBytes = false, nil, b.bytes
	w.mu.Unlock()
	if !was {
		return false
	}
	msg := fmt.Sprintf("the store takes data again after failing for %s; everything held was stored", w.s.now().Sub(since).Round(time.Millisecond))
	if lost > 0 || lostItems > 0 {
		msg = fmt.Sprintf("the store takes data again after failing for %s; %d sample times and %d results/events of this run could not be kept", w.s.now().Sub(since).Round(time.Millisecond), lost, lostItems)
	}
	w.notice(b, EventStoreRecovered, msg)
	return true
}

// bound keeps a failing Writer's batch within MaxPendingBytes: the oldest
// raw blocks go first, then the oldest events, then the oldest segments.
// Each is counted; the first loss of a streak is a notice.
func (w *Writer) bound(b *batch) {
	var blocks, samples, items uint64
	for b.bytes > w.cfg.MaxPendingBytes {
		switch {
		case len(b.blocks) > 0:
			blocks++
			samples += uint64(b.blocks[0].Len())
			b.bytes -= blockBytes(b.blocks[0])
			b.blocks[0].Done() // given up and counted: a broker need not keep it
			b.blocks[0] = nil
			b.blocks = b.blocks[1:]
		case len(b.events) > 0:
			items++
			b.bytes -= eventBytes(&b.events[0])
			b.events = b.events[1:]
		case len(b.segments) > 0:
			items++
			b.bytes -= segmentBytes
			b.segments[0] = nil
			b.segments = b.segments[1:]
		default:
			b.bytes = 0
		}
	}
	w.mu.Lock()
	first := w.state.LostSamples == 0 && w.state.LostItems == 0 && (samples > 0 || items > 0)
	w.state.LostBlocks += blocks
	w.state.LostSamples += samples
	w.state.LostItems += items
	w.state.PendingBytes = b.bytes
	w.mu.Unlock()
	if first {
		w.notice(b, EventStoreLost, fmt.Sprintf("the store is still failing and the data held for it passed %s: the oldest raw blocks are now given up (and counted)",
			bytesText(uint64(w.cfg.MaxPendingBytes))))
	}
}

// giveUp counts everything in b as lost (the last commit failed) and says so.
func (w *Writer) giveUp(b *batch, why string) {
	var samples uint64
	for _, blk := range b.blocks {
		samples += uint64(blk.Len())
	}
	items := uint64(len(b.segments) + len(b.events))
	w.mu.Lock()
	w.state.LostBlocks += uint64(len(b.blocks))
	w.state.LostSamples += samples
	w.state.LostItems += items
	w.state.PendingBytes = 0
	w.mu.Unlock()
	if w.cfg.OnNotice != nil {
		w.cfg.OnNotice(Notice{T: w.s.now(), Kind: EventStoreLost, Message: fmt.Sprintf("%s: %d blocks (%d sample times) and %d results/events held for the store are lost",
			why, len(b.blocks), samples, items)})
	}
	b.reset()
}

// spaceWatch is the Writer's free-space look-out.
type spaceWatch struct {
	last  time.Time
	bytes uint64 // w.bytes at last
}

// checkSpace looks at the free space: below the threshold (LowSpaceBytes,
// or LowSpaceLead at the rate written since the last look) it warns once,
// and says so again when there is room. It reports whether it added an
// event to b.
func (w *Writer) checkSpace(b *batch, sp *spaceWatch) bool {
	now := time.Now()
	written := w.bytes.Load()
	rate := 0.0 // bytes a second
	if dt := now.Sub(sp.last).Seconds(); dt > 0 {
		rate = float64(written-sp.bytes) / dt
	}
	sp.last, sp.bytes = now, written
	free, err := w.cfg.FreeBytes()
	threshold := max(uint64(LowSpaceBytes), uint64(rate*LowSpaceLead.Seconds()))
	w.mu.Lock()
	w.state.FreeKnown = err == nil
	w.state.FreeBytes = free
	w.state.LowSpaceThreshold = threshold
	was := w.state.LowSpace
	low := err == nil && free < threshold
	w.state.LowSpace = low
	w.mu.Unlock()
	switch {
	case low && !was:
		w.notice(b, EventLowSpace, fmt.Sprintf("low disk space: %s free on the disk of %s, less than %s (%s, or %s of data at the %s/s written lately): make room or stop the recording before the disk is full",
			bytesText(free), w.s.path, bytesText(threshold), bytesText(LowSpaceBytes), LowSpaceLead, bytesText(uint64(rate))))
		return true
	case !low && was && err == nil:
		w.notice(b, EventSpaceOK, fmt.Sprintf("disk space is back: %s free on the disk of %s", bytesText(free), w.s.path))
		return true
	}
	return false
}

// batch is what the Writer holds between commits.
type batch struct {
	blocks   []*acquire.Block
	segments []*estimate.Segment
	events   []Event
	bytes    int64 // estimated memory held (blockBytes, segmentBytes, eventBytes)
}

func (b *batch) empty() bool {
	return len(b.blocks) == 0 && len(b.segments) == 0 && len(b.events) == 0
}

func (b *batch) add(it Item) {
	if it.Block != nil {
		b.blocks = append(b.blocks, it.Block)
		b.bytes += blockBytes(it.Block)
	}
	if it.Segment != nil {
		b.segments = append(b.segments, it.Segment)
		b.bytes += segmentBytes
	}
	if it.Event != nil {
		b.events = append(b.events, *it.Event)
		b.bytes += eventBytes(it.Event)
	}
}

func (b *batch) reset() {
	clear(b.blocks)
	clear(b.segments)
	b.blocks, b.segments, b.events = b.blocks[:0], b.segments[:0], b.events[:0]
	b.bytes = 0
}

// segmentBytes is what a held segment is counted as: a Segment with its
// values and strings is about 1–2 kB.
const segmentBytes = 2048

// blockBytes estimates the memory a held block takes: 8 bytes a reading,
// its names and the slices' headers.
func blockBytes(b *acquire.Block) int64 {
	n := int64(96 + len(b.Source))
	for _, s := range b.Series {
		n += int64(40 + len(s.Channel) + 8*len(s.Raw))
	}
	return n
}

func eventBytes(e *Event) int64 {
	return int64(80 + len(e.Kind) + len(e.Source) + len(e.Message))
}

// toStore is a block, or a part of one, ready to put (group.go encodes it).
type toStore struct {
	source string
	key    []byte
	n      int
	blk    *acquire.Block
	part   int // which part of the block (appendStored)
}

// StoredPartReadings bounds a stored block record: a block of more
// readings (channels × samples) is stored as consecutive parts of at most
// this many, whole samples each, every part a block of its own with the
// block's seq and period. bbolt packs a leaf page well only with many
// records on it: when a commit adds a record or two to a full page, the
// split leaves two records behind, so 10 kB blocks on 32 KiB pages filled
// them to 65 % (docs/storage.md §1). The bound counts readings, not bytes,
// so a block is cut the same way whenever it is stored (a block sent again
// finds its parts stored) before it is encoded; at 1–3 bytes a reading a
// part is 1–3 KiB.
const StoredPartReadings = 1024

// appendStored appends blk to enc, whole or as parts of at most
// StoredPartReadings readings; an error (wrapping ErrBadRecord) when the
// block cannot be stored (checkBlock), with nothing appended. What it
// accepts encodes without error.
func appendStored(enc []toStore, blk *acquire.Block) ([]toStore, error) {
	if err := checkBlock(blk); err != nil {
		return enc, err
	}
	n := blk.Len()
	per := n
	if parts := (n*len(blk.Series) + StoredPartReadings - 1) / StoredPartReadings; parts > 1 && blk.DtUs > 0 {
		parts = min(n, parts)
		per = (n + parts - 1) / parts
	}
	if per >= n { // whole, an empty block too
		return append(enc, toStore{source: blk.Source, key: blockKey(nil, blk), n: n, blk: blk}), nil
	}
	for i := 0; i < n; i += per {
		pb := blockPart(blk, i, min(i+per, n))
		enc = append(enc, toStore{source: blk.Source, key: blockKey(nil, pb), n: pb.Len(), blk: pb, part: i / per})
	}
	return enc, nil
}

// blockPart is samples [from, to) of blk as a block of its own: the same
// source, seq and sample period, its first sample's time, and a receive
// time earlier by the samples after it, so that the offset between device
// and receive time (which the aligner and the rollups use) is the block's.
func blockPart(blk *acquire.Block, from, to int) *acquire.Block {
	pb := &acquire.Block{Source: blk.Source, Seq: blk.Seq, T0Us: blk.T0Us + int64(from)*blk.DtUs, DtUs: blk.DtUs,
		Series: make([]acquire.Series, len(blk.Series))}
	if !blk.Received.IsZero() {
		pb.Received = blk.Received.Add(-time.Duration(int64(blk.Len()-to)*blk.DtUs) * time.Microsecond)
	}
	for i, s := range blk.Series {
		pb.Series[i] = acquire.Series{Channel: s.Channel, Raw: s.Raw[from:to:to]}
	}
	return pb
}

// commit writes b in one transaction: the blocks, segments and events, and
// the run record's Samples and Segments counts.
func (w *Writer) commit(b *batch) (err error) {
	defer guard(&err, fmt.Sprintf("store run %d", w.runID))()
	if w.failHook != nil {
		if err := w.failHook(); err != nil {
			return writeError(fmt.Sprintf("store run %d: commit of %d blocks, %d segments, %d events", w.runID, len(b.blocks), len(b.segments), len(b.events)), err)
		}
	}
	now := w.s.now()
	// Check and cut the blocks outside the transaction; they are encoded
	// once, as they are put (group.go). A block that cannot be stored is
	// counted and logged, and the rest of the batch is stored.
	enc := make([]toStore, 0, len(b.blocks))
	events := b.events
	var rejected, rejectedSamples uint64
	for _, blk := range b.blocks {
		var err error
		if blk.Source == "" {
			err = fmt.Errorf("block seq %d has no source name: %w", blk.Seq, ErrBadRecord)
		}
		if err == nil {
			enc, err = appendStored(enc, blk)
		}
		if err != nil {
			rejected++
			rejectedSamples += uint64(blk.Len())
			events = append(events, Event{T: now, Kind: EventRejected, Source: blk.Source, Message: err.Error()})
		}
	}
	// A segment that cannot be encoded is logged and left out, like a
	// block: retrying would never store it.
	segs := make([][]byte, 0, len(b.segments))
	segIdx := make([]int, 0, len(b.segments))
	for _, sg := range b.segments {
		data, err := encodeSegment(sg)
		if err != nil {
			events = append(events, Event{T: now, Kind: EventRejected, Message: fmt.Sprintf("segment result not stored: %v", err)})
			continue
		}
		segs = append(segs, data)
		segIdx = append(segIdx, sg.Index)
	}

	var nBlocks, nSamples, grown uint64
	start := time.Now()
	err = w.s.db.Update(func(tx *bolt.Tx) error {
		nBlocks, nSamples, grown = 0, 0, 0 // Update may not re-run fn, but keep it idempotent
		roll := rollupSet{}                // trend rollups of the new blocks (rollup.go)
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
			put := newRawPutter(rb) // small blocks in groups (group.go)
			for i := range enc {
				e := &enc[i]
				isNew, err := put.put(e)
				if err != nil {
					return err
				}
				if isNew { // a block stored before is left as it is
					nSamples += uint64(e.n)
					roll.add(e.blk)
				}
				if e.part == 0 {
					nBlocks++
				}
			}
			if err := put.flush(); err != nil {
				return err
			}
			grown = uint64(max(put.grown, 0))
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
				if err := sb.Put(segmentKey(segIdx[i]), data); err != nil {
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
		return writeError(fmt.Sprintf("store run %d: commit of %d blocks, %d segments, %d events",
			w.runID, len(enc), len(segs), len(events)), err)
	}
	w.bytes.Add(grown)
	w.rejectedSamples.Add(rejectedSamples)
	w.lastCommitNs.Store(int64(time.Since(start)))
	w.lastCommitted.Store(now.UnixNano())
	w.blocks.Add(nBlocks)
	w.samples.Add(nSamples)
	w.rejected.Add(rejected)
	w.commits.Add(1)
	ackBlocks(b.blocks) // only now may a broker forget them
	return nil
}

// Drops counts what Offer discarded: items of any kind, and the sample
// times of the raw blocks among them.
type Drops struct {
	Items, Samples atomic.Uint64
}

func (d *Drops) count(it Item) {
	if d == nil {
		return
	}
	d.Items.Add(1)
	if it.Block != nil {
		d.Samples.Add(uint64(it.Block.Len()))
	}
}

// Offer puts it on ch without ever blocking (the recorder → storage edge
// policy: acquisition never waits for the disk). When ch is full it drops
// the oldest queued raw block to make room and counts it in dropped (if not
// nil). Results and events are never the ones dropped: one found at the
// head goes back to the tail. It returns true when it was queued, and false
// when, with other producers racing for the room (or a queue full of
// results), it gave up and dropped it itself (also counted).
func Offer(ch chan Item, it Item, dropped *Drops) bool {
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
					dropped.count(old) // a racing producer took the room back
				}
				continue
			}
			dropped.count(old)
			old.Block.Done() // dropped and counted: nothing to keep it for
		default:
		}
	}
	dropped.count(it)
	it.Block.Done()
	return false
}
