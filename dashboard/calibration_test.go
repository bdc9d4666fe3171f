package dashboard_test

import (
	"bytes"
	"context"
	"encoding/json"
	"encoding/xml"
	"errors"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"liftyard/calibrate"
	"liftyard/dashboard"
	"liftyard/internal/browsertest"
	"liftyard/storage"
)

// calStore opens a real store in a temporary directory and fills it with
// calibrations of the invented fore-cell example (a scenario of our own):
// a current one with hostile strings, an expired one, and one of another
// channel. It returns the store and the ids, current first.
func calStore(t *testing.T) (*storage.Store, []string) {
	t.Helper()
	st, err := storage.Open(filepath.Join(t.TempDir(), "cal.db"), storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	f, err := os.Open("../testdata/calibration/fore-cell.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	pts, err := calibrate.ReadPoints(f)
	if err != nil {
		t.Fatal(err)
	}
	fit, err := calibrate.FitPoly(pts, 2)
	if err != nil {
		t.Fatal(err)
	}
	recs := []calibrate.Record{
		{Channel: "n_fore", Unit: "N", Created: epoch.AddDate(0, -1, 0), Who: hostileRig, Reference: `M1 dead weights "cert" <4711>`,
			ReferenceU: 0.004, ValidUntil: epoch.AddDate(0, 5, 0), Note: `"><img src=x onerror=alert(2)>`, Points: pts, Fit: fit},
		{Channel: "n_fore", Unit: "N", Created: epoch.AddDate(-1, -3, 0), Who: "R. Tan", ValidUntil: epoch.AddDate(0, -3, 0), Points: pts, Fit: fit},
		{Channel: "pitot", Unit: "Pa", Created: epoch.AddDate(0, 0, -2), Points: pts, Fit: fit},
	}
	var ids []string
	for _, r := range recs {
		id, err := st.PutCalibration(r)
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, id)
	}
	return st, ids
}

// Ensure that the calibration pages, plots and API answer with the right
// status, content type and records, and 404 for an unknown id.
func TestCalibrationRoutes(t *testing.T) {
	st, ids := calStore(t)
	s, _ := newServer(t, dashboard.Config{Live: true, Runs: testRuns(), Calibrations: st})
	h := s.Handler()
	tests := []struct {
		path, ctype string
		status      int
		contains    []string
	}{
		{"/calibrations", "text/html; charset=utf-8", 200, []string{ids[0], ids[1], ids[2], "status-expired", "no expiry", "0.2338"}},
		{"/calibrations?channel=pitot", "text/html; charset=utf-8", 200, []string{ids[2], "of channel"}},
		{"/calibrations/" + ids[0], "text/html; charset=utf-8", 200, []string{"fit.svg", "residuals.svg", `calibration = { id = "` + ids[0] + `" }`, "2.43752e-05", "8140474.4", "-0.303675"}},
		{"/calibrations/" + ids[1], "text/html; charset=utf-8", 200, []string{"expired on 2025-03-14", "re-calibrate"}},
		{"/calibrations/nope", "text/html; charset=utf-8", 404, []string{"no such calibration"}},
		{"/calibrations/" + ids[0] + "/fit.svg", "image/svg+xml", 200, []string{"<svg"}},
		{"/calibrations/" + ids[0] + "/residuals.svg", "image/svg+xml", 200, []string{"<svg"}},
		{"/calibrations/nope/fit.svg", "text/html; charset=utf-8", 404, nil},
		{"/api/v1/calibrations", "application/json", 200, []string{`"id":"` + ids[0], `"expired":true`}},
		{"/api/v1/calibrations?channel=pitot", "application/json", 200, []string{`"id":"` + ids[2]}},
		{"/api/v1/calibrations/" + ids[0], "application/json", 200, []string{`"points":[`, `"residual":`}},
		{"/api/v1/calibrations/nope", "application/json", 404, []string{`{"error":"no such calibration"}`}},
	}
	for _, tt := range tests {
		t.Run(tt.path, func(t *testing.T) {
			rec := get(t, h, http.MethodGet, tt.path, nil)
			if rec.Code != tt.status {
				t.Fatalf("status %d, want %d: %s", rec.Code, tt.status, rec.Body)
			}
			if ct := rec.Header().Get("Content-Type"); ct != tt.ctype {
				t.Errorf("content type %q, want %q", ct, tt.ctype)
			}
			for _, want := range tt.contains {
				if !strings.Contains(rec.Body.String(), want) {
					t.Errorf("body lacks %q", want)
				}
			}
		})
	}
	// The pitot filter shows no fore-cell record.
	if body := get(t, h, http.MethodGet, "/api/v1/calibrations?channel=pitot", nil).Body.String(); strings.Contains(body, ids[0]) {
		t.Errorf("channel filter leaks other channels: %s", body)
	}
}

// Ensure that the list is the store's history, newest first, with the
// expired flag judged at the dashboard's clock.
func TestCalibrationAPI_List(t *testing.T) {
	st, ids := calStore(t)
	s, _ := newServer(t, dashboard.Config{Live: true, Calibrations: st})
	var got []struct {
		ID         string     `json:"id"`
		Expired    bool       `json:"expired"`
		ValidUntil *time.Time `json:"valid_until"`
		Points     []any      `json:"points"`
	}
	body := get(t, s.Handler(), http.MethodGet, "/api/v1/calibrations", nil).Body.Bytes()
	if err := json.Unmarshal(body, &got); err != nil {
		t.Fatalf("%v: %s", err, body)
	}
	want := []string{ids[2], ids[0], ids[1]} // by Created: 2 days, 1 month, 15 months ago
	if len(got) != len(want) {
		t.Fatalf("%d records, want %d", len(got), len(want))
	}
	for i, w := range want {
		if got[i].ID != w {
			t.Errorf("record %d is %s, want %s", i, got[i].ID, w)
		}
		if got[i].Points != nil {
			t.Errorf("the list carries points of %s", got[i].ID)
		}
	}
	if got[2].Expired != true || got[1].Expired || got[0].Expired || got[0].ValidUntil != nil {
		t.Errorf("expired flags / validity: %+v", got)
	}
}

// Ensure that the detail JSON matches its golden file (go test -update to
// refresh; read the diff before committing).
func TestCalibrationAPI_Golden(t *testing.T) {
	st, ids := calStore(t)
	s, _ := newServer(t, dashboard.Config{Live: true, Calibrations: st})
	body := get(t, s.Handler(), http.MethodGet, "/api/v1/calibrations/"+ids[0], nil).Body.Bytes()
	var pretty bytes.Buffer
	if err := json.Indent(&pretty, body, "", "  "); err != nil {
		t.Fatal(err)
	}
	golden := filepath.Join("testdata", "api", "calibration.golden")
	if *update {
		if err := os.WriteFile(golden, pretty.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("read golden (run with -update to create): %v", err)
	}
	if !bytes.Equal(pretty.Bytes(), want) {
		t.Errorf("detail JSON differs from %s:\ngot:\n%s\nwant:\n%s", golden, pretty.Bytes(), want)
	}
}

// Ensure that every string from a record is escaped on the pages.
func TestCalibrationPages_Escaping(t *testing.T) {
	st, ids := calStore(t)
	s, _ := newServer(t, dashboard.Config{Live: true, Calibrations: st})
	for _, path := range []string{"/calibrations", "/calibrations/" + ids[0]} {
		body := get(t, s.Handler(), http.MethodGet, path, nil).Body.String()
		for _, bad := range []string{hostileRig, `<img src=x`, `<4711>`} {
			if strings.Contains(body, bad) {
				t.Errorf("%s: unescaped %q", path, bad)
			}
		}
		if !strings.Contains(body, "&lt;script&gt;alert(1)&lt;/script&gt;") {
			t.Errorf("%s: the hostile name is not shown escaped", path)
		}
	}
}

// Ensure that the fit and residual plots are well-formed SVG with their
// axis labels, units and legend.
func TestCalibrationSVG(t *testing.T) {
	st, ids := calStore(t)
	s, _ := newServer(t, dashboard.Config{Live: true, Calibrations: st})
	tests := []struct {
		path string
		want []string
	}{
		{"/calibrations/" + ids[0] + "/fit.svg", []string{"raw reading", "applied value [N]", "fitted polynomial", "loading points", "unloading points"}},
		{"/calibrations/" + ids[0] + "/residuals.svg", []string{"raw reading", "residual [N]", "± residual SD", "unloading points"}},
	}
	for _, tt := range tests {
		body := get(t, s.Handler(), http.MethodGet, tt.path, nil).Body.Bytes()
		dec := xml.NewDecoder(bytes.NewReader(body))
		var text strings.Builder
		for {
			tok, err := dec.Token()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("%s: not well-formed XML: %v", tt.path, err)
			}
			if cd, ok := tok.(xml.CharData); ok {
				text.Write(cd)
			}
		}
		for _, w := range tt.want {
			if !strings.Contains(text.String(), w) {
				t.Errorf("%s: no text %q", tt.path, w)
			}
		}
	}
}

// Ensure that without a calibration store the calibration pages and API
// answer 404 saying that calibrations are off, the navigation has no
// Calibrations link, and the rest of the dashboard works.
func TestCalibration_NoStore(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true, Runs: testRuns()})
	h := s.Handler()
	for _, path := range []string{"/calibrations", "/calibrations/x", "/calibrations/x/fit.svg", "/api/v1/calibrations", "/api/v1/calibrations/x"} {
		if rec := get(t, h, http.MethodGet, path, nil); rec.Code != 404 || !strings.Contains(rec.Body.String(), "calibrations are off") {
			t.Errorf("GET %s without store: %d %s", path, rec.Code, rec.Body)
		}
	}
	if rec := get(t, h, http.MethodGet, "/runs", nil); rec.Code != 200 || strings.Contains(rec.Body.String(), `href="/calibrations"`) {
		t.Errorf("runs page without calibrations: %d, offers the Calibrations link: %v", rec.Code, strings.Contains(rec.Body.String(), `href="/calibrations"`))
	}
}

