package dashboard

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"net/http"
	"slices"
	"strconv"
	"time"

	"liftyard/estimate"
	"liftyard/process"
	"liftyard/report"
	"liftyard/rig"
	"liftyard/storage"
)

// pingInterval is how often an idle live stream sends a comment line, so
// proxies keep the connection and a dead client is noticed by a failed
// write.
const pingInterval = 15 * time.Second

// streamWriteTimeout bounds one write to a live-stream client. It replaces
// http.Server.WriteTimeout, which would cut every stream after a fixed time.
const streamWriteTimeout = 10 * time.Second

// retryMillis is the reconnect delay that the live stream asks browsers for.
const retryMillis = 2000

// errBadRequest marks a request the client must fix (HTTP 400).
var errBadRequest = errors.New("bad request")

func (s *Server) routes() http.Handler {
	mux := http.NewServeMux()
	static, err := fs.Sub(webFS, "web/static")
	if err != nil {
		panic(err) // the embedded tree is fixed at build time
	}
	mux.Handle("GET /static/", http.StripPrefix("/static/", http.FileServerFS(static)))
	mux.HandleFunc("GET /{$}", s.livePage) // without the live feed: says no run is recording
	mux.HandleFunc("GET /runs", s.runsPage)
	mux.HandleFunc("GET /runs/{id}", s.runPage)
	mux.HandleFunc("GET /runs/{id}/polar.svg", s.plotSVG("polar.svg", report.LiftPlotSVG)) // plots.go
	mux.HandleFunc("GET /runs/{id}/zones.svg", s.plotSVG("zones.svg", report.ZonePlotSVG))
	mux.HandleFunc("GET /runs/{id}/taps.svg", s.plotSVG("taps.svg", tapMapSVG))
	mux.HandleFunc("POST /logout", s.logout)
	// Each capability's routes answer 404 when it is off (Config).
	c := s.caps()
	mux.HandleFunc("GET /runs/{id}/report", s.need(c.Report, offReport, false, s.runReport)) // report.go
	mux.HandleFunc("GET /api/v1/live", s.need(c.Live, offLive, true, s.apiLive))
	mux.HandleFunc("GET /api/v1/health", s.need(c.Live, offLive, true, s.apiHealth))
	mux.HandleFunc("GET /api/v1/stream", s.need(c.Live, offLive, true, s.stream))
	mux.HandleFunc("GET /api/v1/live/history", s.need(c.Live, offLive, true, s.apiHistory))
	mux.HandleFunc("POST /api/v1/loads/{channel}/acknowledge", s.need(c.Live && s.ack != nil, offAck, true, s.acknowledge))
	mux.HandleFunc("GET /api/v1/runs", s.apiRuns)
	mux.HandleFunc("GET /api/v1/runs/{id}", s.apiRun)
	mux.HandleFunc("GET /api/v1/runs/{id}/segments", s.apiSegments)
	// Calibration records (calibration.go).
	mux.HandleFunc("GET /calibrations", s.need(c.Calibrations, offCalibrations, false, s.calibrationsPage))
	mux.HandleFunc("GET /calibrations/{id}", s.need(c.Calibrations, offCalibrations, false, s.calibrationPage))
	mux.HandleFunc("GET /calibrations/{id}/fit.svg", s.need(c.Calibrations, offCalibrations, false, s.calibrationFitSVG))
	mux.HandleFunc("GET /calibrations/{id}/residuals.svg", s.need(c.Calibrations, offCalibrations, false, s.calibrationResidualSVG))
	mux.HandleFunc("GET /api/v1/calibrations", s.need(c.Calibrations, offCalibrations, true, s.apiCalibrations))
	mux.HandleFunc("GET /api/v1/calibrations/{id}", s.need(c.Calibrations, offCalibrations, true, s.apiCalibration))
	// Run against run (compare.go).
	mux.HandleFunc("GET /compare", s.need(c.Compare, offCompare, false, s.comparePage))
	mux.HandleFunc("GET /compare/lift.svg", s.need(c.Compare, offCompare, false, s.compareSVG(false)))
	mux.HandleFunc("GET /compare/drag.svg", s.need(c.Compare, offCompare, false, s.compareSVG(true)))
	mux.HandleFunc("GET /api/v1/compare", s.need(c.Compare, offCompare, true, s.apiCompare))
	// User marks (marks.go): shown with Config.Marks, changed only with
	// Config.ApplyMarks too (editMarks answers 405 without it).
	mux.HandleFunc("GET /api/v1/runs/{id}/marks", s.need(c.Marks, offMarks, true, s.apiMarks))
	mux.HandleFunc("POST /api/v1/runs/{id}/marks", s.need(c.Marks, offMarks, true, s.addMark))
	mux.HandleFunc("POST /api/v1/runs/{id}/marks/{n}/delete", s.need(c.Marks, offMarks, true, s.deleteMark))
	mux.HandleFunc("POST /api/v1/runs/{id}/marks/clear", s.need(c.Marks, offMarks, true, s.clearMarks))
	mux.HandleFunc("POST /api/v1/runs/{id}/marks/apply", s.need(c.Marks, offMarks, true, s.applyMarks))
	mux.HandleFunc("GET /api/v1/runs/{id}/timeline", s.need(c.Timeline, offTimeline, true, s.apiTimeline)) // timeline.go
	return s.secure(s.withErrorPages(mux))
}

