package dashboard

import (
	"fmt"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"
)

// SubscriberBuffer is the number of events queued for one live-stream
// client. At the estimator's usual 10 updates per second it covers a few
// seconds of a browser tab that is busy or on a slow link; a client that
// falls further behind is disconnected (and reconnects by itself with a
// fresh snapshot) instead of slowing the producer.
const SubscriberBuffer = 64

// maxKeptSegments bounds the segments of the current run that the hub keeps
// for clients that connect late. A run with more steady segments than this
// still streams them all; only the replay on connect is cut to the newest.
const maxKeptSegments = 10000

// trendKeep is how much live history the hub keeps for a page that opens
// (or reloads) mid-run: its trends are full at once. 5 minutes at the
// recorder's 5 estimates per second is 1500 points, about 150 kB of JSON.
const trendKeep = 5 * time.Minute

// trendMax bounds the kept points whatever the rate of estimates.
const trendMax = 3000

// trendPoint is one live estimate on the trends: data time, q, α and C_L
// with their U95 (null where not given, e.g. C_L with the flow off).
type trendPoint struct {
	T           time.Time `json:"t"`
	QPa         num       `json:"q_pa"`
	QU95Pa      num       `json:"q_u95_pa"`
	AlphaDeg    num       `json:"alpha_deg"`
	AlphaU95Deg num       `json:"alpha_u95_deg"`
	CL          num       `json:"cl"`
	CLU95       num       `json:"cl_u95"`
}

func trendPointOf(l liveJSON) trendPoint {
	return trendPoint{T: l.T, QPa: l.QPa, QU95Pa: l.QU95Pa, AlphaDeg: l.AlphaDeg, AlphaU95Deg: l.AlphaU95Deg, CL: l.CL, CLU95: l.CLU95}
}

// event is one server-sent event: a name and a one-line JSON body.
type event struct {
	seq  uint64
	name string // live, segment, health, run
	data []byte
}

// subscriber is one live-stream client. The hub closes gone when it drops
// the subscriber; ch is never closed, so a send can never panic.
type subscriber struct {
	ch   chan event
	gone chan struct{}
}

// snapshot is the state a client receives when it connects, before any
// queued event: the latest run, health and live estimate and the segments
// it has not seen yet.
type snapshot struct {
	run, live, health *event
	history           *event // the kept trend points, oldest first
	segments          []event
}

// hub fans events out to live-stream subscribers.
//
// Concurrency: every method may be called from any goroutine. publish never
// blocks: it holds the mutex only to copy the event into each subscriber's
// buffered channel with a non-blocking send, and it drops (and counts) a
// subscriber whose buffer is full.
type hub struct {
	epoch string // distinguishes event ids of this process from an earlier one

	mu       sync.Mutex
	seq      uint64
	subs     map[*subscriber]struct{}
	run      *event
	runID    uint64
	hasRun   bool
	live     *event
	health   *event
	segments []event
	trend    []trendPoint // the last trendKeep of live estimates, by data time

	dropped atomic.Uint64 // subscribers disconnected because their buffer was full

	shutdownOnce sync.Once
	shutdown     chan struct{} // closed when the HTTP server shuts down
}

func newHub(epoch string) *hub {
	return &hub{
		epoch:    epoch,
		subs:     map[*subscriber]struct{}{},
		shutdown: make(chan struct{}),
	}
}

// id formats an event id for the SSE "id:" field.
func (h *hub) id(seq uint64) string { return h.epoch + "-" + strconv.FormatUint(seq, 10) }

// parseID returns the sequence number of an event id from this process, or
// 0 when the id comes from another process (or is malformed).
func (h *hub) parseID(id string) uint64 {
	epoch, n, ok := strings.Cut(id, "-")
	if !ok || epoch != h.epoch {
		return 0
	}
	seq, err := strconv.ParseUint(n, 10, 64)
	if err != nil {
		return 0
	}
	return seq
}

// publish records ev as the latest of its kind and queues it for every
// subscriber. It never blocks.
func (h *hub) publish(name string, data []byte) {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.publishLocked(name, data)
}

