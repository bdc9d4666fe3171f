package dashboard

import (
	"encoding/json"
	"strings"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/estimate"
)

// Ensure that the hub keeps the last trendKeep of live points by data time,
// adds no point for a republished estimate whose data did not move (a
// silent source), starts afresh when the clock goes back or a new run
// starts (issue 13: trend history on connect).
func TestHub_TrendHistory(t *testing.T) {
	h := newHub("e")
	t0 := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	pt := func(s float64) trendPoint {
		return trendPoint{T: t0.Add(time.Duration(s * float64(time.Second))), QPa: 100}
	}
	for i := range 2000 { // 400 s at 5 per second
		h.publishLive([]byte(`{}`), pt(float64(i)/5))
	}
	n := len(h.trend)
	if n != 1501 || !h.trend[0].T.Equal(pt(399.8-300).T) {
		t.Fatalf("kept %d points from %s, want 1501 from 5 min before the newest", n, h.trend[0].T)
	}
	h.publishLive([]byte(`{}`), pt(399.8)) // republished, same data time
	if len(h.trend) != n {
		t.Errorf("a republished estimate added a point")
	}
	var got []trendPoint
	if err := json.Unmarshal(h.history(), &got); err != nil || len(got) != n {
		t.Fatalf("history JSON: %d points, %v", len(got), err)
	}
	h.publishLive([]byte(`{}`), pt(1)) // device reset: the clock went back
	if len(h.trend) != 1 {
		t.Errorf("after the clock went back: %d points, want 1", len(h.trend))
	}
	h.setRun(2, []byte(`{}`))
	if _, snap := h.subscribe(0); snap.history != nil || len(h.trend) != 0 {
		t.Errorf("a new run keeps the old history")
	}
}

// Ensure that the live JSON, which is also what the site broker gets
// ([publish]), carries the stale flag, the source's clock and the warning.
func TestEncodeLive_Stale(t *testing.T) {
	l := estimate.Live{T: time.Unix(10, 0), Stale: true, Warnings: []string{"source carriage silent since 10:00:00.0 UTC"},
		Sources: []acquire.SourceAge{{Source: "carriage", Age: 300 * time.Millisecond, Limit: 250 * time.Millisecond, BlockPeriod: 100 * time.Millisecond, Stale: true}}}
	b := string(EncodeLive(l))
	for _, want := range []string{`"stale":true`, `"age_s":0.3`, `"source":"carriage"`, `"limit_s":0.25`, `"block_period_s":0.1`, `silent since`} {
		if !strings.Contains(b, want) {
			t.Errorf("live JSON lacks %s: %s", want, b)
		}
	}
}