// isNotFound reports whether a RunStore error means "no such run".
func isNotFound(err error) bool { return errors.Is(err, storage.ErrNotFound) }

// fail maps err to a status: 400 for errBadRequest, 404 for a missing run,
// 500 otherwise with the detail in the log only. API paths get a JSON body.
func (s *Server) fail(w http.ResponseWriter, r *http.Request, err error, api bool) {
	status, msg := http.StatusInternalServerError, "internal error; the liftyard log has the details"
	switch {
	case errors.Is(err, errBadRequest):
		status, msg = http.StatusBadRequest, err.Error()
	case isNotFound(err):
		status, msg = http.StatusNotFound, "no such run"
	default:
		s.log.Error("request failed", "method", r.Method, "path", r.URL.Path, "err", err)
	}
	if api {
		writeJSONStatus(w, status, map[string]string{"error": msg})
		return
	}
	s.errorPage(w, r, status, msg)
}

func writeJSONStatus(w http.ResponseWriter, status int, v any) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(status)
	json.NewEncoder(w).Encode(v) // the client may be gone; nothing to do about it
}

func writeJSONBytes(w http.ResponseWriter, b []byte) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.Write(b)
	w.Write([]byte("\n"))
}

// runID parses the {id} path segment.
func runID(r *http.Request) (uint64, error) {
	v := r.PathValue("id")
	id, err := strconv.ParseUint(v, 10, 64)
	if err != nil || id == 0 {
		return 0, fmt.Errorf("%w: run id %q is not a positive whole number", errBadRequest, v)
	}
	return id, nil
}

// runs lists the recorded runs, newest first, plus the current run when the
// store does not have it (yet, or no store).
func (s *Server) runs() ([]storage.Run, error) {
	var out []storage.Run
	if s.store != nil {
		rs, err := s.store.Runs()
		if err != nil {
			return nil, fmt.Errorf("list runs: %w", err)
		}
		out = rs
	}
	if cur := s.current.Load(); cur != nil && !slices.ContainsFunc(out, func(r storage.Run) bool { return r.ID == cur.ID }) {
		out = append(out, *cur)
	}
	slices.SortStableFunc(out, func(a, b storage.Run) int {
		switch {
		case a.ID > b.ID:
			return -1
		case a.ID < b.ID:
			return 1
		}
		return 0
	})
	return out, nil
}

// run returns one run and its segments as the pages and API show them.
func (s *Server) run(id uint64) (storage.Run, []segmentJSON, error) {
	r, segs, err := s.runSegments(id)
	if err != nil {
		return storage.Run{}, nil, err
	}
	return r, segmentsOf(id, rig.Kind(r.Kind), segs), nil
}

// runSegments returns one run and its segments. The current run's segments
// are the ones published to this dashboard (the store may not have
// committed them yet); its metadata comes from the store when it has it.
func (s *Server) runSegments(id uint64) (storage.Run, []estimate.Segment, error) {
	if cur := s.current.Load(); cur != nil && cur.ID == id {
		r := *cur
		if s.store != nil {
			if sr, err := s.store.Run(id); err == nil {
				r = sr
			}
		}
		s.curMu.Lock()
		defer s.curMu.Unlock()
		if s.curRun != id {
			return r, nil, nil
		}
		return r, slices.Clone(s.curSegs), nil
	}
	if s.store == nil {
		return storage.Run{}, nil, fmt.Errorf("run %d: %w", id, storage.ErrNotFound)
	}
	r, err := s.store.Run(id)
	if err != nil {
		return storage.Run{}, nil, fmt.Errorf("read run %d: %w", id, err)
	}
	ss, err := s.store.Segments(id)
	if err != nil {
		return storage.Run{}, nil, fmt.Errorf("read segments of run %d: %w", id, err)
	}
	return r, ss, nil
}

func (s *Server) apiLive(w http.ResponseWriter, r *http.Request) {
	b := s.hub.latestLive()
	if b == nil {
		writeJSONStatus(w, http.StatusServiceUnavailable, map[string]string{"error": "no live estimate yet: no run is recording, or the first window is not full"})
		return
	}
	writeJSONBytes(w, b)
}

// apiHistory is the kept trend history of the run being recorded (the
// last 5 minutes of live estimates), oldest first.
func (s *Server) apiHistory(w http.ResponseWriter, r *http.Request) {
	writeJSONBytes(w, s.hub.history())
}

// ackTimeout bounds the wait for the recorder to take an acknowledgement.
const ackTimeout = 5 * time.Second

