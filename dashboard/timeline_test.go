package dashboard_test

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/chromedp/cdproto/input"
	"github.com/chromedp/chromedp"

	"liftyard/acquire"
	"liftyard/dashboard"
	"liftyard/internal/browsertest"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// recordedStore is a real store with one run imported from the raw record
// of the simulated tow-tank foil (an invented scenario) through the
// pipeline, as `liftyard import` does; its marks are the store's.
type recordedStore struct{ *storage.Store }

func (s recordedStore) RunStart(id uint64) (time.Time, error) { return process.RunStart(s.Store, id) }

func recordedRun(t *testing.T) (recordedStore, uint64) {
	t.Helper()
	path := filepath.Join("..", "testdata", "rigs", "foil-towtank.toml")
	text, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	r, err := rig.Parse(path, text)
	if err != nil {
		t.Fatal(err)
	}
	st, err := storage.Open(filepath.Join(t.TempDir(), "rec.db"), storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	rec, err := process.NewRecorder(st, process.RecorderConfig{Rig: r, RigTOML: string(text), Offline: true,
		Now: func() time.Time { return time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC) }})
	if err != nil {
		t.Fatal(err)
	}
	src := &acquire.CSVFile{Path: filepath.Join("..", "testdata", "import", "foil-towtank-raw.csv"), Source: r.Sources[0].Name, BlockN: 10}
	if _, err := process.Replay(t.Context(), src, rec.Pipeline(), rec.Keep); err != nil {
		t.Fatal(err)
	}
	if _, err := rec.Finish(t.Context(), nil, []acquire.HealthSnapshot{src.Health.Snapshot("file")}); err != nil {
		t.Fatal(err)
	}
	return recordedStore{st}, rec.RunID()
}

// timelineServer serves the recorded run with the timeline and editable
// marks, as liftyard serve does.
func timelineServer(t *testing.T, st recordedStore) *dashboard.Server {
	t.Helper()
	s, _ := newServer(t, dashboard.Config{Runs: st, Marks: st,
		ApplyMarks: func(ctx context.Context, id uint64) (dashboard.MarksApplied, error) {
			return process.ApplyMarks(ctx, st.Store, id)
		},
		Timeline: func(ctx context.Context, run storage.Run, points int) (process.Timeline, error) {
			return process.RunTimeline(ctx, st.Store, run, points)
		}})
	return s
}

type timelineAPI struct {
	Run    uint64    `json:"run"`
	Kind   string    `json:"kind"`
	Start  time.Time `json:"start"`
	TS     []float64 `json:"t_s"`
	Series []struct {
		Key    string     `json:"key"`
		Values []*float64 `json:"values"`
	} `json:"series"`
	Segments []struct {
		N      int     `json:"n"`
		StartS float64 `json:"start_s"`
		EndS   float64 `json:"end_s"`
	} `json:"segments"`
}

// Ensure that the timeline route gives the run's quantities in seconds from
// the marks' clock with its segments, refuses a bad point count with a
// JSON error, and answers 404 when the dashboard has no timeline.
func TestTimeline_API(t *testing.T) {
	st, id := recordedRun(t)
	h := timelineServer(t, st).Handler()
	path := "/api/v1/runs/" + strconv.FormatUint(id, 10) + "/timeline"
	rec := get(t, h, "GET", path+"?points=100", nil)
	if rec.Code != 200 {
		t.Fatalf("timeline: %d %s", rec.Code, rec.Body)
	}
	var tl timelineAPI
	if err := json.Unmarshal(rec.Body.Bytes(), &tl); err != nil {
		t.Fatal(err)
	}
	t0, err := st.RunStart(id)
	if err != nil {
		t.Fatal(err)
	}
	if tl.Run != id || tl.Kind != "foil" || !tl.Start.Equal(t0) {
		t.Errorf("run %d kind %q start %s, want %d foil %s", tl.Run, tl.Kind, tl.Start, id, t0)
	}
	if len(tl.TS) == 0 || len(tl.TS) > 100 || tl.TS[0] < 0 {
		t.Errorf("%d points from %v s: want 1 to 100 from ≥ 0 s", len(tl.TS), tl.TS)
	}
	keys := []string{}
	for _, s := range tl.Series {
		keys = append(keys, s.Key)
		if len(s.Values) != len(tl.TS) {
			t.Errorf("series %s: %d values for %d times", s.Key, len(s.Values), len(tl.TS))
		}
	}
	if want := []string{"q", "alpha", "cl"}; !slicesEqual(keys, want) {
		t.Errorf("series %v, want %v", keys, want)
	}
	segs, _ := st.Segments(id)
	if len(tl.Segments) != len(segs) {
		t.Fatalf("%d segments, want %d", len(tl.Segments), len(segs))
	}
	for i, s := range tl.Segments {
		// n is the segment's number as the segments table and the
		// exports show it (from 0).
		if want := segs[i].TStart.Sub(t0).Seconds(); s.N != segs[i].Index || math.Abs(s.StartS-want) > 1e-6 || s.EndS <= s.StartS {
			t.Errorf("segment %d: %+v, want n %d from %.6f s", i, s, segs[i].Index, want)
		}
	}
	for _, bad := range []string{"abc", "0", "100000"} {
		rec := get(t, h, "GET", path+"?points="+bad, nil)
		if rec.Code != 400 || rec.Header().Get("Content-Type") != "application/json" {
			t.Errorf("points=%s: %d %q, want 400 JSON", bad, rec.Code, rec.Header().Get("Content-Type"))
		}
	}
	if rec := get(t, h, "GET", "/api/v1/runs/99/timeline", nil); rec.Code != 404 {
		t.Errorf("unknown run: %d, want 404", rec.Code)
	}
	off, _ := newServer(t, dashboard.Config{Runs: st})
	if rec := get(t, off.Handler(), "GET", path, nil); rec.Code != 404 {
		t.Errorf("timeline off: %d, want 404", rec.Code)
	}
}

