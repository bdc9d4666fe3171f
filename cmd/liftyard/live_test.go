package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/serial"
	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/internal/browsertest"
	"liftyard/process"
	"liftyard/storage"
)

// amplifier is a simulated serial amplifier behind a pty that the test can
// silence (a pulled cable) and whose axial cell it can load by hand.
type amplifier struct {
	paused  atomic.Bool
	axialN  atomic.Pointer[float64] // nil: the simulator's own load
	written atomic.Int64            // blocks written
}

// run writes the simulator's blocks as frames until ctx is done, leaving
// out the blocks while paused and replacing a_main's reading (calibration
// poly [-2.04, 0.0005] in the foil rig: raw = (F + 2.04)/0.0005).
func (a *amplifier) run(ctx context.Context, t *testing.T, s *sim.Rig, w io.Writer, channels []string) {
	in := make(chan acquire.Block, 64)
	out := make(chan acquire.Block, 64)
	var wg sync.WaitGroup
	wg.Go(func() { _ = s.Run(ctx, in) })
	wg.Go(func() {
		for {
			select {
			case <-ctx.Done():
				return
			case b := <-in:
				if a.paused.Load() {
					continue
				}
				if f := a.axialN.Load(); f != nil {
					raw := b.Raw("a_main")
					for i := range raw {
						raw[i] = (*f + 2.04) / 0.0005
					}
				}
				a.written.Add(1)
				out <- b
			}
		}
	})
	wg.Go(func() { _ = serial.WriteFrames(ctx, w, channels, out) })
	t.Cleanup(wg.Wait)
}

type liveDoc struct {
	Warnings []string `json:"warnings"`
	Stale    bool     `json:"stale"`
	Sources  []struct {
		Source       string  `json:"source"`
		AgeS         float64 `json:"age_s"`
		LimitS       float64 `json:"limit_s"`
		BlockPeriodS float64 `json:"block_period_s"`
		Stale        bool    `json:"stale"`
	} `json:"sources"`
}

type healthDoc struct {
	State string `json:"state"`
	Loads []struct {
		Channel  string  `json:"channel"`
		State    string  `json:"state"`
		Now      string  `json:"now"`
		Latched  bool    `json:"latched"`
		PeakFrac float64 `json:"peak_frac"`
	} `json:"loads"`
}

// tryJSON reads url into v; false until it answers 200 with JSON.
func tryJSON(url string, v any) bool {
	resp, err := http.Get(url)
	if err != nil {
		return false
	}
	defer resp.Body.Close()
	return resp.StatusCode == http.StatusOK && json.NewDecoder(resp.Body).Decode(v) == nil
}

func getJSON(t *testing.T, url string, v any) {
	t.Helper()
	resp, err := http.Get(url)
	require.NoError(t, err)
	defer resp.Body.Close()
	require.Equal(t, http.StatusOK, resp.StatusCode, url)
	require.NoError(t, json.NewDecoder(resp.Body).Decode(v))
}