// Ensure that a calibration page renders in a real browser with both plots
// loaded and no exception; the screenshot goes to the test's artifacts and
// /tmp/calibration-page.png.
func TestCalibrationPage_Browser(t *testing.T) {
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	st, ids := calStore(t)
	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "127.0.0.1:0", Calibrations: st})
	ts := loopbackServer(t, s)
	if err := chromedp.Do(ctx, chromedp.Navigate(ts.URL+"/calibrations/"+ids[0])); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`[...document.querySelectorAll(".polar img")].filter(i => i.complete && i.naturalWidth > 0).length === 2`,
		chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		t.Fatalf("plots did not load: %v", err)
	}
	n, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll("#points tbody tr").length`))
	if err != nil || n != 9 {
		t.Errorf("points table has %d rows (%v), want 9", n, err)
	}
	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(t.ArtifactDir(), "calibration-page.png"), png, 0o644); err != nil {
		t.Error(err)
	}
	os.WriteFile("/tmp/calibration-page.png", png, 0o644)
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("page threw: %q", ex)
	}
	if err := chromedp.Do(ctx, chromedp.Navigate(ts.URL+"/calibrations")); err != nil {
		t.Fatal(err)
	}
	rows, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll("#calibrations tbody tr").length`))
	if err != nil || rows != 3 {
		t.Errorf("history table has %d rows (%v), want 3", rows, err)
	}
	png, err = chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err == nil {
		os.WriteFile("/tmp/calibration-list.png", png, 0o644)
	}
}
