package process

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"strings"
	"sync/atomic"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// StoreQueue is the capacity of the recorder → store channel. The writer
// commits every 200 ms; 1024 items ride out a slow commit of a few seconds
// on an SD card before the oldest blocks are dropped (and counted).
const StoreQueue = 1024

// EventCalibrationExpired is the kind of the event a run stores when a
// channel's stored calibration is past its valid-until date.
const EventCalibrationExpired acquire.EventKind = "calibration_expired"

// RecorderConfig sets up a Recorder.
type RecorderConfig struct {
	Rig     *rig.Rig
	RigTOML string // the rig file text, stored with the run so it can be re-processed
	Note    string // stored with the run, e.g. "imported from raw.csv"
	// Pipeline sets up the processing (roof blocks, clock).
	Pipeline Options
	// Offline marks data that is not live (a file, a stored run): raw
	// blocks wait for the store when it falls behind, since waiting loses
	// nothing upstream. Live blocks are never waited for: the oldest queued
	// one is dropped and counted in the "store" health line.
	Offline bool
	// Logger receives every stored event at warning level. Nil discards.
	Logger *slog.Logger
	// Now gives the host clock (run start and end, event times). Nil means
	// time.Now.
	Now func() time.Time
}

// Recorder makes one run in a store: it creates the run, steps every block
// through the run's Pipeline, keeps the raw blocks, events and segments
// through the store's single writer, and finishes the run — with the
// zero-drift correction when the flow-off zeros before and after it allow.
// The live recorder and import/reprocess share it.
//
// A Recorder is not safe for concurrent use: one goroutine calls Block,
// Keep, Event, Live, Flush and Finish. StoreHealth may be called from any
// goroutine.
type Recorder struct {
	store   *storage.Store
	cfg     RecorderConfig
	cal     *calibrate.Calibrator
	p       *Pipeline
	runID   uint64
	items   chan storage.Item
	w       *storage.Writer
	dropped storage.Drops
	// received counts the sample times of the raw blocks handed to Keep:
	// each is stored, rejected, dropped from the queue or lost in a failing
	// store, and counted there (Accounting).
	received atomic.Uint64
	werr     chan error    // the writer's result, once
	wdone    chan struct{} // closed when the writer has returned
	lost     atomic.Uint64 // results and events not stored because the writer had returned
	changed  chan struct{} // the writer's state changed (buffered, 1)
	expired  []acquire.Event
	log      *slog.Logger
	done     bool
}

// NewRecorder checks that the rig can be processed (calibrations, stage,
// design curve), then creates the run and starts the store's writer. A rig
// that cannot be processed leaves no run behind. The caller must call
// Finish.
func NewRecorder(store *storage.Store, cfg RecorderConfig) (*Recorder, error) {
	if cfg.Now == nil {
		cfg.Now = time.Now
	}
	if cfg.Pipeline.Now == nil {
		cfg.Pipeline.Now = cfg.Now
	}
	log := cfg.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	// Stored calibrations (calibration = { id = "…" }) come from this store.
	cal, err := calibrate.NewCalibratorFrom(cfg.Rig, store.Calibration)
	if err != nil {
		return nil, err
	}
	p, err := New(cfg.Rig, cal, cfg.Pipeline)
	if err != nil {
		return nil, err
	}
	r := cfg.Rig
	now := cfg.Now()
	id, err := store.CreateRun(storage.Run{
		Rig: r.Name, Kind: string(r.Kind), Fluid: string(r.Fluid), RigTOML: cfg.RigTOML,
		AreaM2: r.Reference.AreaM2, AreaKind: r.Reference.AreaKind, Started: now, Note: cfg.Note,
		BlockS: p.Block().Seconds(),
	})
	if err != nil {
		return nil, err
	}
	rec := &Recorder{store: store, cfg: cfg, cal: cal, p: p, runID: id, log: log,
		items: make(chan storage.Item, StoreQueue), werr: make(chan error, 1), wdone: make(chan struct{}),
		changed: make(chan struct{}, 1)}
	if err := store.SetRunCalibrations(id, storedIDs(cal)); err != nil {
		_ = store.FinishRun(id, cfg.Now(), storage.StatusInterrupted, nil)
		return nil, err
	}
	rec.w = store.NewWriter(id, storage.WriterConfig{OnNotice: rec.notice})
	// The writer commits until items is closed (Finish), whatever the
	// caller's context does; a failing store does not stop it (it holds,
	// retries and counts).
	go func() {
		err := rec.w.Run(context.Background(), rec.items)
		close(rec.wdone)
		rec.werr <- err
	}()
	rec.expired = expiredCalibrations(cal, now)
	for _, ev := range rec.expired {
		rec.Event(ev)
	}
	return rec, nil
}

