// Package browsertest runs page tests in a real headless Chromium.
//
// One browser starts per test binary, on first use; each call of Browser
// opens a new tab, closed when the test ends. Call Shutdown from TestMain to
// stop the browser process:
//
//	func TestMain(m *testing.M) {
//		code := m.Run()
//		browsertest.Shutdown()
//		os.Exit(code)
//	}
//
// A test fails (never skips) when Chromium is missing, and names the Debian
// package to install; only `go test -short` skips browser tests. Uncaught
// page exceptions are collected per tab; assert that Exceptions(ctx) is
// empty at the end of a test.
package browsertest

import (
	"context"
	"os"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

// ExecPath is where Debian's chromium package installs the browser.
const ExecPath = "/usr/bin/chromium"

// tabTimeout is a safety net for one test's tab, so a lost browser cannot
// hang the binary until go test's 10-minute timeout.
const tabTimeout = 2 * time.Minute

var (
	once          sync.Once
	startErr      error
	browserCtx    context.Context
	cancelBrowser context.CancelFunc
	cancelAlloc   context.CancelFunc
)

func start() {
	opts := append(chromedp.DefaultExecAllocatorOptions[:], // a copy; the global stays as it is
		chromedp.ExecPath(ExecPath),
		chromedp.NoSandbox,  // CI runs as root; Chromium refuses root with the sandbox
		chromedp.DisableGPU, // no GPU on field computers or CI (software rendering)
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-quic", true),
		chromedp.WindowSize(1280, 900),
	)
	allocCtx, ca := chromedp.NewExecAllocator(context.Background(), opts...)
	bctx, cb := chromedp.NewContext(allocCtx)
	// The first Do binds the browser to bctx, which has no deadline: a
	// timeout here would kill the browser later.
	if err := chromedp.Do(bctx); err != nil {
		cb()
		ca()
		startErr = err
		return
	}
	browserCtx, cancelBrowser, cancelAlloc = bctx, cb, ca
}

// Browser returns a context for a new tab of the shared browser, cancelled
// (and the tab closed) in tb.Cleanup. It starts the browser on first use.
func Browser(tb testing.TB) context.Context {
	tb.Helper()
	if testing.Short() {
		tb.Skip("browser test skipped under -short")
	}
	if _, err := os.Stat(ExecPath); err != nil {
		tb.Fatalf("headless browser not found at %s: install chromium: apt-get install -y chromium", ExecPath)
	}
	once.Do(start)
	if startErr != nil {
		tb.Fatalf("start chromium %s: %v", ExecPath, startErr)
	}
	tab, cancelTab := chromedp.NewContext(browserCtx)
	ctx, cancelTimeout := context.WithTimeout(tab, tabTimeout)
	col := &collector{}
	ctx = context.WithValue(ctx, collectorKey{}, col)
	// Subscribe before the test navigates, so no exception is missed.
	msgs := chromedp.Console(ctx)
	done := make(chan struct{})
	go func() {
		defer close(done)
		for m, err := range msgs {
			if err != nil {
				return
			}
			if m.IsException() {
				col.add(m.String())
			}
		}
	}()
	tb.Cleanup(func() {
		cancelTimeout()
		cancelTab()
		<-done
	})
	return ctx
}

// Exceptions returns the uncaught exceptions and unhandled promise
// rejections that the page of a Browser tab has thrown so far.
func Exceptions(ctx context.Context) []string {
	col, _ := ctx.Value(collectorKey{}).(*collector)
	if col == nil {
		return nil
	}
	col.mu.Lock()
	defer col.mu.Unlock()
	return append([]string(nil), col.msgs...)
}

// Shutdown closes the browser; call it from TestMain after m.Run. It may be
// called when no browser was started, and more than once.
func Shutdown() {
	if cancelBrowser == nil {
		return
	}
	ctx, cancel := context.WithTimeout(browserCtx, 5*time.Second)
	_ = chromedp.Cancel(ctx) // graceful close; the cancels below stop it anyway
	cancel()
	cancelBrowser()
	cancelAlloc()
	cancelBrowser, cancelAlloc = nil, nil
}

type collectorKey struct{}

type collector struct {
	mu   sync.Mutex
	msgs []string
}

func (c *collector) add(s string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.msgs = append(c.msgs, s)
}
