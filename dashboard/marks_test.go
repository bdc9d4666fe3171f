package dashboard_test

import (
	"context"
	"encoding/json"
	"math"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
	"unicode"
	"unicode/utf8"

	"github.com/chromedp/chromedp"
	"liftyard/dashboard"

	"liftyard/estimate"
	"liftyard/internal/browsertest"
	"liftyard/storage"
)

// markTestStore is a real bbolt store with a MarkStore's two extra
// methods. Its ApplyMarks stores one segment per mark, at the mark's times:
// it stands in for the re-processing of raw samples, which cmd/liftyard
// tests end to end (TestServe_StoredDatabase, TestMarks_CLI).
type markTestStore struct {
	*storage.Store
	t0      time.Time
	applied int
}

func (s *markTestStore) RunStart(uint64) (time.Time, error) { return s.t0, nil }

func (s *markTestStore) ApplyMarks(_ context.Context, id uint64) (dashboard.MarksApplied, error) {
	s.applied++
	marks, err := s.Marks(id)
	if err != nil {
		return dashboard.MarksApplied{}, err
	}
	segs := make([]estimate.Segment, len(marks))
	for i, m := range marks {
		segs[i] = segment(i, 2*float64(i), 0.1*float64(i+1))
		segs[i].TStart, segs[i].TEnd = m.Start, m.End
	}
	note := "segments set by user marks"
	return dashboard.MarksApplied{Segments: len(segs), Note: note}, s.CorrectRun(id, segs, note, nil)
}

// markServer returns a loopback server over a store holding run 1 with
// three automatic segments. Its marks are shown, and editable only when
// editable (with an ApplyMarks).
func markServer(t *testing.T, editable bool) (*dashboard.Server, *markTestStore) {
	t.Helper()
	st, err := storage.Open(filepath.Join(t.TempDir(), "marks.db"), storage.Options{})
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
	if err := st.CorrectRun(id, []estimate.Segment{segment(0, 0, 0.1), segment(1, 4, 0.5), segment(2, 8, 0.9)}, "automatic", nil); err != nil {
		t.Fatal(err)
	}
	ms := &markTestStore{Store: st, t0: epoch.Add(2 * time.Second)}
	cfg := dashboard.Config{Live: true, Runs: st, Calibrations: st, Marks: ms}
	if editable {
		cfg.ApplyMarks = ms.ApplyMarks
	}
	s, _ := newServer(t, cfg)
	return s, ms
}

func post(t *testing.T, h http.Handler, target, body string, hdr map[string]string) *httptest.ResponseRecorder {
	t.Helper()
	req := httptest.NewRequest("POST", target, strings.NewReader(body))
	req.Host = "127.0.0.1:8470"
	if body != "" {
		req.Header.Set("Content-Type", "application/json")
	}
	for k, v := range hdr {
		req.Header.Set(k, v)
	}
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	return rec
}