// RunID is the id of the run being made.
func (rec *Recorder) RunID() uint64 { return rec.runID }

// Pipeline is the run's processing chain (for Replay).
func (rec *Recorder) Pipeline() *Pipeline { return rec.p }

// Block steps b through the pipeline and keeps it with what it gave.
func (rec *Recorder) Block(b acquire.Block) Step {
	st := rec.p.Step(&b)
	_ = rec.Keep(&b, st)
	return st
}

// Keep stores a stepped block (nil: none), its events and its segments. A
// segment is never dropped while the store works; a live raw block is
// dropped (and counted) rather than waited for. Keep has the signature
// Replay's each wants: it fails while the store's commits fail
// (StoreFailed), so an offline replay stops there; a live recording ignores
// it and goes on (the writer holds the data and retries).
func (rec *Recorder) Keep(b *acquire.Block, st Step) error {
	for _, ev := range st.Events {
		rec.Event(ev)
	}
	if b != nil {
		rec.received.Add(uint64(b.Len()))
		it := storage.Item{Block: b}
		if rec.cfg.Offline {
			rec.send(it) // not live: wait for the store
		} else {
			storage.Offer(rec.items, it, &rec.dropped)
		}
	}
	for i := range st.Segments {
		rec.send(storage.Item{Segment: &st.Segments[i]})
	}
	return rec.StoreFailed()
}

// send waits for the writer to take it. The writer keeps taking items
// even while its commits fail, so the wait is at most one commit; should
// the writer have returned, it is counted as lost instead of blocking
// forever.
func (rec *Recorder) send(it storage.Item) {
	select {
	case rec.items <- it:
	case <-rec.wdone:
		rec.lost.Add(1)
		if it.Block != nil {
			rec.dropped.Samples.Add(uint64(it.Block.Len()))
		}
	}
}

// notice is the writer's WriterConfig.OnNotice: it says at once, on the
// log, what happened to the store (the same words reach the run's events
// once the store takes data again), and wakes StoreChanged.
func (rec *Recorder) notice(n storage.Notice) {
	switch n.Kind {
	case storage.EventStoreFailed, storage.EventStoreLost:
		rec.log.Error(n.Message, "run", rec.runID, "event", n.Kind)
	default:
		rec.log.Warn(n.Message, "run", rec.runID, "event", n.Kind)
	}
	select {
	case rec.changed <- struct{}{}:
	default:
	}
}

// StoreChanged receives a value when the store's state changed (a commit
// failed, the store recovered, data was given up, disk space ran low or
// came back): the time to publish the health again.
func (rec *Recorder) StoreChanged() <-chan struct{} { return rec.changed }

// StoreState is the store writer's state now.
func (rec *Recorder) StoreState() storage.WriterState { return rec.w.State() }

// StoreFailed returns an error while the store's last commit failed, else
// nil. A live recording goes on (the writer holds and retries); an offline
// one stops, since the file can be read again once there is room.
func (rec *Recorder) StoreFailed() error {
	if st := rec.w.State(); st.Failing {
		return fmt.Errorf("the store is not taking data (since %s UTC): %w", st.Since.UTC().Format("15:04:05.000"), st.Err)
	}
	return nil
}

// Accounting is where the sample times handed to a Recorder went:
// Received = Stored + Rejected + Dropped + Lost.
type Accounting struct {
	Received uint64 // sample times of the raw blocks handed to Keep
	Stored   uint64 // committed to the store
	Rejected uint64 // refused by the store as unstorable (each an event)
	Dropped  uint64 // dropped from the recorder → store queue (live only)
	Lost     uint64 // given up by a failing store
}

// String is the accounting in one line.
func (a Accounting) String() string {
	return fmt.Sprintf("sample times received %d = stored %d + rejected %d + dropped from the queue %d + lost in the failing store %d",
		a.Received, a.Stored, a.Rejected, a.Dropped, a.Lost)
}

// Accounting returns the count so far; it balances once Finish has
// returned (before, some samples are in flight).
func (rec *Recorder) Accounting() Accounting {
	_, stored := rec.w.Committed()
	return Accounting{Received: rec.received.Load(), Stored: stored, Rejected: rec.w.RejectedSamples(),
		Dropped: rec.dropped.Samples.Load(), Lost: rec.w.State().LostSamples}
}

// Event stores ev with the run and logs it.
func (rec *Recorder) Event(ev acquire.Event) {
	if ev.T.IsZero() {
		ev.T = rec.cfg.Now()
	}
	msg := ev.Message
	if ev.Duration > 0 {
		msg = fmt.Sprintf("%s (%s)", msg, ev.Duration.Round(time.Millisecond))
	}
	storage.Offer(rec.items, storage.Item{Event: &storage.Event{T: ev.T, Kind: string(ev.Kind), Source: ev.Source, Message: msg}}, &rec.dropped)
	rec.log.Warn(msg, "source", ev.Source, "event", ev.Kind)
}