// acknowledge releases a held overload alarm (Config.Acknowledge); the
// recorder stores it as an event with the run.
func (s *Server) acknowledge(w http.ResponseWriter, r *http.Request) {
	ch := r.PathValue("channel")
	ctx, cancel := context.WithTimeout(r.Context(), ackTimeout)
	defer cancel()
	err := s.ack(ctx, ch, "dashboard client "+r.RemoteAddr)
	switch {
	case err == nil:
		writeJSONStatus(w, http.StatusOK, map[string]string{"acknowledged": ch})
	case errors.Is(err, process.ErrNoAlarm):
		writeJSONStatus(w, http.StatusConflict, map[string]string{"error": err.Error()})
	default:
		s.fail(w, r, err, true)
	}
}

func (s *Server) apiHealth(w http.ResponseWriter, r *http.Request) {
	b := s.hub.latestHealth()
	if b == nil {
		writeJSONStatus(w, http.StatusServiceUnavailable, map[string]string{"error": "no health report yet: no run is recording"})
		return
	}
	writeJSONBytes(w, b)
}

func (s *Server) apiRuns(w http.ResponseWriter, r *http.Request) {
	rs, err := s.runs()
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	now := s.now()
	out := make([]runJSON, len(rs))
	for i, run := range rs {
		out[i] = toRunJSON(run, now)
	}
	writeJSONStatus(w, http.StatusOK, out)
}

func (s *Server) apiRun(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	run, _, err := s.run(id)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	writeJSONStatus(w, http.StatusOK, toRunJSON(run, s.now()))
}

func (s *Server) apiSegments(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	_, segs, err := s.run(id)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	if segs == nil {
		segs = []segmentJSON{}
	}
	writeJSONStatus(w, http.StatusOK, segs)
}

// logout clears the token cookie (off loopback); it is a POST so that no
// other site can trigger it.
func (s *Server) logout(w http.ResponseWriter, r *http.Request) {
	http.SetCookie(w, &http.Cookie{Name: tokenCookie, Value: "", Path: "/", MaxAge: -1, HttpOnly: true, SameSite: http.SameSiteLaxMode})
	http.Redirect(w, r, "/", http.StatusSeeOther)
}

// stream is the live stream (server-sent events). One connection per page
// carries every event name: run, health, live and segment. On connect the
// client first gets the current state, then each event as it is published.
func (s *Server) stream(w http.ResponseWriter, r *http.Request) {
	rc := http.NewResponseController(w)
	h := w.Header()
	h.Set("Content-Type", "text/event-stream")
	h.Set("Cache-Control", "no-store")
	h.Set("X-Accel-Buffering", "no")

	after := s.hub.parseID(r.Header.Get("Last-Event-ID"))
	sub, snap := s.hub.subscribe(after)
	defer s.hub.unsubscribe(sub)

	write := func(ev event) bool {
		// Not every ResponseWriter supports deadlines (httptest's recorder
		// does not); the stream still works there.
		_ = rc.SetWriteDeadline(time.Now().Add(streamWriteTimeout))
		if _, err := fmt.Fprintf(w, "id: %s\nevent: %s\ndata: %s\n\n", s.hub.id(ev.seq), ev.name, ev.data); err != nil {
			return false
		}
		return rc.Flush() == nil
	}

	_ = rc.SetWriteDeadline(time.Now().Add(streamWriteTimeout))
	if _, err := fmt.Fprintf(w, "retry: %d\n\n", retryMillis); err != nil {
		return
	}
	for _, ev := range []*event{snap.run, snap.history, snap.health, snap.live} {
		if ev != nil && !write(*ev) {
			return
		}
	}
	for _, ev := range snap.segments {
		if !write(ev) {
			return
		}
	}
	if rc.Flush() != nil {
		return
	}

	ping := time.NewTicker(pingInterval)
	defer ping.Stop()
	for {
		select {
		case <-r.Context().Done():
			return
		case <-s.hub.shutdown:
			return
		case <-sub.gone:
			// Too slow: the hub dropped us. Ending the response makes the
			// browser reconnect and start again from a fresh snapshot.
			s.log.Warn("live stream client fell behind and was disconnected", "remote", r.RemoteAddr, "buffer", SubscriberBuffer)
			return
		case ev := <-sub.ch:
			if !write(ev) {
				return
			}
		case <-ping.C:
			_ = rc.SetWriteDeadline(time.Now().Add(streamWriteTimeout))
			if _, err := fmt.Fprint(w, ": ping\n\n"); err != nil || rc.Flush() != nil {
				return
			}
		}
	}
}

// segmentsOf renders the stored segments of a run of rig kind kind.
func segmentsOf(run uint64, kind rig.Kind, ss []estimate.Segment) []segmentJSON {
	out := make([]segmentJSON, len(ss))
	for i, s := range ss {
		out[i] = toSegmentRow(run, kind, s)
	}
	return out
}