func (h *hub) publishLocked(name string, data []byte) {
	h.seq++
	ev := event{seq: h.seq, name: name, data: data}
	switch name {
	case "live":
		h.live = &ev
	case "health":
		h.health = &ev
	case "run":
		h.run = &ev
	case "segment":
		if len(h.segments) >= maxKeptSegments {
			h.segments = append(h.segments[:0], h.segments[len(h.segments)-maxKeptSegments+1:]...)
		}
		h.segments = append(h.segments, ev)
	default:
		panic(fmt.Sprintf("dashboard: unknown event name %q", name)) // a programming error
	}
	for s := range h.subs {
		select {
		case s.ch <- ev:
		default:
			delete(h.subs, s)
			close(s.gone)
			h.dropped.Add(1)
		}
	}
}

// publishLive publishes a live estimate and keeps its point for the
// trends. An estimate whose data time has not moved (a silent source: the
// recorder republishes it so that its age shows) adds no point.
func (h *hub) publishLive(data []byte, p trendPoint) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if n := len(h.trend); n > 0 && !p.T.After(h.trend[n-1].T) {
		if p.T.Before(h.trend[n-1].T) {
			h.trend = h.trend[:0] // the clock went back: a device reset
		} else {
			h.publishLocked("live", data)
			return
		}
	}
	cut := p.T.Add(-trendKeep)
	i := 0
	for i < len(h.trend) && (h.trend[i].T.Before(cut) || len(h.trend)-i >= trendMax) {
		i++
	}
	if i > 0 {
		h.trend = append(h.trend[:0], h.trend[i:]...)
	}
	h.trend = append(h.trend, p)
	h.publishLocked("live", data)
}

// history returns the kept trend points as JSON.
func (h *hub) history() []byte {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.historyLocked()
}

func (h *hub) historyLocked() []byte {
	pts := h.trend
	if pts == nil {
		pts = []trendPoint{}
	}
	return mustJSON(pts)
}

// setRun publishes the run event. A run with a new id starts afresh: the
// latest live estimate, health and the kept segments belong to the old run
// and are forgotten.
func (h *hub) setRun(id uint64, data []byte) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if !h.hasRun || h.runID != id {
		h.live, h.health, h.segments, h.trend = nil, nil, nil, nil
	}
	h.hasRun, h.runID = true, id
	h.publishLocked("run", data)
}

// currentRunID returns the id of the run set last.
func (h *hub) currentRunID() (uint64, bool) {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.runID, h.hasRun
}

// latestLive returns the JSON of the latest live estimate, or nil.
func (h *hub) latestLive() []byte {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.live == nil {
		return nil
	}
	return h.live.data
}

// latestHealth returns the JSON of the latest health report, or nil.
func (h *hub) latestHealth() []byte {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.health == nil {
		return nil
	}
	return h.health.data
}

// subscribe registers a subscriber and returns it together with the state
// to send first. Segments with a sequence number at or below after are left
// out of the snapshot (the client saw them before it reconnected).
// Subscribing and taking the snapshot happen under one lock, so the client
// misses nothing and sees nothing twice.
func (h *hub) subscribe(after uint64) (*subscriber, snapshot) {
	s := &subscriber{ch: make(chan event, SubscriberBuffer), gone: make(chan struct{})}
	h.mu.Lock()
	defer h.mu.Unlock()
	h.subs[s] = struct{}{}
	snap := snapshot{run: h.run, live: h.live, health: h.health}
	if len(h.trend) > 0 {
		snap.history = &event{seq: h.seq, name: "history", data: h.historyLocked()}
	}
	for _, ev := range h.segments {
		if ev.seq > after {
			snap.segments = append(snap.segments, ev)
		}
	}
	return s, snap
}

// unsubscribe removes s; it does nothing if the hub already dropped s.
func (h *hub) unsubscribe(s *subscriber) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if _, ok := h.subs[s]; ok {
		delete(h.subs, s)
		close(s.gone)
	}
}

// count returns the number of connected subscribers.
func (h *hub) count() int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return len(h.subs)
}

// close ends every stream; it may be called more than once.
func (h *hub) close() { h.shutdownOnce.Do(func() { close(h.shutdown) }) }
