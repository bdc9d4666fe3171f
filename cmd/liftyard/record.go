package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"sync"
	"time"

	"liftyard/acquire"
	"liftyard/acquire/mqtt"
	"liftyard/acquire/serial"
	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/dashboard"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// rawQueue is the capacity of the sources → recorder channel: 64 blocks is
// several seconds of data at typical block rates; the sources never wait on
// it (they drop and count), so it only smooths bursts.
const rawQueue = 64

// storeQueue is the capacity of the recorder → store channel. The writer
// commits every 200 ms; 1024 items ride out a slow commit of a few seconds
// on an SD card before the oldest blocks are dropped (and counted).
const storeQueue = 1024

// outboxGrace is how long a finished recording waits for its last results
// to reach the site broker before giving up on them.
const outboxGrace = 2 * time.Second

// livePeriod is how often the dashboard gets a new live estimate: 5 Hz is
// smooth to watch and costs little.
const livePeriod = 200 * time.Millisecond

// Main is one recording session: sources → calibrate → estimate → store and
// dashboard. The demo and record verbs and the end-to-end tests share it.
type Main struct {
	Rig     *rig.Rig
	RigTOML string // the rig file text, stored with the run
	DBPath  string
	Addr    string // dashboard listen address
	Token   string // dashboard token when Addr is not loopback
	Logger  *slog.Logger
	Sources []Source // built from the rig unless set

	// OnReady, when set, is called once the dashboard listens and the run
	// exists, with the dashboard URL and the run id.
	OnReady func(url string, runID uint64)

	// Drift is the zero drift found between the flow-off zeros before and
	// after the run (empty when there were not both); ZeroNote says what
	// was done about it.
	Drift    []calibrate.DriftLine
	ZeroNote string

	// Store, when set, is used instead of opening DBPath; the caller owns
	// it (reprocess replays raw blocks from the same store).
	Store *storage.Store
	// Replay marks sources that are not live (a file, a stored run): raw
	// blocks wait for the store instead of being dropped when it falls
	// behind, since waiting loses nothing upstream.
	Replay bool
	// Note is stored with the run, e.g. "imported from raw.csv".
	Note string
	// Roof sets up the estimator of a roof rig (block length, epochs per
	// block, live window); the zero value takes the estimate package's
	// defaults. Force-balance rigs ignore it.
	Roof estimate.RoofConfig

	runID  uint64
	events chan acquire.Event // from the sources' goroutines to the recorder loop
}

// eventQueue bounds the events waiting for the recorder loop; sources never
// wait on it (an event that does not fit is logged and dropped).
const eventQueue = 256

// onEvent is the acquire.EventFunc given to sources.
func (m *Main) onEvent(ev acquire.Event) {
	select {
	case m.events <- ev:
	default:
		if m.Logger != nil {
			m.Logger.Warn("event queue full: event dropped", "source", ev.Source, "event", ev.Kind, "message", ev.Message)
		}
	}
}

// Source is a named acquire.Source with its health counters.
type Source struct {
	Name   string
	Src    acquire.Source
	Health *acquire.Health
}

// buildSources makes the sources a rig file declares.
func buildSources(r *rig.Rig, logger *slog.Logger, rhoKgPerM3 float64, onEvent acquire.EventFunc) ([]Source, error) {
	var out []Source
	for _, s := range r.Sources {
		switch s.Type {
		case rig.SourceMQTT:
			src, err := mqtt.FromRig(s, r.Name, os.Getenv)
			if err != nil {
				return nil, err
			}
			src.Logger, src.OnEvent = logger, onEvent
			out = append(out, Source{Name: s.Name, Src: src, Health: &src.Health})
		case rig.SourceSimulated:
			q := estimate.DynamicPressure(rhoKgPerM3, defaultSpeed(r.Fluid))
			if r.Kind == rig.KindRoof {
				sr, err := sim.NewRoof(r, sim.RoofConfig{QPa: q, RateHz: s.RateHz})
				if err != nil {
					return nil, fmt.Errorf("source %q: %w", s.Name, err)
				}
				out = append(out, Source{Name: s.Name, Src: sr, Health: &sr.Health})
				continue
			}
			sr, err := sim.New(r, sim.Config{QPa: q, RateHz: s.RateHz}, rhoKgPerM3)
			if err != nil {
				return nil, fmt.Errorf("source %q: %w", s.Name, err)
			}
			out = append(out, Source{Name: s.Name, Src: sr, Health: &sr.Health})
		case rig.SourceSerial:
			src, err := serial.FromRig(s, r)
			if err != nil {
				return nil, err
			}
			src.Logger, src.OnEvent = logger, onEvent
			out = append(out, Source{Name: s.Name, Src: src, Health: &src.Health})
		default:
			return nil, fmt.Errorf("source %q: unknown source type %q", s.Name, s.Type)
		}
	}
	if len(out) == 0 {
		return nil, errors.New("the rig file declares no [[source]]")
	}
	return out, nil
}

