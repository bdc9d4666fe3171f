package dashboard

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"net/http"
	"strconv"
	"sync"
	"sync/atomic"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/report"
	"liftyard/rig"
	"liftyard/storage"
)

// DefaultAddr is the listen address when Config.Addr is empty: loopback only.
const DefaultAddr = "127.0.0.1:8470"

// MinTokenLen is the shortest token accepted off loopback. A shorter token
// is guessable by anyone on the yard's network.
const MinTokenLen = 16

// shutdownTimeout bounds the graceful shutdown in Serve. Live streams end at
// once (RegisterOnShutdown); this only waits for page and API requests.
const shutdownTimeout = 3 * time.Second

// RunStore reads recorded runs. *storage.Store implements it.
//
// Its methods may be called concurrently from HTTP handlers. Run and
// Segments return an error wrapping storage.ErrNotFound when no run has the
// id (the dashboard answers 404). The returned slices belong to the caller.
type RunStore interface {
	Runs() ([]storage.Run, error)
	Run(id uint64) (storage.Run, error)
	Segments(id uint64) ([]estimate.Segment, error)
}

// Config configures a Server. Each capability of the dashboard is one
// field: nil (or false) means off, and then the pages do not offer it (no
// link, no form) and its routes answer 404 with a message that names the
// capability. A zero Config serves an empty run list on DefaultAddr with the
// default logger; cmd/liftyard wires the capabilities of each verb.
type Config struct {
	// Addr is the listen address, "host:port". Empty means DefaultAddr. When
	// the host is not a loopback address (127.0.0.0/8, ::1, "localhost"),
	// Token is required.
	Addr string

	// Token is the shared secret that clients must present off loopback,
	// as "Authorization: Bearer TOKEN" or by opening /?token=TOKEN once in
	// the browser (which sets a cookie). At least MinTokenLen characters.
	// Ignored on loopback. Never logged.
	Token string

	// Runs reads recorded runs for the run list, run pages and API. Nil
	// serves the current run (SetRun) only.
	Runs RunStore

	// Live says that a recording feeds this dashboard through SetRun and the
	// Publish methods: the live page, GET /api/v1/live, /api/v1/health and
	// /api/v1/stream. False (liftyard serve): the live page says no run is
	// recording, the navigation has no Live link and the live routes
	// answer 404.
	Live bool

	// Marks reads and writes the user marks of stored runs. Nil: run pages
	// have no marks section and the marks routes answer 404.
	Marks MarkStore

	// ApplyMarks recomputes run runID's segments from its stored raw
	// blocks with its marks (the automatic steady test when it has none)
	// and stores them. It returns the count of segments and the 1-based
	// numbers of marks that gave none. It may be called concurrently with
	// reads of the store; the dashboard never calls it for a run that is
	// recording, nor twice at once. Marks may be changed only when both
	// Marks and ApplyMarks are set; with Marks alone they are shown
	// read-only.
	ApplyMarks func(ctx context.Context, runID uint64) (MarksApplied, error)

	// Timeline builds a stored run's timeline — q, α and C_L (the kind's
	// quantities) against wall time, downsampled to at most points points
	// — from its raw blocks through the pipeline (process.RunTimeline). It
	// may be called concurrently; the dashboard caches each ended run's
	// result. Nil: the run page has no timeline and
	// GET /api/v1/runs/{id}/timeline answers 404.
	Timeline TimelineFunc

	// Report writes the printable report of run runID to w as one
	// self-contained HTML page (inline CSS and SVG; no scripts, images or
	// external files: GET /runs/{id}/report serves it under a CSP that
	// allows nothing else). It may be called concurrently. For an unknown
	// run it returns an error wrapping storage.ErrNotFound (404). On any
	// error w may hold part of a page; the dashboard discards it. Nil: run
	// pages have no report link and the route answers 404.
	Report func(w io.Writer, runID uint64) error

	// Calibrations reads stored calibration records for the calibration
	// pages and API. Nil: no Calibrations link, and those routes answer
	// 404.
	Calibrations CalibrationStore

	// Compare builds run against run for runIDs, the first the reference
	// (report.BuildComparison over a store): GET /compare, its plots and
	// GET /api/v1/compare. It may be called concurrently. An unknown run
	// gives an error wrapping storage.ErrNotFound (404), a list that cannot
	// be compared report.ErrCompareUsage (400). Nil: the runs page has no
	// compare form and those routes answer 404.
	Compare func(runIDs []uint64) (*report.Comparison, error)

	// Acknowledge releases the held overload alarm of a rated channel and
	// stores the acknowledgement with the run being recorded (by: who or
	// where from). It may be called concurrently and returns when the
	// recorder has done it or ctx is done. An error wrapping
	// process.ErrNoAlarm means none was held (409). Nil: the live page
	// offers no acknowledgement and POST
	// /api/v1/loads/{channel}/acknowledge answers 404.
	Acknowledge func(ctx context.Context, channel, by string) error

	// Logger receives request errors (the detail that a 500 response does
	// not show) and dropped stream clients. Nil means slog.Default().
	Logger *slog.Logger

	// Now gives the wall-clock time, for the duration of a run that is still
	// recording. Nil means time.Now.
	Now func() time.Time
}

