package dashboard

import (
	"errors"
	"fmt"
	"net/http"
	"strconv"
	"strings"

	"liftyard/report"
)

// Run against run (Config.Compare):
//
//	GET /compare?runs=3,5,7            the page: verdict, overlaid polars, a difference table per pair
//	GET /compare/lift.svg?runs=3,5,7   C_L(α) (C_L(S) for rotors) of every run with U95 bars
//	GET /compare/drag.svg?runs=3,5,7   the drag polars
//	GET /api/v1/compare?runs=3,5,7     the same numbers as JSON (report.CompareDoc)
//
// The first run is the reference. The plots and numbers are the report's
// (report.Comparison); the dashboard only serves them.

// maxCompareRuns bounds a comparison: beyond a handful of runs the overlay
// is unreadable and a request could make the server read the whole store.
const maxCompareRuns = 8

// compareRuns parses ?runs=3,5,7 (a repeated ?run=3&run=5 is taken too).
func compareRuns(r *http.Request) ([]uint64, error) {
	q := r.URL.Query()
	fields := q["run"]
	for _, v := range q["runs"] {
		fields = append(fields, strings.Split(v, ",")...)
	}
	var ids []uint64
	for _, f := range fields {
		f = strings.TrimSpace(f)
		if f == "" {
			continue
		}
		id, err := strconv.ParseUint(f, 10, 64)
		if err != nil || id == 0 {
			return nil, fmt.Errorf("%w: run id %q is not a positive whole number", errBadRequest, f)
		}
		ids = append(ids, id)
	}
	switch {
	case len(ids) < 2:
		return nil, fmt.Errorf("%w: give two or more runs, the reference first: ?runs=3,5", errBadRequest)
	case len(ids) > maxCompareRuns:
		return nil, fmt.Errorf("%w: %d runs, at most %d at once", errBadRequest, len(ids), maxCompareRuns)
	}
	return ids, nil
}

// comparison builds the request's comparison; a list that cannot be
// compared is the client's to fix (400), an unknown run a 404.
func (s *Server) comparison(r *http.Request) (*report.Comparison, []uint64, error) {
	ids, err := compareRuns(r)
	if err != nil {
		return nil, nil, err
	}
	c, err := s.compare(ids)
	if errors.Is(err, report.ErrCompareUsage) {
		return nil, nil, fmt.Errorf("%w: %w", errBadRequest, err)
	}
	return c, ids, err
}

type comparePageData struct {
	Runs    string // the list as given, for the form and the plot URLs
	Problem string // why there is no comparison (no list yet, a bad list)
	Verdict string
	Notes   []string
	Spin    bool
	Pairs   []report.PairView
}

// comparePage shows the comparison, or the form with what to fix.
func (s *Server) comparePage(w http.ResponseWriter, r *http.Request) {
	data := comparePageData{Runs: strings.TrimSpace(r.URL.Query().Get("runs"))}
	c, ids, err := s.comparison(r)
	status := http.StatusOK
	switch {
	case err == nil:
		var list []string
		for _, id := range ids {
			list = append(list, strconv.FormatUint(id, 10))
		}
		data.Runs = strings.Join(list, ",")
		data.Verdict, data.Notes, data.Spin, data.Pairs = c.Verdict(), c.Notes, c.Spin(), c.Pairs()
	case data.Runs == "" && len(r.URL.Query()["run"]) == 0:
		data.Problem = "Give the runs to compare, the reference first."
	case errors.Is(err, errBadRequest):
		data.Problem, status = strings.TrimPrefix(err.Error(), errBadRequest.Error()+": "), http.StatusBadRequest
	case isNotFound(err):
		data.Problem, status = err.Error(), http.StatusNotFound
	default:
		s.fail(w, r, err, false)
		return
	}
	s.renderStatus(w, r, s.pages.compare, status, pageData{
		Title: "Compare runs", Nav: "runs", Token: !s.loopback.Load(), Content: data,
	})
}

// apiCompare is the comparison as JSON.
func (s *Server) apiCompare(w http.ResponseWriter, r *http.Request) {
	c, _, err := s.comparison(r)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	writeJSONStatus(w, http.StatusOK, c.Doc())
}

// compareSVG serves one overlay plot of the comparison.
func (s *Server) compareSVG(drag bool) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		c, _, err := s.comparison(r)
		if err != nil {
			s.fail(w, r, err, false)
			return
		}
		draw := c.LiftSVG
		if drag {
			draw = c.DragSVG
		}
		b, err := draw()
		if err != nil {
			s.fail(w, r, fmt.Errorf("comparison plot: %w", err), false)
			return
		}
		w.Header().Set("Content-Type", "image/svg+xml")
		w.Header().Set("Cache-Control", "no-store")
		w.Write(b)
	}
}
