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
	"liftyard/dashboard"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// rawQueue is the capacity of the sources → recorder channel: 64 blocks is
// several seconds of data at typical block rates; the sources never wait on
// it (they drop and count), so it only smooths bursts.
const rawQueue = 64

// outboxGrace is how long a finished recording waits for its last results
// to reach the site broker before giving up on them.
const outboxGrace = 2 * time.Second

// livePeriod is how often the dashboard gets a new live estimate: 5 Hz is
// smooth to watch and costs little.
const livePeriod = 200 * time.Millisecond

// ageTick is how often the recorder looks at each source's data-age clock
// when no block arrives: a silent source is announced (live estimate,
// health, site broker) within ageTick of passing its limit (2.5 block
// periods, acquire.StaleLimit), so within 3 periods of a 50 ms block or
// longer. A look costs a loop over the sources.
const ageTick = 25 * time.Millisecond

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

	// Finished says how the run ended, with the zero drift found between
	// the flow-off zeros before and after it; set by Run.
	Finished process.Finished

	// Note is stored with the run.
	Note string
	// Roof sets up the estimator of a roof rig (block length, epochs per
	// block, live window); the zero value takes the estimate package's
	// defaults. Force-balance rigs ignore it.
	Roof estimate.RoofConfig

	runID  uint64
	events chan acquire.Event // from the sources' goroutines to the recorder loop
	acks   chan ackRequest    // overload acknowledgements from the dashboard
}

// ackRequest asks the recorder loop to release a held overload alarm.
type ackRequest struct {
	channel, by string
	reply       chan error // buffered, 1
}

// acknowledge is the dashboard's Config.Acknowledge: it hands the request
// to the recorder loop, the only goroutine that touches the pipeline.
func (m *Main) acknowledge(ctx context.Context, channel, by string) error {
	req := ackRequest{channel: channel, by: by, reply: make(chan error, 1)}
	select {
	case m.acks <- req:
	case <-ctx.Done():
		return ctx.Err()
	}
	select {
	case err := <-req.reply:
		return err
	case <-ctx.Done():
		return ctx.Err()
	}
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
			for _, c := range r.Channels { // only the rig's channels are recorded
				src.Channels = append(src.Channels, c.Name)
			}
			out = append(out, Source{Name: s.Name, Src: src, Health: &src.Health})
		case rig.SourceSimulated:
			q := estimate.DynamicPressure(rhoKgPerM3, defaultSpeed(r.Fluid))
			sr, err := sim.ForRig(r, sim.Common{QPa: q, RateHz: s.RateHz, RhoKgPerM3: rhoKgPerM3})
			if err != nil {
				return nil, fmt.Errorf("source %q: %w", s.Name, err)
			}
			out = append(out, Source{Name: s.Name, Src: sr, Health: sr.Stats()})
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
// run is finished, the dashboard stops. The processing itself is one
// process.Recorder stepped block by block; Run only wires goroutines.
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
	m.acks = make(chan ackRequest)
	if m.Sources == nil {
		if m.Sources, err = buildSources(m.Rig, log, fluid.RhoKgPerM3, m.onEvent); err != nil {
			return err
		}
	}
	store, err := storage.Open(m.DBPath, storage.Options{})
	if err != nil {
		return err
	}
	defer store.Close()
	// Everything that can fail on the user's input is checked before the
	// run is made, so a bad port or broker setting leaves no empty run.
	dash, ln, err := m.listen(store, log)
	if err != nil {
		return err
	}
	out, err := newOutbox(m.Rig, log)
	if err != nil {
		ln.Close()
		return err
	}
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: m.Rig, RigTOML: m.RigTOML, Note: m.Note,
		Pipeline: process.Options{Roof: m.Roof}, Logger: log})
	if err != nil {
		ln.Close()
		return err
	}
	m.runID = rec.RunID()
	ctx, cancel := context.WithCancelCause(ctx)
	defer cancel(nil)
	stopDash := m.serve(ctx, dash, ln, store)
	out.start(ctx, log)
	raw := m.startSources(ctx, cancel)
	pub := publisher{dash: dash, out: out, runID: m.runID}
	log.Info("recording", "run", m.runID, "rig", m.Rig.Name, "db", m.DBPath)
	// The recorder loop: the only goroutine that touches rec. Sources
	// report events through m.events.
	tick := time.NewTicker(time.Second)
	defer tick.Stop()
	age := time.NewTicker(ageTick)
	defer age.Stop()
	var live liveGate