// defaultSpeed is the simulated flow speed: a brisk tow in water, a fresh
// breeze in air (invented demo values).
func defaultSpeed(f rig.Fluid) float64 {
	if f == rig.FluidAir {
		return 12
	}
	return 2
}

// Run records until ctx is done, then shuts down in order: sources stop, the
// estimator closes its open segment, the store commits its last batch, the
// run is finished, the dashboard stops.
func (m *Main) Run(ctx context.Context) error {
	log := m.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	fluid, err := estimate.Properties(m.Rig.Fluid, m.Rig.Conditions)
	if err != nil {
		return err
	}
	m.events = make(chan acquire.Event, eventQueue)
	if m.Sources == nil {
		if m.Sources, err = buildSources(m.Rig, log, fluid.RhoKgPerM3, m.onEvent); err != nil {
			return err
		}
	}
	est, err := newStage(m.Rig, m.Roof, nil)
	if err != nil {
		return err
	}
	store := m.Store
	if store == nil {
		if store, err = storage.Open(m.DBPath, storage.Options{}); err != nil {
			return err
		}
		defer store.Close()
	}
	// Stored calibrations (calibration = { id = "…" }) come from this store.
	cal, err := calibrate.NewCalibratorFrom(m.Rig, store.Calibration)
	if err != nil {
		return err
	}
	started := time.Now()
	runID, err := store.CreateRun(storage.Run{
		Rig: m.Rig.Name, Kind: string(m.Rig.Kind), Fluid: string(m.Rig.Fluid), RigTOML: m.RigTOML,
		AreaM2: m.Rig.Reference.AreaM2, AreaKind: m.Rig.Reference.AreaKind, Started: started, Note: m.Note,
	})
	if err != nil {
		return err
	}
	m.runID = runID
	if err := storeRunCalibrations(store, runID, cal); err != nil {
		return err
	}
	dash, err := dashboard.New(dashboard.Config{Addr: m.Addr, Token: m.Token, Runs: store, Live: true,
		Marks: newMarkStore(store), Report: reportWriter(store, ""), Calibrations: store, Logger: log}) // marks read-only: liftyard serve edits them
	if err != nil {
		return err
	}
	ln, err := net.Listen("tcp", m.Addr)
	if err != nil {
		return fmt.Errorf("dashboard listen on %s: %w", m.Addr, err)
	}
	if run, err := store.Run(runID); err == nil {
		dash.SetRun(run)
	}

	ctx, cancel := context.WithCancelCause(ctx)
	defer cancel(nil)
	dashErr := make(chan error, 1)
	dashCtx, stopDash := context.WithCancel(context.WithoutCancel(ctx))
	defer stopDash()
	go func() { dashErr <- dash.Serve(dashCtx, ln) }()

	raw := make(chan acquire.Block, rawQueue)
	var srcWG sync.WaitGroup
	for _, s := range m.Sources {
		srcWG.Go(func() {
			if err := s.Src.Run(ctx, raw); err != nil {
				cancel(fmt.Errorf("source %q: %w", s.Name, err))
			}
		})
	}
	go func() { srcWG.Wait(); close(raw) }()

	items := make(chan storage.Item, storeQueue)
	var storeDropped storeCounter
	writer := store.NewWriter(runID, storage.WriterConfig{})
	writerErr := make(chan error, 1)
	// The writer outlives ctx: it commits until items is closed.
	go func() { writerErr <- writer.Run(context.WithoutCancel(ctx), items) }()

	sources := func() []acquire.HealthSnapshot {
		hs := make([]acquire.HealthSnapshot, 0, len(m.Sources)+1)
		for _, s := range m.Sources {
			hs = append(hs, s.Health.Snapshot(s.Name))
		}
		hs = append(hs, acquire.HealthSnapshot{Source: "store", BlocksDropped: storeDropped.blocks.Load()})
		return hs
	}

	// Live results for other consumers on the site (DESIGN §7): a bounded
	// outbox that never makes the recorder wait.
	var outbox *mqtt.Outbox
	var outboxDone chan error
	stopOut := func() {}
	publish := func(string, []byte) {}
	if p := m.Rig.Publish; p != nil {
		if outbox, err = mqtt.OutboxFromRig(*p, m.Rig.Name, os.Getenv); err != nil {
			return err
		}
		outbox.Logger = log
		outboxDone = make(chan error, 1)
		// The outbox outlives the recording briefly, to send the last
		// segment and health (see outboxGrace).
		outCtx, stopOutbox := context.WithCancel(context.WithoutCancel(ctx))
		defer stopOutbox()
		stopOut = stopOutbox
		go func() {
			err := outbox.Run(outCtx)
			if err != nil {
				log.Error("publishing live results stopped", "broker", p.Broker, "err", err)
			}
			outboxDone <- err
		}()
		publish = func(what string, payload []byte) { outbox.Offer(p.TopicPrefix+"/"+what, payload) }
	}

	if m.OnReady != nil {
		m.OnReady("http://"+ln.Addr().String(), runID)
	}
	log.Info("recording", "run", runID, "rig", m.Rig.Name, "db", m.DBPath)

	// The recorder loop: the only goroutine that touches the aligner, the
	// monitors and the estimator. Sources report events through m.events.
	var (
		lastLive time.Time
		aligner  acquire.Aligner
		chans    = acquire.NewMonitor(m.Rig)
		loads    = calibrate.NewLoadMonitor(m.Rig)
		zeros    = zeroWatch(m.Rig)
		tick     = time.NewTicker(time.Second)
	)
	defer tick.Stop()
	record := func(ev acquire.Event) {
		if ev.T.IsZero() {
			ev.T = time.Now()
		}
		msg := ev.Message
		if ev.Duration > 0 {
			msg = fmt.Sprintf("%s (%s)", msg, ev.Duration.Round(time.Millisecond))
		}
		storage.Offer(items, storage.Item{Event: &storage.Event{T: ev.T, Kind: string(ev.Kind), Source: ev.Source, Message: msg}}, &storeDropped.blocks)
		log.Warn(msg, "source", ev.Source, "event", ev.Kind)
	}
	expired := expiredCalibrations(cal, time.Now())
	for _, ev := range expired {
		record(ev)
	}
	health := func() dashboard.Health {
		return dashboard.Health{Sources: sources(), Channels: chans.Snapshot(time.Now()), Loads: loads.Snapshot()}
	}
loop:
	for {
		select {
		case ev := <-m.events:
			record(ev)
		case <-tick.C:
			h := health()
			dash.PublishHealth(h)
			publish("health", dashboard.EncodeHealth(h))
		case b, ok := <-raw:
			if !ok {
				break loop
			}
			aligner.Align(&b)
			for _, ev := range chans.Observe(&b) {
				record(ev)
			}
			if m.Replay {
				items <- storage.Item{Block: &b} // not live: wait for the store
			} else {
				storeDropped.offer(items, storage.Item{Block: &b})
			}
			cb := cal.Apply(&b)
			if zeros != nil {
				zeros.Observe(&cb)
				if z := zeros.Live(); z != nil {
					z.Correct(&cb) // the flow-off zero taken before the run
				}
			}
			for _, l := range loads.Observe(&cb) {
				record(acquire.Event{T: b.Received, Source: b.Source, Kind: "overload",
					Message: fmt.Sprintf("channel %s at %.0f %% of its rated %g %s (%s)", l.Channel, 100*l.PeakFrac, l.CapacitySI, l.Unit, l.State)})
			}
			for _, seg := range est.Add(&cb) {
				m.segment(items, dash, seg)
				publish("segments", dashboard.EncodeSegment(runID, seg))
			}
			if now := time.Now(); now.Sub(lastLive) >= livePeriod {
				if l, ok := est.Live(); ok {
					l.Warnings = withCalibrationWarnings(l.Warnings, expired)
					dash.PublishLive(l)
					publish("live", dashboard.EncodeLive(l))
				}
				lastLive = now
			}
		}
	}
	for _, seg := range est.Flush() {
		m.segment(items, dash, seg)
		publish("segments", dashboard.EncodeSegment(runID, seg))
	}
	for len(m.events) > 0 {
		record(<-m.events)
	}
	final := health()
	dash.PublishHealth(final)
	publish("health", dashboard.EncodeHealth(final))
	if outbox != nil {
		// Give the site broker a moment to take the last results.
		deadline := time.Now().Add(outboxGrace)
		for outbox.Pending() > 0 && time.Now().Before(deadline) {
			time.Sleep(20 * time.Millisecond)
		}
		stopOut()
	}
	close(items)
	werr := <-writerErr
	status := storage.StatusComplete
	runErr := context.Cause(ctx)
	if errors.Is(runErr, context.Canceled) || errors.Is(runErr, context.DeadlineExceeded) {
		runErr = nil
	}
	if runErr != nil || werr != nil {
		status = storage.StatusInterrupted
	}
	ferr := errors.Join(store.FinishRun(runID, time.Now(), status, final.Sources),
		store.SetRunChannels(runID, final.Channels, final.Loads))
	if zeros != nil && ferr == nil && werr == nil {
		ferr = m.correctZeroDrift(store, runID, cal, zeros, log)
	}
	if run, err := store.Run(runID); err == nil {
		dash.SetRun(run)
	}
	stopDash()
	derr := <-dashErr
	if outboxDone != nil {
		<-outboxDone
	}
	return errors.Join(runErr, werr, ferr, derr)
}