// Ensure that marks are added in time order and stored in the run's
// clock, that bad input gets 400 naming the field, that overlaps and
// cross-origin POSTs are refused, and that apply replaces the segments
// (and the polar plot).
func TestMarks_API(t *testing.T) {
	s, ms := markServer(t, true)
	h := s.Handler()

	rec := get(t, h, "GET", "/runs/1", nil)
	if rec.Code != 200 || !strings.Contains(rec.Body.String(), `id="mark-form"`) || !strings.Contains(rec.Body.String(), `/static/run.js`) {
		t.Fatalf("run page %d lacks the marking form", rec.Code)
	}
	polarBefore := get(t, h, "GET", "/runs/1/polar.svg", nil).Body.String()

	for _, body := range []string{
		`{"start_s": 20, "end_s": 25.5, "label": "second hold"}`,
		`{"start_s": 12.0, "end_s": 15.5, "label": "carriage steady"}`,
	} {
		if rec := post(t, h, "/api/v1/runs/1/marks", body, nil); rec.Code != 200 {
			t.Fatalf("POST %s: %d %s", body, rec.Code, rec.Body)
		}
	}
	marks, err := ms.Marks(1)
	if err != nil || len(marks) != 2 {
		t.Fatalf("stored marks %v, %v", marks, err)
	}
	if want := ms.t0.Add(12 * time.Second); !marks[0].Start.Equal(want) || marks[0].Label != "carriage steady" {
		t.Errorf("first mark %+v, want start %s (in time order)", marks[0], want)
	}

	for _, c := range []struct {
		name, body, field string
		hdr               map[string]string
		status            int
	}{
		{"end before start", `{"start_s": 5, "end_s": 4}`, "end_s", nil, 400},
		{"no start", `{"end_s": 4}`, "start_s: missing", nil, 400},
		{"negative", `{"start_s": -1, "end_s": 4}`, "start_s", nil, 400},
		{"text time", `{"start_s": "12", "end_s": 14}`, "start_s: must be a number", nil, 400},
		{"label type", `{"start_s": 1, "end_s": 2, "label": 7}`, "label: must be a string", nil, 400},
		{"label control", `{"start_s": 1, "end_s": 2, "label": "a\u0007b"}`, "label", nil, 400},
		{"unknown field", `{"start_s": 1, "end_s": 2, "colour": "red"}`, "unknown field", nil, 400},
		{"two objects", `{"start_s": 1, "end_s": 2}{}`, "one JSON object", nil, 400},
		{"overlap", `{"start_s": 14, "end_s": 18}`, "overlaps", nil, 400},
		{"form post", `start_s=1&end_s=2`, "Content-Type", map[string]string{"Content-Type": "application/x-www-form-urlencoded"}, 400},
		{"cross-site", `{"start_s": 1, "end_s": 2}`, "", map[string]string{"Sec-Fetch-Site": "cross-site"}, 403},
		{"foreign origin", `{"start_s": 1, "end_s": 2}`, "", map[string]string{"Origin": "http://evil.example"}, 403},
	} {
		rec := post(t, h, "/api/v1/runs/1/marks", c.body, c.hdr)
		if rec.Code != c.status || !strings.Contains(rec.Body.String(), c.field) {
			t.Errorf("%s: %d %q, want %d naming %q", c.name, rec.Code, rec.Body, c.status, c.field)
		}
	}
	if marks, _ := ms.Marks(1); len(marks) != 2 {
		t.Errorf("refused requests changed the marks: %d", len(marks))
	}
	if rec := post(t, h, "/api/v1/runs/9/marks", `{"start_s": 1, "end_s": 2}`, nil); rec.Code != 404 {
		t.Errorf("unknown run: %d", rec.Code)
	}

	rec = get(t, h, "GET", "/api/v1/runs/1/marks", nil)
	var got struct {
		Editable bool `json:"editable"`
		Marks    []struct {
			N      int     `json:"n"`
			StartS float64 `json:"start_s"`
			EndS   float64 `json:"end_s"`
			Label  string  `json:"label"`
		} `json:"marks"`
	}
	if err := json.Unmarshal(rec.Body.Bytes(), &got); err != nil || !got.Editable || len(got.Marks) != 2 ||
		got.Marks[0].StartS != 12 || got.Marks[1].EndS != 25.5 || got.Marks[1].N != 2 {
		t.Errorf("GET marks: %s (%v)", rec.Body, err)
	}

	rec = post(t, h, "/api/v1/runs/1/marks/apply", "", nil)
	if rec.Code != 200 || !strings.Contains(rec.Body.String(), `"segments":2`) || ms.applied != 1 {
		t.Fatalf("apply: %d %s (applied %d)", rec.Code, rec.Body, ms.applied)
	}
	var segs []map[string]any
	json.Unmarshal(get(t, h, "GET", "/api/v1/runs/1/segments", nil).Body.Bytes(), &segs)
	if len(segs) != 2 {
		t.Errorf("after apply: %d segments, want 2 (one per mark)", len(segs))
	}
	if after := get(t, h, "GET", "/runs/1/polar.svg", nil).Body.String(); after == polarBefore {
		t.Error("the polar plot was not redrawn after apply")
	}

	if rec := post(t, h, "/api/v1/runs/1/marks/1/delete", "", nil); rec.Code != 200 {
		t.Errorf("delete: %d %s", rec.Code, rec.Body)
	}
	if rec := post(t, h, "/api/v1/runs/1/marks/5/delete", "", nil); rec.Code != 400 || !strings.Contains(rec.Body.String(), "marks 1 to 1") {
		t.Errorf("delete missing mark: %d %s", rec.Code, rec.Body)
	}
	if m, _ := ms.Marks(1); len(m) != 1 || m[0].Label != "second hold" {
		t.Errorf("after delete: %+v", m)
	}
	if rec := post(t, h, "/api/v1/runs/1/marks/clear", "", map[string]string{"Origin": "http://evil.example"}); rec.Code != 403 {
		t.Errorf("cross-origin clear: %d", rec.Code)
	}
	if rec := post(t, h, "/api/v1/runs/1/marks/clear", "", nil); rec.Code != 200 {
		t.Errorf("clear: %d", rec.Code)
	}
	if m, _ := ms.Marks(1); len(m) != 0 {
		t.Errorf("after clear: %d marks", len(m))
	}
}