// Stats counts what the live stream did.
type Stats struct {
	Subscribers  int    // live-stream clients connected now
	Disconnected uint64 // clients dropped because they fell SubscriberBuffer events behind
}

// Server is the dashboard: pages, JSON API and the live stream.
//
// The Publish methods and SetRun may be called from any goroutine, at any
// time (also before Serve); none of them blocks on a client.
type Server struct {
	token     string
	store     RunStore
	live      bool
	marks     MarkStore
	apply     func(ctx context.Context, runID uint64) (MarksApplied, error)
	timeline  TimelineFunc
	report    func(w io.Writer, runID uint64) error
	cals      CalibrationStore
	compare   func(runIDs []uint64) (*report.Comparison, error)
	ack       func(ctx context.Context, channel, by string) error
	log       *slog.Logger
	now       func() time.Time
	hub       *hub
	pages     *pages
	polars    *polarCache
	timelines *timelineCache
	handler   http.Handler
	loopback  atomic.Bool  // bound to loopback: check Host, no token
	port      atomic.Int64 // port for the Host check; 0 = any (not yet known)
	current   atomic.Pointer[storage.Run]

	// curSegs are the segments published for the current run, kept as
	// estimate made them (the run page, API and plot of a run that is
	// still recording read them).
	curMu   sync.Mutex
	curRun  uint64
	curSegs []estimate.Segment
}

// New checks cfg and builds a Server. It parses the page templates, so a
// broken template fails here, not on the first request.
func New(cfg Config) (*Server, error) {
	if cfg.Addr == "" {
		cfg.Addr = DefaultAddr
	}
	host, portStr, err := net.SplitHostPort(cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("dashboard address %q: %w (write host:port, e.g. %s)", cfg.Addr, err, DefaultAddr)
	}
	port, err := strconv.ParseUint(portStr, 10, 16)
	if err != nil {
		return nil, fmt.Errorf("dashboard address %q: port %q is not a number from 0 to 65535", cfg.Addr, portStr)
	}
	loop := isLoopbackHost(host)
	if !loop {
		if cfg.Token == "" {
			return nil, fmt.Errorf("dashboard address %q is not loopback: a token is required (or bind to %s)", cfg.Addr, DefaultAddr)
		}
		if len(cfg.Token) < MinTokenLen {
			return nil, fmt.Errorf("dashboard token is %d characters: use at least %d", len(cfg.Token), MinTokenLen)
		}
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.Default()
	}
	if cfg.Now == nil {
		cfg.Now = time.Now
	}
	pg, err := parsePages()
	if err != nil {
		return nil, err
	}
	s := &Server{
		token:     cfg.Token,
		store:     cfg.Runs,
		live:      cfg.Live,
		marks:     cfg.Marks,
		apply:     cfg.ApplyMarks,
		report:    cfg.Report,
		cals:      cfg.Calibrations,
		compare:   cfg.Compare,
		ack:       cfg.Acknowledge,
		log:       cfg.Logger.With("component", "dashboard"),
		now:       cfg.Now,
		hub:       newHub(strconv.FormatInt(cfg.Now().UnixNano(), 36)),
		pages:     pg,
		polars:    newPolarCache(),
		timeline:  cfg.Timeline,
		timelines: newTimelineCache(),
	}
	s.loopback.Store(loop)
	s.port.Store(int64(port))
	s.handler = s.routes()
	return s, nil
}

// Handler returns the dashboard's handler, with the Host, token and
// cross-origin checks in front. Serve uses it; tests may mount it on an
// httptest.Server.
func (s *Server) Handler() http.Handler { return s.handler }

// Stats returns the live-stream counters.
func (s *Server) Stats() Stats {
	return Stats{Subscribers: s.hub.count(), Disconnected: s.hub.dropped.Load()}
}