// stage is the estimator a recording feeds: the force-balance
// estimate.Estimator or, for a roof rig, the estimate.RoofEstimator. The
// recorder loop, the zero-drift replay and the marks replay all go through
// it, so a stored run is re-processed by the same code that recorded it.
type stage interface {
	// Add takes one calibrated block and returns the segments it
	// completed (a steady step; for a roof, one per zone per block).
	Add(b *calibrate.Block) []estimate.Segment
	// Live is the moving-window estimate for the dashboard; false until
	// there is one.
	Live() (estimate.Live, bool)
	// Flush closes the open segment at the end of a run.
	Flush() []estimate.Segment
}

// newStage builds the stage for r's kind. marks (user-set steady
// segments) apply to force-balance rigs only: a roof's segments are its
// fixed blocks, so marks on a roof are refused. roof is passed to the roof
// estimator (zero value: the package defaults).
func newStage(r *rig.Rig, roof estimate.RoofConfig, marks []estimate.Mark) (stage, error) {
	if r.Kind == rig.KindRoof {
		if len(marks) > 0 {
			return nil, errors.New("user marks set steady segments of a force-balance rig; a roof rig's segments are its fixed-length blocks")
		}
		return estimate.NewRoofEstimator(r, roof)
	}
	cfg, err := estimatorConfig(r)
	if err != nil {
		return nil, err
	}
	cfg.Marks = marks
	return estimate.NewEstimator(r, cfg)
}