// Ensure that marks cannot change without ApplyMarks (the recorder's
// dashboard shows them read-only), nor on the run being recorded, nor on a
// roof run, and that the API says why with a 4xx.
func TestMarks_NotEditable(t *testing.T) {
	s, ms := markServer(t, false)
	h := s.Handler()
	rec := get(t, h, "GET", "/api/v1/runs/1/marks", nil)
	if rec.Code != 200 || !strings.Contains(rec.Body.String(), `"editable":false`) || !strings.Contains(rec.Body.String(), "liftyard serve") {
		t.Errorf("GET without ApplyMarks: %d %s", rec.Code, rec.Body)
	}
	if rec := post(t, h, "/api/v1/runs/1/marks", `{"start_s": 1, "end_s": 2}`, nil); rec.Code != http.StatusMethodNotAllowed {
		t.Errorf("POST without ApplyMarks: %d", rec.Code)
	}

	s2, ms2 := markServer(t, true)
	run, _ := ms2.Run(1)
	run.Status = storage.StatusRecording
	s2.SetRun(run)
	for _, path := range []string{"/api/v1/runs/1/marks", "/api/v1/runs/1/marks/apply"} {
		rec := post(t, s2.Handler(), path, `{"start_s": 1, "end_s": 2}`, nil)
		if rec.Code != http.StatusConflict || !strings.Contains(rec.Body.String(), "recording") {
			t.Errorf("POST %s while recording: %d %s", path, rec.Code, rec.Body)
		}
	}
	// A roof run's results are fixed blocks: marks are refused with 409
	// and the reason (issue 16: they answered 500), and none is stored.
	s3, ms3 := markServer(t, true)
	roof, err := ms3.CreateRun(storage.Run{Rig: "yard roof", Kind: "roof", Fluid: "air", Started: epoch})
	if err != nil {
		t.Fatal(err)
	}
	if err := ms3.FinishRun(roof, epoch.Add(time.Minute), storage.StatusComplete, nil); err != nil {
		t.Fatal(err)
	}
	for _, path := range []string{"/api/v1/runs/2/marks", "/api/v1/runs/2/marks/apply"} {
		rec := post(t, s3.Handler(), path, `{"start_s": 1, "end_s": 2}`, nil)
		if rec.Code != http.StatusConflict || !strings.Contains(rec.Body.String(), "roof run") {
			t.Errorf("POST %s on a roof run: %d %s", path, rec.Code, rec.Body)
		}
	}
	if rec := get(t, s3.Handler(), "GET", "/api/v1/runs/2/marks", nil); !strings.Contains(rec.Body.String(), `"editable":false`) {
		t.Errorf("GET marks of a roof run: %s", rec.Body)
	}
	if m, _ := ms3.Marks(roof); len(m) != 0 {
		t.Errorf("marks stored on a roof run: %v", m)
	}
	if ms2.applied != 0 || ms.applied != 0 || ms3.applied != 0 {
		t.Error("apply ran on a run that may not be marked")
	}
}