// Live is the pipeline's live estimate with each source's data-age clock:
// first a warning for every silent source, then the stage's warnings, then
// the expired-calibration messages. A silent source makes the estimate
// stale and never steady: its numbers are frozen at that source's last
// block.
func (rec *Recorder) Live() (estimate.Live, bool) {
	l, ok := rec.p.Live()
	if !ok {
		return l, false
	}
	l.Computed = rec.cfg.Now().UTC()
	l.Sources = rec.p.Ages()
	var ws []string
	if w := rec.w.State().Warning(); w != "" {
		ws = append(ws, w) // first: a store that fails loses the test
	}
	for _, a := range l.Sources {
		if a.Stale {
			l.Stale, l.Steady = true, false
			ws = append(ws, StaleWarning(a))
		}
	}
	for _, w := range l.Warnings {
		if l.Stale && strings.HasPrefix(w, estimate.IdleWarningPrefix) {
			continue // the source's own stale warning above says it better
		}
		ws = append(ws, w)
	}
	for _, ev := range rec.expired {
		ws = append(ws, ev.Message)
	}
	l.Warnings = ws
	return l, true
}

// StaleWarning is the live warning of a silent source: which one, since
// when (UTC) and how long against its limit.
func StaleWarning(a acquire.SourceAge) string {
	return fmt.Sprintf("source %s silent since %s UTC (%.1f s; limit %.2f s = %g block periods): values are frozen at its last block",
		a.Source, a.LastBlock.UTC().Format("15:04:05.0"), a.Age.Seconds(), a.Limit.Seconds(), acquire.StaleBlocks)
}

// EventOverloadAcknowledged is the kind of the event stored when someone
// acknowledges a held overload alarm.
const EventOverloadAcknowledged acquire.EventKind = "overload_acknowledged"

// ErrNoAlarm is returned by AcknowledgeLoad when the channel holds no
// overload alarm.
var ErrNoAlarm = errors.New("no overload alarm is held")

// AcknowledgeLoad releases channel's held overload alarm and stores the
// acknowledgement with the run (by says who or where from, e.g. the
// dashboard client's address). It wraps ErrNoAlarm when none was held.
func (rec *Recorder) AcknowledgeLoad(channel, by string) error {
	var held calibrate.LoadHealth
	for _, l := range rec.p.Loads() {
		if l.Channel == channel {
			held = l
		}
	}
	if !rec.p.AcknowledgeLoad(channel) {
		return fmt.Errorf("channel %q: %w", channel, ErrNoAlarm)
	}
	msg := fmt.Sprintf("overload alarm of channel %s acknowledged (run maximum %.0f %% of its rated %g %s; now %.0f %%)",
		channel, 100*held.MaxFrac, held.CapacitySI, held.Unit, 100*held.PeakFrac)
	if by != "" {
		msg += " by " + by
	}
	rec.Event(acquire.Event{Kind: EventOverloadAcknowledged, Message: msg})
	return nil
}

// StoreHealth is the "store" health line: the items the recorder → store
// edge dropped because the writer fell behind, plus the blocks a failing
// store gave up (BlocksDropped), and the sample times of both
// (SamplesDropped); Samples is what was committed.
func (rec *Recorder) StoreHealth() acquire.HealthSnapshot {
	st := rec.w.State()
	_, stored := rec.w.Committed()
	return acquire.HealthSnapshot{Source: "store", Samples: stored,
		BlocksDropped:  rec.dropped.Items.Load() + st.LostBlocks,
		SamplesDropped: rec.dropped.Samples.Load() + st.LostSamples}
}

// Flush closes the open segment, stores it and returns it.
func (rec *Recorder) Flush() []estimate.Segment {
	st := Step{Segments: rec.p.Flush()}
	_ = rec.Keep(nil, st)
	return st.Segments
}

// Finished is how a run ended.
type Finished struct {
	Status storage.Status
	// Drift is the zero drift between the flow-off zeros before and after
	// the run (empty when there were not both); ZeroNote says what was done
	// about it.
	Drift    []calibrate.DriftLine
	ZeroNote string
}

