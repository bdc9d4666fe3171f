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
	dropped atomic.Uint64
	werr    chan error    // the writer's result, once
	wdone   chan struct{} // closed when the writer has returned
	wfail   error         // the writer's error, set before wdone closes
	lost    atomic.Uint64 // results and events not stored because the writer had failed
	expired []acquire.Event
	log     *slog.Logger
	done    bool
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
		items: make(chan storage.Item, StoreQueue), werr: make(chan error, 1), wdone: make(chan struct{})}
	if err := store.SetRunCalibrations(id, storedIDs(cal)); err != nil {
		_ = store.FinishRun(id, cfg.Now(), storage.StatusInterrupted, nil)
		return nil, err
	}
	w := store.NewWriter(id, storage.WriterConfig{})
	// The writer commits until items is closed (Finish), whatever the
	// caller's context does.
	go func() {
		err := w.Run(context.Background(), rec.items)
		rec.wfail = err
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
// Replay's each wants: it fails once the store's writer has stopped on an
// error, so an offline replay stops there.
func (rec *Recorder) Keep(b *acquire.Block, st Step) error {
	for _, ev := range st.Events {
		rec.Event(ev)
	}
	if b != nil {
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

// send waits for the writer to take it, unless the writer has stopped on
// an error: then it is counted as lost instead of blocking forever.
func (rec *Recorder) send(it storage.Item) {
	select {
	case rec.items <- it:
	case <-rec.wdone:
		rec.lost.Add(1)
	}
}

// WriterDone is closed when the store's writer has stopped before Finish:
// a commit failed (a full disk, a broken file). The recording should stop;
// StoreFailed says why.
func (rec *Recorder) WriterDone() <-chan struct{} { return rec.wdone }

// StoreFailed returns the writer's error once it has stopped on one, else
// nil.
func (rec *Recorder) StoreFailed() error {
	select {
	case <-rec.wdone:
		if rec.wfail != nil {
			return fmt.Errorf("the store stopped taking data: %w", rec.wfail)
		}
	default:
	}
	return nil
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
// edge dropped because the writer fell behind.
func (rec *Recorder) StoreHealth() acquire.HealthSnapshot {
	return acquire.HealthSnapshot{Source: "store", BlocksDropped: rec.dropped.Load()}
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
// a failed commit, the run is stored interrupted. A complete run whose
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
	if n := rec.lost.Load(); werr != nil && n > 0 {
		werr = fmt.Errorf("%w; %d results and events after it were not stored", werr, n)
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
	if werr != nil && errors.Is(runErr, rec.wfail) {
		werr = nil // the caller's error already says it (StoreFailed)
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
