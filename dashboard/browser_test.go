package dashboard_test

import (
	"context"
	"encoding/json"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/dashboard"
	"liftyard/internal/browsertest"
	"liftyard/storage"
)

// waitText polls until the element's text is want (safety net 10 s).
func waitText(t *testing.T, ctx context.Context, id, want string) {
	t.Helper()
	expr := `(document.getElementById(` + strconv.Quote(id) + `) || {}).textContent === ` + strconv.Quote(want)
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](expr, chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		got, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`(document.getElementById(`+strconv.Quote(id)+`) || {}).textContent || ""`))
		t.Fatalf("#%s: text %q, want %q: %v", id, got, want, err)
	}
}

// Ensure that the live page in a real browser shows the published numbers,
// draws the trends, grows the segment table and throws no exception.
func TestLivePage_Browser(t *testing.T) {
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()

	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "127.0.0.1:0", Runs: testRuns()})
	ln := listen(t)
	sctx, stop := context.WithCancel(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- s.Serve(sctx, ln) }()
	t.Cleanup(func() { stop(); <-errc })
	url := "http://" + ln.Addr().String() + "/"

	s.SetRun(storage.Run{ID: 7, Rig: hostileRig, Kind: "foil", Fluid: "fresh_water", AreaM2: 0.12,
		AreaKind: "planform", Started: epoch, Status: storage.StatusRecording})
	s.PublishHealth(dashboard.Health{
		Sources: []acquire.HealthSnapshot{{Source: "balance", Frames: 6000, Samples: 600000, Rejected: 2, Gaps: 1}},
		Channels: []acquire.ChannelHealth{
			{Channel: "n_fore", Source: "balance", RateHz: 200, Samples: 600000},
			{Channel: "pitot", Source: "balance", RateHz: 200, Samples: 600000, Saturated: 3},
		},
		Loads: []calibrate.LoadHealth{{Channel: "n_fore", CapacitySI: 500, Unit: "N", PeakFrac: 1.04, MaxFrac: 1.04, Alarms: 12, State: calibrate.LoadAlarm}},
	})

	if err := chromedp.Do(ctx, chromedp.Navigate(url)); err != nil {
		t.Fatalf("open %s: %v", url, err)
	}
	waitText(t, ctx, "conn", "connected")
	// The hostile rig name is shown as text, not run.
	waitText(t, ctx, "run-rig", hostileRig)

	// A producer publishes estimates as the estimator would, about 20 per second.
	cl := make(chan float64, 1)
	cl <- 0.43
	pubDone := make(chan struct{})
	go func() {
		defer close(pubDone)
		value := 0.43
		tick := time.NewTicker(50 * time.Millisecond)
		defer tick.Stop()
		for i := 1; ; i++ {
			select {
			case <-ctx.Done():
				return
			case value = <-cl:
			case <-tick.C:
			}
			l := liveSample(i, value)
			l.QPa.X += 4 * math.Sin(float64(i)/6) // a gusty tow: q wanders a little
			s.PublishLive(l)
		}
	}()
	t.Cleanup(func() { cancel(); <-pubDone })

	waitText(t, ctx, "v-cl", "0.430")
	waitText(t, ctx, "u-cl", "0.024")
	waitText(t, ctx, "u-speed", "0.0027")
	waitText(t, ctx, "v-alpha", "4.000") // α to the decimals of its U95 (0.098°)
	waitText(t, ctx, "v-re", "2.90×10⁵")
	waitText(t, ctx, "v-rho", "999.1")
	waitText(t, ctx, "v-steady", "steady")
	cl <- 0.512
	waitText(t, ctx, "v-cl", "0.512")

	// The trend canvases exist and hold points (about 2 s of them, so the
	// screenshot shows a trace).
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](
		`Number(document.getElementById("trend-q").dataset.points) > 40 && Number(document.getElementById("trend-cl").dataset.points) > 40`,
		chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		t.Fatalf("trend canvases not drawn: %v", err)
	}

	// A completed segment adds a row.
	s.PublishSegment(segment(0, 4, 0.43))
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`document.querySelectorAll("#segments tbody tr").length === 1`,
		chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		t.Fatalf("segment row did not appear: %v", err)
	}
	row, err := chromedp.Run(ctx, chromedp.Text(chromedp.CSS("#segments tbody tr")))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(row, "0.430 ± 0.024") || !strings.Contains(row, "4.000 ± 0.098") {
		t.Errorf("segment row %q, want C_L 0.430 ± 0.024 and α 4.000 ± 0.098", row)
	}
	health, err := chromedp.Run(ctx, chromedp.Text(chromedp.ID("health")))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(health, "balance: 6000 blocks, 2 rejected, 0 blocks + 0 samples dropped, 1 gaps, 0 reconnects") {
		t.Errorf("health line %q", health)
	}

	// The overload alarm is shown as a banner and on the channel's row.
	alarm, err := chromedp.Run(ctx, chromedp.Text(chromedp.ID("load-alarms")))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(alarm, "OVERLOAD: n_fore at 104 % of its rated 500 N") {
		t.Errorf("load alarm banner %q", alarm)
	}
	rows, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`[...document.querySelectorAll("#channels tbody tr")].map(r => r.className + "|" + r.textContent)`))
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 2 || !strings.HasPrefix(rows[0], "alarm|n_fore") || !strings.Contains(rows[0], "OVERLOAD") || !strings.Contains(rows[1], "saturated") {
		t.Errorf("channel rows %q", rows)
	}

	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}
	for _, p := range []string{filepath.Join(t.ArtifactDir(), "dashboard-live.png"), "/tmp/dashboard-live.png"} {
		if err := os.WriteFile(p, png, 0o644); err != nil {
			t.Errorf("save screenshot: %v", err)
		}
	}
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("page threw: %q", ex)
	}
}