// Finish waits for the writer's last commit and stores how the run ended
// with the final health of its sources. runErr is the error that ended the
// data (nil for a normal end; cancellation counts as normal): with one, or
// when the store lost data, the run is stored interrupted, and the error
// carries the Accounting. A complete run whose
// flow-off zeros were taken before and after is then re-processed from its
// stored raw blocks with the drift removed (storage.CorrectRun). Finish
// returns the errors of the writer and of finishing; calling it twice does
// nothing the second time.
func (rec *Recorder) Finish(ctx context.Context, runErr error, sources []acquire.HealthSnapshot) (Finished, error) {
	if rec.done {
		return Finished{}, nil
	}
	rec.done = true
	if errors.Is(runErr, context.Canceled) || errors.Is(runErr, context.DeadlineExceeded) {
		runErr = nil
	}
	// The zero drift between the flow-off zeros before and after, taken
	// once: said in the run's log (which the report shows) when the run has
	// no proper flow-off zero — the values then carry the zero offsets —
	// and applied below when it has.
	var drift calibrate.Drift
	var driftErr error
	if rec.p.zeros != nil {
		if drift, driftErr = rec.p.Drift(); driftErr != nil && runErr == nil {
			rec.Event(acquire.Event{Kind: EventFlowOffZero, Message: "no zero-drift correction: " + driftErr.Error()})
		}
	}
	close(rec.items)
	werr := <-rec.werr
	if n := rec.lost.Load(); n > 0 {
		werr = errors.Join(werr, fmt.Errorf("%d items were not stored: the store writer had stopped", n))
	}
	if st := rec.w.State(); st.FailedCommits > 0 {
		// Said on the log whatever the outcome, with the count that
		// balances: nothing is lost without being counted.
		acc := rec.Accounting()
		rec.log.Warn(fmt.Sprintf("the store failed %d times during run %d; %s", st.FailedCommits, rec.runID, acc), "run", rec.runID)
		if werr != nil {
			werr = fmt.Errorf("%w (%s)", werr, acc)
		}
	}
	fin := Finished{Status: storage.StatusComplete}
	if runErr != nil || werr != nil {
		fin.Status = storage.StatusInterrupted
	}
	sources = append(sources, rec.StoreHealth())
	ferr := errors.Join(rec.store.FinishRun(rec.runID, rec.cfg.Now(), fin.Status, sources),
		rec.store.SetRunChannels(rec.runID, rec.p.Channels(), rec.p.Loads()))
	if ferr == nil && werr == nil && rec.p.zeros != nil {
		ferr = rec.correctZeroDrift(context.WithoutCancel(ctx), &fin, drift, driftErr)
	}
	return fin, errors.Join(werr, ferr)
}

// correctZeroDrift applies the flow-off zeros before and after the run: the
// segments are recomputed from the stored raw blocks with the zero drift
// removed, and the drift is stored and reported.
func (rec *Recorder) correctZeroDrift(ctx context.Context, fin *Finished, d calibrate.Drift, derr error) error {
	if derr != nil {
		fin.ZeroNote = "no zero-drift correction: " + derr.Error()
		rec.log.Info(fin.ZeroNote, "run", rec.runID)
		return nil
	}
	segs, err := CorrectDrift(ctx, rec.store, rec.runID, rec.cfg.Rig, rec.cal, d)
	if err != nil {
		return fmt.Errorf("zero-drift correction of run %d: %w", rec.runID, err)
	}
	fin.Drift = d.Report()
	fin.ZeroNote = "segments corrected for the zero drift between the flow-off zeros before and after the run"
	return rec.store.CorrectRun(rec.runID, segs, fin.ZeroNote, fin.Drift)
}

// CorrectDrift replays stored run id through a new pipeline of r with the
// zero drift d removed from every calibrated block (linearly between the
// flow-off zeros) and returns the segments. The replay aligns the blocks
// again in arrival order, so the join sees what the live run saw.
func CorrectDrift(ctx context.Context, store *storage.Store, id uint64, r *rig.Rig, cal *calibrate.Calibrator, d calibrate.Drift) ([]estimate.Segment, error) {
	p, err := New(r, cal, Options{Drift: &d})
	if err != nil {
		return nil, err
	}
	return ReplayStaged(ctx, &acquire.StoredRun{Store: store, RunID: id}, p, nil)
}

func storedIDs(cal *calibrate.Calibrator) []string {
	recs := cal.Stored()
	ids := make([]string, len(recs))
	for i, r := range recs {
		ids[i] = r.ID
	}
	return ids
}

// expiredCalibrations returns one event per stored calibration in use that
// has expired at now. The run still records: the values are as good as the
// calibration, and the event says so in the run's log.
func expiredCalibrations(cal *calibrate.Calibrator, now time.Time) []acquire.Event {
	var evs []acquire.Event
	for _, r := range cal.Stored() {
		if !r.Expired(now) {
			continue
		}
		evs = append(evs, acquire.Event{T: now, Kind: EventCalibrationExpired, Message: fmt.Sprintf(
			"channel %s: calibration %s expired on %s; values are recorded with it, re-calibrate the channel (liftyard calibrate) before trusting them",
			r.Channel, r.ID, r.ValidUntil.Format("2006-01-02"))})
	}
	return evs
}