// Serve serves on ln until ctx is done, then shuts down gracefully: live
// streams end at once, other requests get up to 3 s. It returns nil after a
// shutdown caused by ctx, or the error that stopped serving. Serve may be
// called once.
func (s *Server) Serve(ctx context.Context, ln net.Listener) error {
	if tcp, ok := ln.Addr().(*net.TCPAddr); ok {
		if !tcp.IP.IsLoopback() {
			if len(s.token) < MinTokenLen {
				return fmt.Errorf("dashboard listener %s is not loopback: a token of at least %d characters is required", tcp, MinTokenLen)
			}
			s.loopback.Store(false)
		}
		s.port.Store(int64(tcp.Port))
	}
	srv := &http.Server{
		Handler:           s.handler,
		ReadHeaderTimeout: 5 * time.Second,
		ReadTimeout:       30 * time.Second, // bodies are tiny; WriteTimeout stays unset (it cuts live streams)
		IdleTimeout:       2 * time.Minute,
		MaxHeaderBytes:    64 << 10,
		ErrorLog:          slog.NewLogLogger(s.log.Handler(), slog.LevelWarn),
		BaseContext:       func(net.Listener) context.Context { return context.WithoutCancel(ctx) },
	}
	srv.RegisterOnShutdown(s.hub.close)
	errc := make(chan error, 1)
	go func() { errc <- srv.Serve(ln) }()
	select {
	case err := <-errc:
		s.hub.close()
		return fmt.Errorf("dashboard: %w", err)
	case <-ctx.Done():
	}
	sctx, cancel := context.WithTimeout(context.Background(), shutdownTimeout)
	defer cancel()
	err := srv.Shutdown(sctx)
	if err != nil {
		s.log.Warn("dashboard shutdown timed out; closing connections", "err", err)
		srv.Close()
	}
	if serr := <-errc; serr != nil && !errors.Is(serr, http.ErrServerClosed) {
		return fmt.Errorf("dashboard: %w", serr)
	}
	return nil
}

// SetRun announces the run being recorded (or updates its metadata). A new
// run id clears the live estimate, health and segments of the previous run.
func (s *Server) SetRun(r storage.Run) {
	rc := r
	s.current.Store(&rc)
	s.curMu.Lock()
	if s.curRun != r.ID {
		s.curRun, s.curSegs = r.ID, nil
	}
	s.curMu.Unlock()
	s.hub.setRun(r.ID, mustJSON(toRunJSON(r, s.now())))
}

// PublishLive sends a moving-window estimate to every live client and keeps
// it for GET /api/v1/live. It never blocks.
func (s *Server) PublishLive(l estimate.Live) {
	lj := toLiveJSON(l)
	s.hub.publishLive(mustJSON(lj), trendPointOf(lj))
}

// PublishSegment sends a completed steady segment of the current run to
// every live client. It never blocks.
func (s *Server) PublishSegment(seg estimate.Segment) {
	id, _ := s.hub.currentRunID()
	s.curMu.Lock()
	if len(s.curSegs) >= maxKeptSegments {
		s.curSegs = append(s.curSegs[:0], s.curSegs[1:]...)
	}
	s.curSegs = append(s.curSegs, seg)
	s.curMu.Unlock()
	s.hub.publish("segment", mustJSON(toSegmentJSON(id, seg)))
}

// Health is what the recorder knows about its inputs: each source's
// counters, each channel's rate, gaps and saturation, and each rated
// channel's load against its capacity.
type Health struct {
	// State is the worst of it: "alarm" (an overload alarm is held),
	// "stale" (a source is silent past its limit), "warning" (a channel at
	// 80 % of its capacity) or "ok". PublishHealth and EncodeHealth set it.
	State    string                   `json:"state"`
	Sources  []acquire.HealthSnapshot `json:"sources"`
	Channels []acquire.ChannelHealth  `json:"channels"`
	Loads    []calibrate.LoadHealth   `json:"loads"`
	// Ages is each source's data-age clock (in JSON as "ages", durations
	// in seconds).
	Ages []acquire.SourceAge `json:"-"`
	// Values is each channel's latest value (in JSON as "values", in
	// display units: ° for angles, °C for temperatures, else SI).
	Values []process.ChannelValue `json:"-"`
	// Store is the state of the store the run is written to; the live
	// page shows its message as a banner.
	Store StoreHealth `json:"store"`
}