func slicesEqual(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// Ensure that in a real browser the run page draws the timeline with one
// shaded band per segment, and a drag across it fills the mark form's start
// and end with the times under the pointer.
func TestTimeline_BrowserDragFillsMark(t *testing.T) {
	st, id := recordedRun(t)
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	s := timelineServer(t, st)
	ln := listen(t)
	sctx, stop := context.WithCancel(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- s.Serve(sctx, ln) }()
	t.Cleanup(func() { stop(); <-errc })
	url := "http://" + ln.Addr().String() + "/runs/" + strconv.FormatUint(id, 10)
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(1000, 900), chromedp.Navigate(url)); err != nil {
		t.Fatalf("open %s: %v", url, err)
	}
	// Wait for the plot and for the marks form (shown once marks load).
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`!!document.querySelector("#timeline-plot svg .tl-hit") && !document.getElementById("mark-form").hidden`,
		chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		msg, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById("timeline-status").textContent`))
		t.Fatalf("timeline not drawn (%q): %v", msg, err)
	}
	segs, _ := st.Segments(id)
	bands, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll("#timeline-plot .tl-seg").length`))
	if err != nil || bands != len(segs) || bands == 0 {
		t.Errorf("%d shaded segments (%v), want %d", bands, err, len(segs))
	}
	panels, _ := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll("#timeline-plot .tl-panel path").length`))
	if panels != 3 {
		t.Errorf("%d plotted series, want q, α and C_L", panels)
	}
	// The plot's geometry, in page pixels, and its time span.
	type geo struct{ Left, Top, Height, X0, X1, T0, T1 float64 }
	g, err := chromedp.Run(ctx, chromedp.Evaluate[geo](`(() => { const s = document.querySelector("#timeline-plot svg");
		s.scrollIntoView({block: "center"});
		const r = s.getBoundingClientRect();
		return {Left: r.left, Top: r.top, Height: r.height, X0: +s.dataset.x0, X1: +s.dataset.x1, T0: +s.dataset.t0, T1: +s.dataset.t1}; })()`))
	if err != nil || g.X1 <= g.X0 || g.T1 <= g.T0 {
		t.Fatalf("plot geometry %+v (%v)", g, err)
	}
	tAt := func(x float64) float64 { return g.T0 + (x-g.Left-g.X0)/(g.X1-g.X0)*(g.T1-g.T0) }
	xa, xb, y := g.Left+g.X0+0.3*(g.X1-g.X0), g.Left+g.X0+0.55*(g.X1-g.X0), g.Top+g.Height/3
	// Drag from right to left: the form still gets start < end.
	drag := []chromedp.Action[chromedp.Void]{
		chromedp.MouseEvent(input.DispatchMouseEventTypeMouseMoved, xb, y),
		chromedp.MouseEvent(input.DispatchMouseEventTypeMousePressed, xb, y, chromedp.ButtonLeft, chromedp.ClickCount(1)),
		chromedp.MouseEvent(input.DispatchMouseEventTypeMouseMoved, (xa+xb)/2, y, chromedp.ButtonLeft),
		chromedp.MouseEvent(input.DispatchMouseEventTypeMouseMoved, xa, y, chromedp.ButtonLeft),
		chromedp.MouseEvent(input.DispatchMouseEventTypeMouseReleased, xa, y, chromedp.ButtonLeft, chromedp.ClickCount(1)),
	}
	if err := chromedp.Do(ctx, drag...); err != nil {
		t.Fatal(err)
	}
	vals, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`[document.getElementById("mark-form").start_s.value, document.getElementById("mark-form").end_s.value]`))
	if err != nil || len(vals) != 2 {
		t.Fatalf("form values %v (%v)", vals, err)
	}
	onePixel := (g.T1 - g.T0) / (g.X1 - g.X0)
	for i, want := range []float64{tAt(xa), tAt(xb)} {
		got, err := strconv.ParseFloat(vals[i], 64)
		if err != nil || math.Abs(got-want) > onePixel {
			t.Errorf("field %d: %q, want %.3f s ± one pixel (%.3f s)", i, vals[i], want, onePixel)
		}
	}
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("script exceptions: %q", ex)
	}
}