// zeroWatch is the flow-off zero watch of a force-balance rig. A roof rig
// gets none: the watch zeroes the balance channels and the pitot, and on a
// roof it would zero the pitot alone while the taps kept their offsets, so
// roof runs are recorded without zero-drift correction (docs/roof.md).
func zeroWatch(r *rig.Rig) *calibrate.ZeroWatch {
	if r.Kind == rig.KindRoof {
		return nil
	}
	return calibrate.NewZeroWatch(r)
}

// segment hands a completed segment to the store (waiting if need be: a
// result row is never dropped) and to the dashboard.
func (m *Main) segment(items chan<- storage.Item, dash *dashboard.Server, seg estimate.Segment) {
	items <- storage.Item{Segment: &seg}
	dash.PublishSegment(seg)
}

// correctZeroDrift applies the flow-off zeros before and after the run: the
// segments are recomputed from the stored raw blocks with the zero drift
// removed, and the drift is stored and reported (DESIGN §4).
func (m *Main) correctZeroDrift(store *storage.Store, runID uint64, cal *calibrate.Calibrator, z *calibrate.ZeroWatch, log *slog.Logger) error {
	d, err := z.Drift()
	if err != nil {
		m.ZeroNote = "no zero-drift correction: " + err.Error()
		log.Info(m.ZeroNote, "run", runID)
		return nil
	}
	segs, err := correctDrift(store, runID, m.Rig, cal, d)
	if err != nil {
		return fmt.Errorf("zero-drift correction of run %d: %w", runID, err)
	}
	m.Drift = d.Report()
	m.ZeroNote = "segments corrected for the zero drift between the flow-off zeros before and after the run"
	return store.CorrectRun(runID, segs, m.ZeroNote, m.Drift)
}