// StoreHealth is the state of the store a run is written to: State "alarm"
// while commits fail or after data was lost, "warning" when disk space is
// low, "ok" (or empty) otherwise; Message says it for people.
type StoreHealth struct {
	State   string `json:"state"`
	Message string `json:"message,omitempty"`
}

// healthJSON is the wire form of a Health.
type healthJSON struct {
	Health
	Ages   []sourceAgeJSON    `json:"ages"`
	Values []channelValueJSON `json:"values"`
}

// channelValueJSON is one channel's latest value in its display unit.
type channelValueJSON struct {
	Channel string `json:"channel"`
	Value   num    `json:"value"`
	Unit    string `json:"unit"`
}

// valuesJSON converts channel values to display units, once, here:
// radians to degrees, kelvin to degrees Celsius.
func valuesJSON(vs []process.ChannelValue) []channelValueJSON {
	out := make([]channelValueJSON, len(vs))
	for i, v := range vs {
		x, unit := v.ValueSI, v.Quantity.SIUnit()
		switch v.Quantity {
		case rig.QuantityAngle:
			x, unit = rig.Deg(x), "°"
		case rig.QuantityTemperature:
			x, unit = x-273.15, "°C" // ITS-90: t/°C = T/K − 273.15
		case rig.QuantityRotation:
			x, unit = x*60/(2*math.Pi), "rpm"
		}
		out[i] = channelValueJSON{Channel: v.Channel, Value: num(x), Unit: unit}
	}
	return out
}

// sourceAgeJSON is one source's data-age clock as the API shows it.
type sourceAgeJSON struct {
	Source       string    `json:"source"`
	LastBlock    time.Time `json:"last_block,omitzero"`
	AgeS         num       `json:"age_s"`
	LimitS       num       `json:"limit_s"`
	BlockPeriodS num       `json:"block_period_s"` // null until two blocks arrived
	Stale        bool      `json:"stale"`
}

// agesJSON converts data-age clocks to their wire form.
func agesJSON(as []acquire.SourceAge) []sourceAgeJSON {
	out := make([]sourceAgeJSON, len(as))
	for i, a := range as {
		p := num(a.BlockPeriod.Seconds())
		if a.BlockPeriod <= 0 {
			p = num(math.NaN())
		}
		out[i] = sourceAgeJSON{Source: a.Source, LastBlock: a.LastBlock.UTC(), AgeS: num(a.Age.Seconds()),
			LimitS: num(a.Limit.Seconds()), BlockPeriodS: p, Stale: a.Stale}
	}
	return out
}

// judged is the wire form of h with its State and empty lists filled in.
func (h Health) judged() healthJSON {
	if h.Sources == nil {
		h.Sources = []acquire.HealthSnapshot{}
	}
	if h.Channels == nil {
		h.Channels = []acquire.ChannelHealth{}
	}
	if h.Loads == nil {
		h.Loads = []calibrate.LoadHealth{}
	}
	rank := map[string]int{"ok": 0, "warning": 1, "stale": 2, "alarm": 3}
	h.State = "ok"
	worse := func(st string) {
		if rank[st] > rank[h.State] {
			h.State = st
		}
	}
	for _, l := range h.Loads {
		worse(string(l.State))
	}
	for _, a := range h.Ages {
		if a.Stale {
			worse("stale")
		}
	}
	if h.Store.State == "" {
		h.Store.State = "ok"
	}
	worse(h.Store.State)
	return healthJSON{Health: h, Ages: agesJSON(h.Ages), Values: valuesJSON(h.Values)}
}

// PublishHealth sends the health of the inputs to every live client and
// keeps it for GET /api/v1/health. It never blocks.
func (s *Server) PublishHealth(h Health) {
	s.hub.publish("health", mustJSON(h.judged()))
}

// mustJSON marshals the dashboard's own wire types, which cannot fail: num
// turns NaN and ±Inf into null, and no type holds a channel or func.
func mustJSON(v any) []byte {
	b, err := json.Marshal(v)
	if err != nil {
		panic(fmt.Sprintf("dashboard: marshal %T: %v", v, err)) // broken invariant, caught by tests
	}
	return b
}

// LoopbackAddr reports whether a listen address "host:port" is loopback
// only (where no token is asked for). An address that does not parse is
// not.
func LoopbackAddr(addr string) bool {
	host, _, err := net.SplitHostPort(addr)
	return err == nil && isLoopbackHost(host)
}

// isLoopbackHost reports whether a listen host is loopback-only.
func isLoopbackHost(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}