// FuzzMarksBody checks that the mark body decoder never panics and that
// whatever it accepts is a valid mark that survives encoding again.
func FuzzMarksBody(f *testing.F) {
	for _, s := range []string{
		`{"start_s": 12.0, "end_s": 15.5, "label": "carriage steady"}`,
		`{"start_s": 0, "end_s": 1e-6}`, `{"start_s": 1e300, "end_s": 2e300}`, `{"start_s": 1, "end_s": 2, "label": "\u0000"}`,
		`{"start_s": null, "end_s": 2}`, `[]`, `{}`, `{"start_s": 1, "end_s": 2} x`, ``, `{"label": "` + strings.Repeat("é", 150) + `"}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		start, end, label, err := dashboard.DecodeMarkBody(strings.NewReader(string(data)))
		if err != nil {
			if msg := err.Error(); !strings.HasPrefix(msg, "start_s") && !strings.HasPrefix(msg, "end_s") &&
				!strings.HasPrefix(msg, "label") && !strings.HasPrefix(msg, "body") {
				t.Fatalf("error %q names no field", msg)
			}
			return
		}
		if start < 0 || end <= start || end > 10*24*time.Hour {
			t.Fatalf("accepted %s–%s", start, end)
		}
		if len(label) > estimate.MaxMarkLabel || !utf8.ValidString(label) || strings.ContainsFunc(label, unicode.IsControl) {
			t.Fatalf("accepted label %q", label)
		}
		again, _ := json.Marshal(map[string]any{"start_s": start.Seconds(), "end_s": end.Seconds(), "label": label})
		s2, e2, l2, err := dashboard.DecodeMarkBody(strings.NewReader(string(again)))
		if err != nil || math.Abs(float64(s2-start)) > 1000 || math.Abs(float64(e2-end)) > 1000 || l2 != label {
			t.Fatalf("round trip %s: %v, %s–%s %q", again, err, s2, e2, l2)
		}
	})
}

// Ensure that in a real browser the run page's form adds a mark (the table
// shows it in seconds), a bad mark shows the server's message, and apply
// replaces the segments, with no script exception.
func TestMarks_Browser(t *testing.T) {
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	s, ms := markServer(t, true)
	ln := listen(t)
	sctx, stop := context.WithCancel(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- s.Serve(sctx, ln) }()
	t.Cleanup(func() { stop(); <-errc })
	url := "http://" + ln.Addr().String() + "/runs/1"

	fill := func(start, end, label string) {
		t.Helper()
		js := `(() => { const f = document.getElementById("mark-form");
			f.start_s.value = ` + strconv.Quote(start) + `; f.end_s.value = ` + strconv.Quote(end) + `;
			f.label.value = ` + strconv.Quote(label) + `; f.requestSubmit(); return true; })()`
		if _, err := chromedp.Run(ctx, chromedp.Evaluate[bool](js)); err != nil {
			t.Fatal(err)
		}
	}
	if err := chromedp.Do(ctx, chromedp.Navigate(url)); err != nil {
		t.Fatalf("open %s: %v", url, err)
	}
	waitText(t, ctx, "marks-status", "No marks: the segments come from the automatic steady test.")
	fill("12", "15.5", "carriage steady")
	waitText(t, ctx, "marks-msg", "Mark added; apply to update the segments.")
	waitText(t, ctx, "marks-status", "1 mark(s).")
	row, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.querySelector("#marks-table tbody tr").textContent`))
	if err != nil || !strings.Contains(row, "12.000") || !strings.Contains(row, "15.500") || !strings.Contains(row, "3.500") {
		t.Errorf("mark row %q (%v)", row, err)
	}
	fill("14", "18", "")
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`document.getElementById("marks-msg").className === "error" &&
		document.getElementById("marks-msg").textContent.includes("overlaps")`, chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		msg, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById("marks-msg").textContent`))
		t.Errorf("overlap message %q: %v", msg, err)
	}
	if _, err := chromedp.Run(ctx, chromedp.Evaluate[bool](`(document.getElementById("marks-apply").click(), true)`)); err != nil {
		t.Fatal(err)
	}
	waitText(t, ctx, "marks-msg", "1 segment(s) stored. segments set by user marks Reloading…")
	// The page reloads after apply: the segment table then holds one row.
	// Evaluations fail while the page navigates; poll through that.
	rows := -1
	for deadline := time.Now().Add(10 * time.Second); time.Now().Before(deadline); time.Sleep(100 * time.Millisecond) {
		n, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.readyState === "complete" && !document.getElementById("marks-msg").textContent ?
			document.querySelector("table.data tbody").rows.length : -1`))
		if err == nil && n >= 0 {
			rows = n
			break
		}
	}
	if rows != 1 {
		t.Errorf("segments after apply and reload: %d rows, want 1", rows)
	}
	if ms.applied != 1 {
		t.Errorf("apply ran %d times", ms.applied)
	}
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("script exceptions: %q", ex)
	}
}

// Ensure that where marks cannot be applied (the recorder's dashboard) the
// marks form is really not shown: `hidden` is not overridden by a display
// rule of the style sheet (issue 13).
func TestMarks_BrowserFormHiddenWhereUnusable(t *testing.T) {
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	s, _ := markServer(t, false)
	ln := listen(t)
	sctx, stop := context.WithCancel(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- s.Serve(sctx, ln) }()
	t.Cleanup(func() { stop(); <-errc })
	if err := chromedp.Do(ctx, chromedp.Navigate("http://"+ln.Addr().String()+"/runs/1")); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`!document.getElementById("marks-status").textContent.startsWith("Loading")`,
		chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		t.Fatal(err)
	}
	shown, err := chromedp.Run(ctx, chromedp.Evaluate[string](`getComputedStyle(document.getElementById("mark-form")).display`))
	if err != nil || shown != "none" {
		t.Errorf("marks form display %q (%v), want none", shown, err)
	}
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("script exceptions: %q", ex)
	}
}