loop:
	for {
		select {
		case ev := <-m.events:
			rec.Event(ev)
		case req := <-m.acks:
			req.reply <- rec.AcknowledgeLoad(req.channel, req.by)
			pub.health(m.health(rec))
		case <-age.C:
			live.age(rec, pub, func() dashboard.Health { return m.health(rec) })
		case <-tick.C:
			pub.health(m.health(rec))
		case <-rec.StoreChanged():
			// A failed commit (full disk, broken file), a recovery or low
			// disk space: the writer has logged it; the dashboard shows it
			// now. The recording goes on: the writer holds the data and
			// retries, and Finish says what could not be stored.
			pub.health(m.health(rec))
			live.publish(rec, pub)
		case b, ok := <-raw:
			if !ok {
				break loop
			}
			pub.segments(rec.Block(b).Segments)
			live.block(rec, pub)
		}
	}
	pub.segments(rec.Flush())
	for len(m.events) > 0 {
		rec.Event(<-m.events)
	}
	final := m.health(rec)
	pub.health(final)
	oerr := out.close()
	runErr := context.Cause(ctx)
	if errors.Is(runErr, context.Canceled) || errors.Is(runErr, context.DeadlineExceeded) {
		runErr = nil
	}
	fin, ferr := rec.Finish(ctx, runErr, final.Sources[:len(m.Sources)])
	m.Finished = fin
	if run, err := store.Run(m.runID); err == nil {
		dash.SetRun(run)
	}
	return errors.Join(runErr, ferr, oerr, stopDash())
}

// liveGate decides when the live estimate is published: at most every
// livePeriod while blocks arrive, and on the data-age tick even when none
// does — the values stand still but their age does not — at once when a
// source falls silent or comes back (with the health, whose state changes).
type liveGate struct {
	last  time.Time
	stale bool // a source was silent past its limit at the last look
}

func (g *liveGate) age(rec *process.Recorder, pub publisher, health func() dashboard.Health) {
	now := time.Now()
	stale := anyStale(rec.Pipeline().Ages())
	if stale == g.stale && now.Sub(g.last) < livePeriod {
		return
	}
	if stale != g.stale {
		pub.health(health())
	}
	g.stale = stale
	g.publish(rec, pub)
}

func (g *liveGate) block(rec *process.Recorder, pub publisher) {
	if now := time.Now(); now.Sub(g.last) >= livePeriod {
		g.publish(rec, pub)
	}
}

func (g *liveGate) publish(rec *process.Recorder, pub publisher) {
	if l, ok := rec.Live(); ok {
		pub.live(l)
	}
	// Counted from the end of the estimate: on a machine where one takes
	// longer than livePeriod, the loop still gets livePeriod for the blocks
	// between two (and a Ctrl-C drains the queue) instead of estimating
	// after every block.
	g.last = time.Now()
}

// startSources runs every source into one bounded channel, closed when
// they have all returned. A source that fails cancels the recording.
func (m *Main) startSources(ctx context.Context, cancel context.CancelCauseFunc) <-chan acquire.Block {
	raw := make(chan acquire.Block, rawQueue)
	var wg sync.WaitGroup
	for _, s := range m.Sources {
		wg.Go(func() {
			if err := s.Src.Run(ctx, raw); err != nil {
				cancel(fmt.Errorf("source %q: %w", s.Name, err))
			}
		})
	}
	go func() { wg.Wait(); close(raw) }()
	return raw
}

// health is the recording's health now: each source, then the store edge,
// the channels and the rated loads.
func (m *Main) health(rec *process.Recorder) dashboard.Health {
	hs := make([]acquire.HealthSnapshot, 0, len(m.Sources)+1)
	for _, s := range m.Sources {
		hs = append(hs, s.Health.Snapshot(s.Name))
	}
	hs = append(hs, rec.StoreHealth())
	return dashboard.Health{Sources: hs, Channels: rec.Pipeline().Channels(), Loads: rec.Pipeline().Loads(),
		Ages: rec.Pipeline().Ages(), Values: rec.Pipeline().Values(), Store: storeHealth(rec.StoreState())}
}

// storeHealth is the dashboard's view of the store writer's state.
func storeHealth(st storage.WriterState) dashboard.StoreHealth {
	h := dashboard.StoreHealth{State: "ok", Message: st.Warning()}
	switch {
	case st.Failing || st.LostSamples > 0 || st.LostItems > 0:
		h.State = "alarm"
	case st.LowSpace:
		h.State = "warning"
	}
	return h
}

func anyStale(ages []acquire.SourceAge) bool {
	for _, a := range ages {
		if a.Stale {
			return true
		}
	}
	return false
}

// publisher hands live results to their consumers: the dashboard and the
// site outbox. Neither ever makes the recorder wait.
type publisher struct {
	dash  *dashboard.Server
	out   *outbox
	runID uint64
}

func (p publisher) segments(segs []estimate.Segment) {
	for _, seg := range segs {
		p.dash.PublishSegment(seg)
		p.out.publish("segments", dashboard.EncodeSegment(p.runID, seg))
	}
}

func (p publisher) health(h dashboard.Health) {
	p.dash.PublishHealth(h)
	p.out.publish("health", dashboard.EncodeHealth(h))
}

func (p publisher) live(l estimate.Live) {
	p.dash.PublishLive(l)
	p.out.publish("live", dashboard.EncodeLive(l))
}

