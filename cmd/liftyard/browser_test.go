package main

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire/sim"
	"liftyard/internal/browsertest"
)

func TestMain(m *testing.M) {
	code := m.Run()
	browsertest.Shutdown()
	os.Exit(code)
}

// Ensure that the whole demo, seen in a real headless Chromium, shows live
// numbers that change while the rig runs and a segment row once a step has
// been held (issue 3: "the live page shows changing values").
func TestDemo_LivePageInBrowser(t *testing.T) {
	tab := browsertest.Browser(t)
	db := filepath.Join(t.TempDir(), "browser.db")
	urlc := make(chan string, 1)
	m := &Main{DBPath: db, Addr: "127.0.0.1:0", OnReady: func(url string, _ uint64) { urlc <- url }}
	ctx, cancel := context.WithCancel(t.Context())
	done := make(chan error, 1)
	go func() {
		_, err := runDemoSession(ctx, m, sim.Config{Seed: 3, StepsDeg: []float64{0, 5}, Hold: 2 * time.Second, Move: 400 * time.Millisecond})
		done <- err
	}()
	defer func() {
		cancel()
		require.NoError(t, <-done)
	}()
	var url string
	select {
	case url = <-urlc:
	case <-time.After(20 * time.Second):
		t.Fatal("demo did not start its dashboard")
	}

	require.NoError(t, chromedp.Do(tab, chromedp.Navigate(url+"/")))
	waitFor := func(expr string, within time.Duration) {
		t.Helper()
		_, err := chromedp.Run(tab, chromedp.Poll[bool](expr, chromedp.WithPollingTimeout(within)))
		require.NoError(t, err, "waiting for %s", expr)
	}
	// A number readout: text that parses as a number.
	const clIsNumber = `!isNaN(parseFloat(document.getElementById("v-cl").textContent))`
	waitFor(clIsNumber, 15*time.Second)
	first, err := chromedp.Run(tab, chromedp.Text(chromedp.ID("v-q")))
	require.NoError(t, err)
	// q fluctuates with the simulated turbulence: the readout must move.
	waitFor(`document.getElementById("v-q").textContent !== `+jsString(first), 10*time.Second)
	waitFor(`document.querySelectorAll("#segments tbody tr").length >= 1`, 15*time.Second)

	rig, err := chromedp.Run(tab, chromedp.Text(chromedp.ID("run-rig")))
	require.NoError(t, err)
	assert.Contains(t, rig, "foil-towtank")
	health, err := chromedp.Run(tab, chromedp.Text(chromedp.ID("health")))
	require.NoError(t, err)
	assert.Contains(t, health, "carriage")
	assert.Empty(t, browsertest.Exceptions(tab), "no JavaScript errors on the live page")

	png, err := chromedp.Run(tab, chromedp.FullScreenshot(100))
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(t.ArtifactDir(), "demo-live.png"), png, 0o644))
	if dir := os.Getenv("LIFTYARD_SCREENSHOTS"); dir != "" {
		require.NoError(t, os.WriteFile(filepath.Join(dir, "demo-live.png"), png, 0o644))
	}
}

// jsString quotes s as a JavaScript string literal (JSON is valid JS).
func jsString(s string) string {
	b, _ := json.Marshal(s)
	return string(b)
}
