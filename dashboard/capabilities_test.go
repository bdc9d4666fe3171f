package dashboard_test

import (
	"fmt"
	"io"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"liftyard/dashboard"
	"liftyard/storage"
)

// Ensure that each capability left out of Config is off: the pages do not
// offer it (no report link, no marks section, no Live or Calibrations
// link) and its routes answer 404 with a message that names it.
func TestCapabilities_Off(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Runs: testRuns()})
	h := s.Handler()

	page := get(t, h, "GET", "/runs/1", nil)
	if page.Code != 200 {
		t.Fatalf("run page: %d %s", page.Code, page.Body)
	}
	for _, not := range []string{"/runs/1/report", "Report (printable)", `id="marks"`, `href="/calibrations"`, `href="/"`, "/static/run.js"} {
		if strings.Contains(page.Body.String(), not) {
			t.Errorf("run page offers %q with the capability off", not)
		}
	}
	for _, tt := range []struct{ method, path, want string }{
		{"GET", "/runs/1/report", "the report is off"},
		{"GET", "/api/v1/runs/1/marks", "marks are off"},
		{"POST", "/api/v1/runs/1/marks/apply", "marks are off"},
		{"GET", "/api/v1/live", "the live feed is off"},
		{"GET", "/api/v1/health", "the live feed is off"},
		{"GET", "/api/v1/stream", "the live feed is off"},
		{"GET", "/calibrations", "calibrations are off"},
		{"GET", "/api/v1/calibrations/x", "calibrations are off"},
		{"GET", "/compare?runs=1,2", "run against run is off"},
		{"GET", "/api/v1/compare?runs=1,2", "run against run is off"},
	} {
		var rec interface {
			Result() *http.Response
		}
		if tt.method == "POST" {
			rec = post(t, h, tt.path, "", nil)
		} else {
			rec = get(t, h, tt.method, tt.path, nil)
		}
		res := rec.Result()
		body, _ := io.ReadAll(res.Body)
		if res.StatusCode != http.StatusNotFound || !strings.Contains(string(body), tt.want) {
			t.Errorf("%s %s: %d %q, want 404 naming %q", tt.method, tt.path, res.StatusCode, body, tt.want)
		}
	}
	live := get(t, h, "GET", "/", nil)
	if live.Code != 200 || !strings.Contains(live.Body.String(), "no run recording") || strings.Contains(live.Body.String(), "live.js") {
		t.Errorf("live page without the live feed: %d %s", live.Code, live.Body)
	}
}

// Ensure that with every capability on, the run page offers the report,
// the marks form and the navigation links, and the report route answers
// with what Config.Report wrote (404 for a run it does not know).
func TestCapabilities_On(t *testing.T) {
	st, err := storage.Open(filepath.Join(t.TempDir(), "caps.db"), storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	id, err := st.CreateRun(storage.Run{Rig: "yard foil", Kind: "foil", Fluid: "air", AreaM2: 0.1, Started: epoch})
	if err != nil {
		t.Fatal(err)
	}
	if err := st.FinishRun(id, epoch.Add(time.Minute), storage.StatusComplete, nil); err != nil {
		t.Fatal(err)
	}
	ms := &markTestStore{Store: st, t0: epoch}
	s, _ := newServer(t, dashboard.Config{Runs: st, Live: true, Calibrations: st, Marks: ms, ApplyMarks: ms.ApplyMarks,
		Report: func(w io.Writer, runID uint64) error {
			if runID != id {
				return fmt.Errorf("run %d: %w", runID, storage.ErrNotFound)
			}
			_, err := fmt.Fprintf(w, "<!doctype html><h1>Lift test report: run %d</h1>", runID)
			return err
		}})
	h := s.Handler()
	page := get(t, h, "GET", "/runs/1", nil).Body.String()
	for _, want := range []string{`href="/runs/1/report"`, `id="mark-form"`, `href="/calibrations"`, `href="/"`} {
		if !strings.Contains(page, want) {
			t.Errorf("run page lacks %q", want)
		}
	}
	rec := get(t, h, "GET", "/runs/1/report", nil)
	if rec.Code != 200 || rec.Body.String() != "<!doctype html><h1>Lift test report: run 1</h1>" || !strings.HasPrefix(rec.Header().Get("Content-Type"), "text/html") {
		t.Errorf("report: %d %q", rec.Code, rec.Body)
	}
	if rec := get(t, h, "GET", "/runs/7/report", nil); rec.Code != 404 || !strings.Contains(rec.Body.String(), "no such run") {
		t.Errorf("report of an unknown run: %d %q", rec.Code, rec.Body)
	}
	if rec := get(t, h, "GET", "/api/v1/runs/1/marks", nil); rec.Code != 200 || !strings.Contains(rec.Body.String(), `"editable":true`) {
		t.Errorf("marks: %d %s", rec.Code, rec.Body)
	}
}
