package dashboard_test

import (
	"context"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"liftyard/dashboard"
	"liftyard/internal/browsertest"
)

// serve starts s on a loopback port and returns its base URL.
func serve(t *testing.T, s *dashboard.Server) string {
	t.Helper()
	ln := listen(t)
	sctx, stop := context.WithCancel(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- s.Serve(sctx, ln) }()
	t.Cleanup(func() { stop(); <-errc })
	return "http://" + ln.Addr().String()
}

// Ensure that every screen is usable 800 px wide: in a real browser with
// an 800 px viewport no page scrolls sideways (wide tables scroll inside
// their own box), with the run page's timeline drawn.
func TestScreens_800px(t *testing.T) {
	st, id := recordedRun(t)
	run := serve(t, timelineServer(t, st))
	cst, cids := calStore(t)
	cs, _ := newServer(t, dashboard.Config{Runs: cst, Calibrations: cst, Addr: "127.0.0.1:0"})
	cal := serve(t, cs)
	cmp := serve(t, compareServer(t))

	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 60*time.Second)
	defer cancel()
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(800, 700)); err != nil {
		t.Fatal(err)
	}
	pages := []struct{ name, url, ready string }{
		{"run page", run + "/runs/" + strconv.FormatUint(id, 10), `!!document.querySelector("#timeline-plot svg")`},
		{"runs page", run + "/runs", "true"},
		{"error page", run + "/runs/999", "true"},
		{"calibrations", cal + "/calibrations", "true"},
		{"calibration", cal + "/calibrations/" + cids[0], "true"},
		{"compare", cmp + "/compare?runs=1,2", "true"},
	}
	for _, p := range pages {
		if err := chromedp.Do(ctx, chromedp.Navigate(p.url)); err != nil {
			t.Fatalf("%s: open %s: %v", p.name, p.url, err)
		}
		if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`document.readyState === "complete" && (`+p.ready+`)`,
			chromedp.WithPollingTimeout(10*time.Second))); err != nil {
			t.Fatalf("%s: not ready: %v", p.name, err)
		}
		w, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.scrollingElement.scrollWidth`))
		if err != nil || w > 800 {
			wide, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`[...document.querySelectorAll("body *")].filter(e => e.getBoundingClientRect().right > 801).slice(0, 5).map(e => e.tagName + "." + e.className + "#" + e.id).join(" ")`))
			t.Errorf("%s: scrollWidth %d (%v), want ≤ 800; wide: %s", p.name, w, err, wide)
		}
	}
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("script exceptions: %q", strings.Join(ex, "; "))
	}
}
