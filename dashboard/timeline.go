package dashboard

import (
	"context"
	"fmt"
	"net/http"
	"strconv"
	"sync"
	"time"

	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// The run timeline (Config.Timeline): a stored run's q, α and C_L (a
// rotor's spin ratio; a roof's q only) against wall time, with the
// segments, for the run page's plot from which marks are placed:
//
//	GET /api/v1/runs/{id}/timeline?points=2000
//
// Times are seconds from the run's first sample (the marks' clock) and
// RFC 3339 UTC for the start. Values are null where a bin has none.

// defaultTimelinePoints is the points of a timeline when the request names
// none: about two per pixel of a wide screen.
const defaultTimelinePoints = 2000

// timelineCacheSize bounds the cached timelines. One costs a replay of the
// run's raw blocks; a few recent runs cover people flicking between pages.
const timelineCacheSize = 8

// offTimeline is the 404 message of the timeline route when it is off.
const offTimeline = "the run timeline is off on this dashboard: it was started without access to the raw blocks (liftyard serve --db FILE has it)"

type timelineKey struct {
	run     uint64
	points  int
	samples uint64 // a run still growing replays anew
}

// timelineCache keeps built timelines. Safe for concurrent use.
type timelineCache struct {
	mu    sync.Mutex
	tl    map[timelineKey]process.Timeline
	order []timelineKey // oldest first
}

func newTimelineCache() *timelineCache {
	return &timelineCache{tl: map[timelineKey]process.Timeline{}}
}

func (c *timelineCache) get(k timelineKey) (process.Timeline, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	t, ok := c.tl[k]
	return t, ok
}

func (c *timelineCache) put(k timelineKey, t process.Timeline) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if _, ok := c.tl[k]; ok {
		return
	}
	for len(c.order) >= timelineCacheSize {
		delete(c.tl, c.order[0])
		c.order = c.order[1:]
	}
	c.tl[k] = t
	c.order = append(c.order, k)
}

type timelineSeriesJSON struct {
	Key    string `json:"key"`
	Label  string `json:"label"`
	Unit   string `json:"unit"`
	Values []num  `json:"values"`
}

type timelineSegmentJSON struct {
	N      int `json:"n"`
	StartS num `json:"start_s"`
	EndS   num `json:"end_s"`
}

type timelineJSON struct {
	Run      uint64                `json:"run"`
	Kind     string                `json:"kind"`
	Start    time.Time             `json:"start"`
	BinS     num                   `json:"bin_s"`
	TS       []num                 `json:"t_s"`
	Series   []timelineSeriesJSON  `json:"series"`
	Segments []timelineSegmentJSON `json:"segments"`
}

// toTimelineJSON lays a timeline out for the API, with the segments of
// the run (the same clock: UTC wall time).
func toTimelineJSON(id uint64, tl process.Timeline, segs []segmentSpan) timelineJSON {
	out := timelineJSON{Run: id, Kind: string(tl.Kind), Start: tl.Start.UTC(), BinS: num(tl.Bin.Seconds()),
		TS: make([]num, len(tl.T)), Segments: []timelineSegmentJSON{}}
	for i, t := range tl.T {
		out.TS[i] = num(t.Sub(tl.Start).Seconds())
	}
	nums := func(v []float64) []num {
		o := make([]num, len(v))
		for i, x := range v {
			o[i] = num(x)
		}
		return o
	}
	out.Series = append(out.Series, timelineSeriesJSON{Key: "q", Label: "q", Unit: "Pa", Values: nums(tl.QPa)})
	switch tl.Kind {
	case rig.KindRoof:
	case rig.KindRotor:
		out.Series = append(out.Series,
			timelineSeriesJSON{Key: "alpha", Label: "α", Unit: "°", Values: nums(tl.AlphaDeg)},
			timelineSeriesJSON{Key: "spin", Label: "S = ωR/V", Unit: "", Values: nums(tl.SpinRatio)})
	default:
		out.Series = append(out.Series,
			timelineSeriesJSON{Key: "alpha", Label: "α", Unit: "°", Values: nums(tl.AlphaDeg)},
			timelineSeriesJSON{Key: "cl", Label: "C_L", Unit: "", Values: nums(tl.CL)})
	}
	for _, s := range segs {
		out.Segments = append(out.Segments, timelineSegmentJSON{N: s.n,
			StartS: num(s.start.Sub(tl.Start).Seconds()), EndS: num(s.end.Sub(tl.Start).Seconds())})
	}
	return out
}

// segmentSpan is one segment's time span.
type segmentSpan struct {
	n          int
	start, end time.Time
}

func (s *Server) apiTimeline(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	points := defaultTimelinePoints
	if v := r.URL.Query().Get("points"); v != "" {
		points, err = strconv.Atoi(v)
		if err != nil || points < 10 || points > process.MaxTimelinePoints {
			s.fail(w, r, fmt.Errorf("%w: points %q: give a whole number from 10 to %d", errBadRequest, v, process.MaxTimelinePoints), true)
			return
		}
	}
	run, segs, err := s.runSegments(id)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	k := timelineKey{run: id, points: points, samples: run.Samples}
	tl, ok := s.timelines.get(k)
	if !ok {
		if tl, err = s.timeline(r.Context(), run, points); err != nil {
			s.fail(w, r, fmt.Errorf("timeline of run %d: %w", id, err), true)
			return
		}
		if run.Status != storage.StatusRecording {
			s.timelines.put(k, tl)
		}
	}
	spans := make([]segmentSpan, 0, len(segs))
	for _, sg := range segs {
		if sg.TStart.IsZero() || sg.TEnd.IsZero() {
			continue
		}
		spans = append(spans, segmentSpan{n: sg.Index, start: sg.TStart, end: sg.TEnd})
	}
	writeJSONStatus(w, http.StatusOK, toTimelineJSON(id, tl, spans))
}

// TimelineFunc builds a stored run's timeline in at most points points
// (process.RunTimeline over a store). Config.Timeline.
type TimelineFunc = func(ctx context.Context, run storage.Run, points int) (process.Timeline, error)