// Ensure, on a real serial pty with the recorder and a headless Chromium,
// the two safety behaviours of the live page (issue 13, must show):
//   - a cell pushed to 118 % of its rated 100 N and back to 20 % stays in
//     alarm (API health state and the page's red banner) until the
//     operator acknowledges it on the page; the acknowledgement is stored
//     as an event with the run;
//   - a source that stops is named in a stale warning of /api/v1/live
//     within 3 of its block periods and the page greys its tiles; when it
//     restarts, the warning and the grey clear.
func TestRecord_LiveStaleAndOverload(t *testing.T) {
	tab := browsertest.Browser(t)
	master, path, err := serial.OpenPTY()
	require.NoError(t, err)
	t.Cleanup(func() { master.Close() })
	r, toml := serialRig(t, path)
	fluid, err := estimate.Properties(r.Fluid, r.Conditions)
	require.NoError(t, err)
	s, err := sim.New(r, sim.Config{QPa: estimate.DynamicPressure(fluid.RhoKgPerM3, 2), Seed: 5, StepsDeg: []float64{4}}, fluid.RhoKgPerM3)
	require.NoError(t, err)

	db := filepath.Join(t.TempDir(), "live.db")
	urlc := make(chan string, 1)
	m := &Main{Rig: r, RigTOML: toml, DBPath: db, Addr: "127.0.0.1:0", OnReady: func(u string, _ uint64) { urlc <- u }}
	ctx, cancel := context.WithTimeout(t.Context(), 40*time.Second)
	defer cancel()
	recDone := make(chan error, 1)
	go func() { recDone <- m.Run(ctx) }()
	amp := &amplifier{}
	ampCtx, stopAmp := context.WithCancel(ctx)
	defer stopAmp()
	amp.run(ampCtx, t, s, master, r.Sources[0].Channels)
	base := <-urlc

	var live liveDoc
	var health healthDoc
	require.Eventually(t, func() bool {
		resp, err := http.Get(base + "/api/v1/live")
		if err != nil {
			return false
		}
		defer resp.Body.Close()
		return resp.StatusCode == http.StatusOK && json.NewDecoder(resp.Body).Decode(&live) == nil &&
			len(live.Sources) == 1 && live.Sources[0].BlockPeriodS > 0
	}, 10*time.Second, 20*time.Millisecond, "a live estimate with the source's block period")
	assert.False(t, live.Stale, "%+v", live)

	require.NoError(t, chromedp.Do(tab, chromedp.Navigate(base+"/")))
	waitFor := func(expr string) {
		t.Helper()
		_, err := chromedp.Run(tab, chromedp.Poll[bool](expr, chromedp.WithPollingTimeout(10*time.Second)))
		require.NoError(t, err, "waiting for %s", expr)
	}
	waitFor(`document.getElementById("conn").textContent === "connected" && document.getElementById("fresh").textContent.startsWith("fresh")`)

	// Overload: 118 % of the rated 100 N, then back to 20 %.
	over, back := 118.0, 20.0
	amp.axialN.Store(&over)
	require.Eventually(t, func() bool {
		return tryJSON(base+"/api/v1/health", &health) && health.State == "alarm"
	}, 10*time.Second, 20*time.Millisecond)
	amp.axialN.Store(&back)
	require.Eventually(t, func() bool {
		tryJSON(base+"/api/v1/health", &health)
		for _, l := range health.Loads {
			if l.Channel == "a_main" && l.Now == "ok" && l.PeakFrac < 0.25 {
				return true
			}
		}
		return false
	}, 10*time.Second, 20*time.Millisecond, "the load falls back to 20 %")
	time.Sleep(1200 * time.Millisecond) // more than one health period at 20 %
	getJSON(t, base+"/api/v1/health", &health)
	assert.Equal(t, "alarm", health.State, "the alarm is held at 20 %")
	waitFor(`[...document.querySelectorAll("#load-alarms li.alarm")].some(li => li.textContent.includes("a_main") && li.textContent.includes("held until acknowledged"))`)
	require.NoError(t, chromedp.Do(tab, chromedp.Click(chromedp.CSS(`#load-alarms li.alarm button.ack`))))
	waitFor(`document.querySelectorAll("#load-alarms li.alarm").length === 0`)
	getJSON(t, base+"/api/v1/health", &health)
	assert.Equal(t, "ok", health.State, "acknowledged: %+v", health.Loads)
	resp, err := http.Post(base+"/api/v1/loads/a_main/acknowledge", "text/plain", nil)
	require.NoError(t, err)
	resp.Body.Close()
	assert.Equal(t, http.StatusConflict, resp.StatusCode, "nothing left to acknowledge")

	// Stop the source: the API names it within 3 block periods.
	amp.paused.Store(true)
	paused := time.Now()
	require.Eventually(t, func() bool {
		return tryJSON(base+"/api/v1/live", &live) && live.Stale
	}, 5*time.Second, 10*time.Millisecond)
	seen := time.Since(paused)
	require.Len(t, live.Sources, 1)
	src := live.Sources[0]
	assert.Equal(t, "carriage", src.Source)
	assert.True(t, src.Stale)
	// The server published the warning when the source's data were this
	// old: past its limit (2 periods) and within 3 periods.
	assert.LessOrEqual(t, src.AgeS, 3*src.BlockPeriodS, "age %.3f s at the first stale estimate; block period %.3f s", src.AgeS, src.BlockPeriodS)
	assert.Greater(t, src.AgeS, src.LimitS)
	t.Logf("block period %.3f s; stale estimate published at age %.3f s; seen by polling %s after the pause", src.BlockPeriodS, src.AgeS, seen)
	require.NotEmpty(t, live.Warnings)
	assert.Contains(t, live.Warnings[0], "source carriage silent since")
	waitFor(`document.getElementById("tiles").classList.contains("stale") && !document.getElementById("stale-banner").hidden && document.getElementById("stale-banner").textContent.includes("carriage")`)
	fresh, err := chromedp.Run(tab, chromedp.Text(chromedp.ID("fresh")))
	require.NoError(t, err)
	conn, err := chromedp.Run(tab, chromedp.Text(chromedp.ID("conn")))
	require.NoError(t, err)
	assert.Contains(t, fresh, "STALE")
	assert.Equal(t, "connected", conn, "the browser's link is still up: two indicators")
	getJSON(t, base+"/api/v1/health", &health)
	assert.Equal(t, "stale", health.State)

	// Restart: the warning clears.
	amp.paused.Store(false)
	require.Eventually(t, func() bool {
		return tryJSON(base+"/api/v1/live", &live) && !live.Stale && (len(live.Warnings) == 0 || !strings.Contains(live.Warnings[0], "silent"))
	}, 5*time.Second, 10*time.Millisecond)
	waitFor(`!document.getElementById("tiles").classList.contains("stale") && document.getElementById("stale-banner").hidden`)
	assert.Empty(t, browsertest.Exceptions(tab), "no JavaScript errors")

	stopAmp()
	cancel()
	require.NoError(t, <-recDone)
	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	evs, err := st.Events(m.RunID())
	require.NoError(t, err)
	var kinds []string
	for _, ev := range evs {
		kinds = append(kinds, fmt.Sprintf("%s: %s", ev.Kind, ev.Message))
	}
	all := strings.Join(kinds, "\n")
	assert.Contains(t, all, string(process.EventOverloadAcknowledged)+": overload alarm of channel a_main acknowledged (run maximum 118 %")
	assert.Contains(t, all, "by dashboard client 127.0.0.1:")
}
