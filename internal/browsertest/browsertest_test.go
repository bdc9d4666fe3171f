package browsertest_test

import (
	"context"
	"net/http"
	"net/http/httptest"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"liftyard/internal/browsertest"
)

func TestMain(m *testing.M) {
	code := m.Run()
	browsertest.Shutdown()
	os.Exit(code)
}

// Ensure that two tabs share one browser, run pages, and that a page's
// uncaught exception is collected for its own tab only.
func TestBrowser_TabsAndExceptions(t *testing.T) {
	ts := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "text/html")
		if r.URL.Path == "/throw" {
			w.Write([]byte(`<!doctype html><p id=p>x</p><script>setTimeout(() => { throw new Error("deliberate test failure") }, 0)</script>`))
			return
		}
		w.Write([]byte(`<!doctype html><p id=p>calm page</p>`))
	}))
	defer ts.Close()

	calm := browsertest.Browser(t)
	loud := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(loud, 15*time.Second)
	defer cancel()
	if err := chromedp.Do(ctx, chromedp.Navigate(ts.URL+"/throw")); err != nil {
		t.Fatal(err)
	}
	cctx, ccancel := context.WithTimeout(calm, 15*time.Second)
	defer ccancel()
	if err := chromedp.Do(cctx, chromedp.Navigate(ts.URL+"/calm")); err != nil {
		t.Fatal(err)
	}
	text, err := chromedp.Run(cctx, chromedp.Text(chromedp.ID("p")))
	if err != nil || text != "calm page" {
		t.Fatalf("calm tab text %q, %v", text, err)
	}
	deadline := time.Now().Add(10 * time.Second) // safety net
	for len(browsertest.Exceptions(ctx)) == 0 && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	ex := browsertest.Exceptions(ctx)
	if len(ex) != 1 || !strings.Contains(ex[0], "deliberate test failure") {
		t.Errorf("exceptions of the throwing tab: %q", ex)
	}
	if ex := browsertest.Exceptions(cctx); len(ex) != 0 {
		t.Errorf("calm tab reports exceptions: %q", ex)
	}
}