// RunID returns the id of the run being recorded (0 before Run creates it).
func (m *Main) RunID() uint64 { return m.runID }

// runRecord is `liftyard record --rig RIG.toml [--db FILE] [--addr ADDR] [--for DURATION]`.
func runRecord(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("record", "--rig RIG.toml [--db FILE] [--addr ADDR] [--for DURATION] [--block DURATION]",
		"record from the sources of a rig file, with the live dashboard", stdout)
	rigPath := fs.String("rig", "", "rig file (TOML) describing sources, channels and lift roles")
	db := fs.String("db", "liftyard.db", "bbolt store file")
	addr := fs.String("addr", "127.0.0.1:8470", "dashboard listen address")
	token := fs.String("token", "", "dashboard access token (required when --addr is not loopback)")
	dur := fs.Duration("for", 0, "stop after this long (0: until Ctrl-C)")
	block := fs.Duration("block", 0, "roof rigs: length of one result block (default 10m, common practice)")
	verbose := fs.Bool("v", false, "log progress to stderr")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	if *rigPath == "" {
		return usagef("--rig is required")
	}
	data, err := os.ReadFile(*rigPath)
	if err != nil {
		return usagef("read rig file: %v", err)
	}
	r, err := rig.Parse(*rigPath, data)
	if err != nil {
		return err
	}
	if *block < 0 || (*block > 0 && r.Kind != rig.KindRoof) {
		return usagef("--block %s: a positive duration, for roof rigs only", *block)
	}
	m := &Main{Rig: r, RigTOML: string(data), DBPath: *db, Addr: *addr, Token: *token, Logger: newLogger(stderr, *verbose),
		Roof: estimate.RoofConfig{Block: *block}}
	m.OnReady = func(url string, id uint64) {
		fmt.Fprintf(stdout, "liftyard record: run %d of %q; dashboard on %s (Ctrl-C to stop)\n", id, r.Name, url)
	}
	if *dur > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, *dur)
		defer cancel()
	}
	if err := m.Run(ctx); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "liftyard record: run %d stored in %s\n", m.RunID(), *db)
	printDrift(stdout, m)
	return nil
}

// printDrift reports the zero drift of a finished run.
func printDrift(w io.Writer, m *Main) {
	if m.ZeroNote != "" {
		fmt.Fprintf(w, "  %s\n", m.ZeroNote)
	}
	for _, d := range m.Drift {
		ch, _ := m.Rig.Channel(d.Channel)
		fmt.Fprintf(w, "  zero drift %s: %+.4g %s (%.4g → %.4g)\n", d.Channel, d.ChangeSI, ch.Quantity.SIUnit(), d.StartSI, d.EndSI)
	}
}

func newLogger(w io.Writer, verbose bool) *slog.Logger {
	lvl := slog.LevelWarn
	if verbose {
		lvl = slog.LevelInfo
	}
	return slog.New(slog.NewTextHandler(w, &slog.HandlerOptions{Level: lvl}))
}