// listen makes the recorder's dashboard and its listener.
func (m *Main) listen(store *storage.Store, log *slog.Logger) (*dashboard.Server, net.Listener, error) {
	// Marks are read-only here: liftyard serve edits them.
	dash, err := dashboard.New(dashboard.Config{Addr: m.Addr, Token: m.Token, Runs: store, Live: true, Acknowledge: m.acknowledge,
		Marks: newMarkStore(store), Timeline: timeliner(store), Report: reportWriter(store, ""), Compare: comparer(store), Calibrations: store, Logger: log})
	if err != nil {
		return nil, nil, err
	}
	ln, err := net.Listen("tcp", m.Addr)
	if err != nil {
		return nil, nil, fmt.Errorf("dashboard listen on %s: %w", m.Addr, err)
	}
	return dash, ln, nil
}

// serve serves the dashboard of the run being recorded until the returned
// stop is called (stop returns Serve's error).
func (m *Main) serve(ctx context.Context, dash *dashboard.Server, ln net.Listener, store *storage.Store) (stop func() error) {
	if run, err := store.Run(m.runID); err == nil {
		dash.SetRun(run)
	}
	dashErr := make(chan error, 1)
	dashCtx, stopDash := context.WithCancel(context.WithoutCancel(ctx))
	go func() { dashErr <- dash.Serve(dashCtx, ln) }()
	if m.OnReady != nil {
		m.OnReady("http://"+ln.Addr().String(), m.runID)
	}
	return func() error { stopDash(); return <-dashErr }
}

// outbox publishes live results to a site broker ([publish] in the rig
// file): a bounded outbox that never makes the recorder wait. The zero
// outbox publishes nothing.
type outbox struct {
	box            *mqtt.Outbox
	prefix, broker string
	stop           context.CancelFunc
	done           chan error
}

// newOutbox makes the site outbox of r, if it has one.
func newOutbox(r *rig.Rig, log *slog.Logger) (*outbox, error) {
	p := r.Publish
	if p == nil {
		return &outbox{}, nil
	}
	box, err := mqtt.OutboxFromRig(*p, r.Name, os.Getenv)
	if err != nil {
		return nil, err
	}
	box.Logger = log
	return &outbox{box: box, prefix: p.TopicPrefix, broker: p.Broker}, nil
}

// start runs the outbox. It outlives the recording briefly, to send the
// last segment and health (outboxGrace).
func (o *outbox) start(ctx context.Context, log *slog.Logger) {
	if o.box == nil {
		return
	}
	o.done = make(chan error, 1)
	var outCtx context.Context
	outCtx, o.stop = context.WithCancel(context.WithoutCancel(ctx))
	go func() {
		err := o.box.Run(outCtx)
		if err != nil {
			log.Error("publishing live results stopped", "broker", o.broker, "err", err)
		}
		o.done <- err
	}()
}

func (o *outbox) publish(what string, payload []byte) {
	if o.box != nil {
		o.box.Offer(o.prefix+"/"+what, payload)
	}
}

// close gives the site broker a moment to take the last results, then
// stops the outbox.
func (o *outbox) close() error {
	if o.box == nil {
		return nil
	}
	deadline := time.Now().Add(outboxGrace)
	for o.box.Pending() > 0 && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	o.stop()
	<-o.done
	return nil
}

// RunID returns the id of the run being recorded (0 before Run creates it).
func (m *Main) RunID() uint64 { return m.runID }

// runRecord is `liftyard record --rig RIG.toml [--db FILE] [--addr ADDR] [--for DURATION]`.
func runRecord(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("record", "--rig RIG.toml [--db FILE] [--addr ADDR] [--token-file FILE] [--for DURATION] [--block DURATION]",
		"record from the sources of a rig file, with the live dashboard", stdout)
	rigPath := fs.String("rig", "", "rig file (TOML) describing sources, channels and lift roles")
	db := fs.String("db", "liftyard.db", "bbolt store file")
	addr := fs.String("addr", "127.0.0.1:8470", "dashboard listen address")
	tokenOf := tokenFlags(fs)
	dur := fs.Duration("for", 0, "stop after this long (0: until Ctrl-C)")
	block := fs.Duration("block", 0, "roof rigs: length of one result block (default 10m, common practice)")
	verbose := fs.Bool("v", false, "log progress to stderr")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	if *rigPath == "" {
		return usagef("--rig is required")
	}
	token, err := tokenOf(*addr, stderr)
	if err != nil {
		return err
	}
	r, data, err := readRig(*rigPath)
	if err != nil {
		return err
	}
	if *block < 0 || (*block > 0 && r.Kind != rig.KindRoof) {
		return usagef("--block %s: a positive duration, for roof rigs only", *block)
	}
	m := &Main{Rig: r, RigTOML: string(data), DBPath: *db, Addr: *addr, Token: token, Logger: newLogger(stderr, *verbose),
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
	printDrift(stdout, m.Rig, m.Finished)
	return nil
}

// printDrift reports the zero drift of a finished run of rig r.
func printDrift(w io.Writer, r *rig.Rig, fin process.Finished) {
	if fin.ZeroNote != "" {
		fmt.Fprintf(w, "  %s\n", fin.ZeroNote)
	}
	for _, d := range fin.Drift {
		ch, _ := r.Channel(d.Channel)
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