// Ensure that a run page with its polar renders in the browser without
// exceptions and the SVG loads.
func TestRunPage_Browser(t *testing.T) {
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "127.0.0.1:0", Runs: testRuns()})
	ts := loopbackServer(t, s)
	if err := chromedp.Do(ctx, chromedp.Navigate(ts.URL+"/runs/1")); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`(() => { const i = document.querySelector(".polar img"); return i && i.complete && i.naturalWidth > 0; })()`,
		chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		t.Fatalf("polar image did not load: %v", err)
	}
	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(t.ArtifactDir(), "dashboard-run.png"), png, 0o644); err != nil {
		t.Error(err)
	}
	os.WriteFile("/tmp/dashboard-run.png", png, 0o644)
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("page threw: %q", ex)
	}
}

// Ensure that a freshly opened live page shows the trend history the
// server kept (issue 13: trends were empty after every load), and that a
// steady q whose noise lies well inside its U95 is not blown up to fill the
// plot: the y-range is at least ± U95 wide.
func TestLivePage_HistoryOnOpen(t *testing.T) {
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "127.0.0.1:0"})
	ln := listen(t)
	sctx, stop := context.WithCancel(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- s.Serve(sctx, ln) }() // Serve's shutdown ends the page's live stream
	t.Cleanup(func() { stop(); <-errc })
	base := "http://" + ln.Addr().String()
	s.SetRun(storage.Run{ID: 3, Rig: "strut-b", Kind: "foil", Fluid: "fresh_water", Status: storage.StatusRecording})
	// 45 s of estimates at the recorder's 5 per second, published before
	// the page opens: q 2016 ± 28 Pa (U95) wandering by ± 2 Pa.
	for i := range 225 {
		l := liveSample(i, 0.43)
		l.T = epoch.Add(time.Duration(i) * 200 * time.Millisecond)
		l.QPa = calibrate.Value{X: 2016 + 2*math.Sin(float64(i)/5), U: 14, Dof: math.Inf(1)}
		s.PublishLive(l)
	}
	var hist []map[string]any
	resp, err := http.Get(base + "/api/v1/live/history")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.NewDecoder(resp.Body).Decode(&hist); err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if len(hist) != 225 {
		t.Errorf("history holds %d points, want all 225 of the last 45 s", len(hist))
	}

	if err := chromedp.Do(ctx, chromedp.Navigate(base+"/")); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`Number(document.getElementById("trend-q").dataset.spanS) >= 30`,
		chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		t.Fatalf("the trend does not show 30 s at page load: %v", err)
	}
	got, err := chromedp.Run(ctx, chromedp.Evaluate[map[string]string](`Object.assign({}, document.getElementById("trend-q").dataset)`))
	if err != nil {
		t.Fatal(err)
	}
	lo, _ := strconv.ParseFloat(got["ylo"], 64)
	hi, _ := strconv.ParseFloat(got["yhi"], 64)
	if hi-lo < 2*28 || lo > 2016-28 || hi < 2016+28 {
		t.Errorf("q axis %g … %g Pa: narrower than ± U95 (28 Pa) around 2016 Pa", lo, hi)
	}
	if n, _ := strconv.Atoi(got["points"]); n < 150 {
		t.Errorf("trend holds %d points, want the 45 s history", n)
	}
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("page threw: %q", ex)
	}
}
