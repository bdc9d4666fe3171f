package main

import (
	"context"
	"encoding/json"
	"fmt"
	"log/slog"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/estimate"
	"liftyard/internal/browsertest"
)

// fetched is what a fetch from the page answered.
type fetched struct {
	Status int    `json:"status"`
	Body   string `json:"body"`
}

// browserFetch GETs path from the page open in tab, as the page's own
// scripts would.
func browserFetch(t *testing.T, tab context.Context, path string) fetched {
	t.Helper()
	js := fmt.Sprintf(`(async () => { const r = await fetch(%s, {cache: "no-store"}); return {status: r.status, body: await r.text()}; })()`, jsString(path))
	f, err := chromedp.Run(tab, chromedp.Evaluate[fetched](js, chromedp.EvalAwaitPromise))
	require.NoError(t, err, "fetch %s", path)
	return f
}

// Ensure that while a roof rig records, its run page, GET /api/v1/runs/{id}
// and its segments answer 200 through the recorder's dashboard, seen from a
// real headless Chromium, with the zones of the rig in the rows (issue 9:
// they answered 500 "json: cannot set embedded pointer to unexported
// struct" once the first block was published).
func TestRecord_RoofRunPageInBrowser(t *testing.T) {
	tab := browsertest.Browser(t)
	r, toml := simRoofRig(t) // roof-yard.toml with a simulated tap scanner
	var logs syncBuf
	type ready struct {
		url string
		id  uint64
	}
	readyc := make(chan ready, 1)
	m := &Main{Rig: r, RigTOML: toml, DBPath: filepath.Join(t.TempDir(), "roof.db"), Addr: "127.0.0.1:0",
		Logger:  slog.New(slog.NewTextHandler(&logs, nil)),
		OnReady: func(url string, id uint64) { readyc <- ready{url, id} },
		Roof:    estimate.RoofConfig{Block: time.Second}}
	ctx, cancel := context.WithCancel(t.Context())
	done := make(chan error, 1)
	go func() { done <- m.Run(ctx) }()
	defer func() {
		cancel()
		select {
		case err := <-done:
			assert.NoError(t, err, "recorder; log:\n%s", logs.String())
		case <-time.After(10 * time.Second):
			t.Error("recorder did not stop within 10 s")
		}
	}()
	var rd ready
	select {
	case rd = <-readyc:
	case err := <-done:
		t.Fatalf("recorder ended before its dashboard listened: %v\n%s", err, logs.String())
	case <-time.After(20 * time.Second):
		t.Fatal("recorder did not start its dashboard within 20 s")
	}
	runPath := fmt.Sprintf("/runs/%d", rd.id)
	apiRun := fmt.Sprintf("/api/v1/runs/%d", rd.id)
	require.NoError(t, chromedp.Do(tab, chromedp.Navigate(rd.url+runPath)))

	// Wait for complete blocks (one row per zone per block) while the rig
	// keeps recording.
	var rows []map[string]any
	deadline := time.Now().Add(20 * time.Second)
	for {
		f := browserFetch(t, tab, apiRun+"/segments")
		require.Equal(t, 200, f.Status, "GET %s/segments while recording: %s\nlog:\n%s", apiRun, f.Body, logs.String())
		require.NoError(t, json.Unmarshal([]byte(f.Body), &rows), f.Body)
		if len(rows) >= 3 {
			break
		}
		require.True(t, time.Now().Before(deadline), "no complete roof block within 20 s: %s", f.Body)
		time.Sleep(200 * time.Millisecond)
	}
	zones := map[string]bool{}
	for i, row := range rows {
		z, _ := row["zone"].(string)
		zones[z] = true
		_, ok := row["cp_mean"].(float64)
		assert.True(t, ok, "row %d (%s): cp_mean = %v, want a number", i, z, row["cp_mean"])
	}
	for _, z := range []string{"corner", "edge", "field"} {
		assert.True(t, zones[z], "segments lack zone %q: %v", z, zones)
	}

	f := browserFetch(t, tab, apiRun)
	require.Equal(t, 200, f.Status, "GET %s while recording: %s", apiRun, f.Body)
	var run struct {
		ID     uint64 `json:"id"`
		Kind   string `json:"kind"`
		Status string `json:"status"`
	}
	require.NoError(t, json.Unmarshal([]byte(f.Body), &run), f.Body)
	assert.Equal(t, rd.id, run.ID)
	assert.Equal(t, "roof", run.Kind)
	assert.Equal(t, "recording", run.Status, "the checks ran while the rig recorded")

	f = browserFetch(t, tab, runPath)
	require.Equal(t, 200, f.Status, "GET %s while recording: %s", runPath, f.Body)
	require.NoError(t, chromedp.Do(tab, chromedp.Navigate(rd.url+runPath)))
	text, err := chromedp.Run(tab, chromedp.Text(chromedp.ID("roof-segments")))
	require.NoError(t, err, "the run page has the zone table")
	for _, z := range []string{"corner", "edge", "field"} {
		assert.Contains(t, text, z, "zone table")
	}
	caution, err := chromedp.Run(tab, chromedp.Text(".roof-caution"))
	require.NoError(t, err)
	assert.True(t, strings.Contains(caution, "Wind loads on buildings"), "roof caution %q", caution)
	assert.Empty(t, browsertest.Exceptions(tab), "no JavaScript errors on the run page")
}
