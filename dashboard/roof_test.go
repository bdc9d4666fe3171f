package dashboard_test

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"liftyard/calibrate"
	"liftyard/dashboard"
	"liftyard/estimate"
	"liftyard/internal/browsertest"
	"liftyard/rig"
	"liftyard/storage"
)

// roofRun is an invented roof mock-up run (a scenario of our own): two
// 10-minute blocks of three zones; "corner" has a design value.
func roofRun() (storage.Run, []estimate.Segment) {
	run := storage.Run{ID: 5, Rig: "roof-yard", Kind: "roof", Fluid: "air", AreaM2: 6, AreaKind: "tributary",
		Started: epoch.Add(-time.Hour), Ended: epoch.Add(-40 * time.Minute), Status: storage.StatusComplete, Segments: 6}
	var segs []estimate.Segment
	for i, z := range []string{"corner", "edge", "field", "corner", "edge", "field"} {
		t0 := run.Started.Add(time.Duration(i/3) * 10 * time.Minute)
		sg := estimate.Segment{
			Index: i, TStart: t0, TEnd: t0.Add(10 * time.Minute), N: 60000, NEff: 900,
			QPa: v(96.4, 0.9), SpeedMPerS: v(12.5, 0.06), RhoKgPerM3: 1.232, En: math.NaN(),
			Zone: z, CpMean: v(-0.9-0.4*float64(i%3), 0.05), CpRMS: 0.3, CpPeak: -2.6 + 0.5*float64(i%3),
			UpliftN: v(-200, 10), Block: i / 3, CpMin: -2.9 + 0.5*float64(i%3), CpMax: -0.2, CpPeakU: 0.1,
			CpPeakMax: -0.25, CpPeakMaxU: 0.05, CpInt: calibrate.Value{X: 0.2, Dof: math.Inf(1)}, QAt: "mast",
			TurbulenceIntensity: 0.15, DirectionRad: rig.Rad(245), DirectionSpreadRad: rig.Rad(11),
			SectorRad: rig.Rad(240), SectorOutFrac: 0.04,
		}
		if z == "corner" {
			sg.DesignCp = calibrate.Value{X: -2.2, U: 0.25 / 2, Dof: math.Inf(1)}
			sg.En = (sg.CpMean.X - sg.DesignCp.X) / math.Hypot(sg.CpMean.U95(), 0.25)
			sg.DesignVs = "cp_mean"
		}
		segs = append(segs, sg)
	}
	// The example rig's taps (positions for the tap map) and per-tap rows
	// of block 0 for three of them.
	toml, err := os.ReadFile("../testdata/rigs/roof-yard.toml")
	if err != nil {
		panic(err)
	}
	run.RigTOML = string(toml)
	for j, tap := range []string{"t01", "t05", "t09"} {
		segs = append(segs, estimate.Segment{
			Index: 6 + j, Block: 0, TStart: run.Started, TEnd: run.Started.Add(10 * time.Minute), N: 60000, NEff: 900,
			QPa: v(96.4, 0.9), RhoKgPerM3: 1.232, En: math.NaN(), Zone: []string{"corner", "edge", "field"}[j], Tap: tap,
			CpMean: v(-1.9+0.5*float64(j), 0.06), CpRMS: 0.35, CpPeak: -3.0, CpMin: math.NaN(), CpMax: math.NaN(),
			CpPeakMax: math.NaN(), DirectionRad: math.NaN(), DirectionSpreadRad: math.NaN(), SectorRad: math.NaN(), SectorOutFrac: math.NaN(),
		})
	}
	return run, segs
}

func roofLive() estimate.Live {
	return estimate.Live{
		T: epoch, Window: 10 * time.Second, N: 2000, QPa: v(96.4, 0.9), SpeedMPerS: v(12.5, 0.06), RhoKgPerM3: 1.232,
		DirectionRad: rig.Rad(245), DirectionSpreadRad: rig.Rad(12),
		Zones: []estimate.ZoneLive{
			{Zone: "corner", CpMean: v(-1.7, 0.05), CpMin: -3.1, DesignCp: calibrate.Value{X: -2.2, U: 0.125, Dof: math.Inf(1)}, En: 1.84},
			{Zone: "edge", CpMean: v(-1.3, 0.05), CpMin: -2.4, DesignCp: calibrate.Value{X: -1.5, U: 0.1, Dof: math.Inf(1)}, En: 0.9},
			{Zone: "field", CpMean: v(-0.8, 0.04), CpMin: -1.5, En: math.NaN()},
		},
	}
}

func roofServer(t *testing.T) *dashboard.Server {
	st := testRuns()
	run, segs := roofRun()
	st.runs[run.ID], st.segs[run.ID] = run, segs
	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "127.0.0.1:0", Runs: st, Marks: noMarks{}, ApplyMarks: noApply})
	return s
}

// noMarks is a MarkStore of runs without marks that refuses to keep any.
type noMarks struct{}

func (noMarks) Marks(uint64) ([]estimate.Mark, error)  { return nil, nil }
func (noMarks) PutMarks(uint64, []estimate.Mark) error { return errors.New("noMarks keeps no marks") }
func (noMarks) RunStart(uint64) (time.Time, error)     { return epoch, nil }

func noApply(context.Context, uint64) (dashboard.MarksApplied, error) {
	return dashboard.MarksApplied{}, errors.New("noApply applies nothing")
}

// Ensure that the roof API rows (live zones, roof segment rows) match
// their goldens, and that a force-balance live estimate has no "zones".
func TestAPI_RoofGolden(t *testing.T) {
	s := roofServer(t) // run 5 is not the current run: its rows come from the store
	s.PublishLive(roofLive())
	for _, tt := range []struct{ name, path string }{
		{"roof_live", "/api/v1/live"},
		{"roof_segments", "/api/v1/runs/5/segments"},
	} {
		rec := get(t, s.Handler(), "GET", tt.path, nil)
		var pretty bytes.Buffer
		if err := json.Indent(&pretty, rec.Body.Bytes(), "", "  "); err != nil {
			t.Fatalf("GET %s: not JSON: %v\n%s", tt.path, err, rec.Body)
		}
		golden := filepath.Join("testdata", "api", tt.name+".golden")
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
			t.Errorf("GET %s differs from %s:\ngot:\n%s\nwant:\n%s", tt.path, golden, pretty.Bytes(), want)
		}
	}
	var live struct {
		Zones []map[string]any `json:"zones"`
	}
	if err := json.Unmarshal(get(t, s.Handler(), "GET", "/api/v1/live", nil).Body.Bytes(), &live); err != nil {
		t.Fatal(err)
	}
	// |En| ≤ 1 agrees (docs/design.md §4); no design value: agrees is null.
	var rows []map[string]any
	if err := json.Unmarshal(get(t, s.Handler(), "GET", "/api/v1/runs/5/segments", nil).Body.Bytes(), &rows); err != nil {
		t.Fatal(err)
	}
	// 6 zone rows and 3 per-tap rows, one schema.
	if len(rows) != 9 || rows[6]["tap"] != "t01" || rows[0]["tap"] != nil || rows[0]["zone"] != "corner" || rows[0]["cp_mean"] != -0.9 || rows[0]["agrees"] != false || rows[1]["agrees"] != nil {
		t.Fatalf("roof rows %v", rows)
	}
	if len(live.Zones) != 3 || live.Zones[0]["agrees"] != false || live.Zones[1]["agrees"] != true || live.Zones[2]["agrees"] != nil {
		t.Errorf("zones %v", live.Zones)
	}
	if u := live.Zones[0]["cp_u95"].(float64); math.Abs(u-0.05*calibrate.K95(math.Inf(1))) > 1e-12 {
		t.Errorf("cp_u95 = %v", u)
	}
	s.PublishLive(liveSample(3, 0.4))
	if body := get(t, s.Handler(), "GET", "/api/v1/live", nil).Body.String(); strings.Contains(body, `"zones"`) {
		t.Errorf("force-balance live estimate has zones: %s", body)
	}
}

// Ensure that a roof run page shows the wind-load caution, the zone plot
// and the roof table, and neither the polar nor the marks form; and that a
// foil run page is unchanged in those respects.
func TestRunPage_Roof(t *testing.T) {
	s := roofServer(t)
	body := get(t, s.Handler(), "GET", "/runs/5", nil).Body.String()
	for _, want := range []string{"Wind loads on buildings", "local building code", "/runs/5/zones.svg", `id="roof-segments"`,
		"<td>corner</td>", "−", "−0.900 ± 0.098", "−1.700 ± 0.098", "agrees?"} {
		if !strings.Contains(body, want) {
			t.Errorf("roof run page lacks %q", want)
		}
	}
	for _, not := range []string{"polar.svg", `id="mark-form"`} {
		if strings.Contains(body, not) {
			t.Errorf("roof run page has %q", not)
		}
	}
	foil := get(t, s.Handler(), "GET", "/runs/1", nil).Body.String()
	if !strings.Contains(foil, "polar.svg") || strings.Contains(foil, "roof-segments") || !strings.Contains(foil, `id="mark-form"`) {
		t.Errorf("foil run page changed")
	}
	// The corner's En = (−0.9 + 2.2)/√(0.098² + 0.25²) = 4.8 > 1: "no".
	if !strings.Contains(body, "<strong>no</strong>") {
		t.Errorf("roof run page does not flag the disagreeing corner")
	}
}

// Ensure that the zone plot is an SVG naming every zone, and says so when
// a run has no roof rows.
func TestZonesSVG(t *testing.T) {
	s := roofServer(t)
	rec := get(t, s.Handler(), "GET", "/runs/5/zones.svg", nil)
	if rec.Code != 200 || rec.Header().Get("Content-Type") != "image/svg+xml" {
		t.Fatalf("status %d, type %q", rec.Code, rec.Header().Get("Content-Type"))
	}
	svg := rec.Body.String()
	for _, want := range []string{"<svg", "corner", "edge", "field", "design value", "net Cp"} {
		if !strings.Contains(svg, want) {
			t.Errorf("zones.svg lacks %q", want)
		}
	}
	if svg := get(t, s.Handler(), "GET", "/runs/1/zones.svg", nil).Body.String(); !strings.Contains(svg, "no roof blocks yet") {
		t.Errorf("zones.svg of a foil run does not say it has no roof blocks")
	}
	if rec := get(t, s.Handler(), "GET", "/runs/999/zones.svg", nil); rec.Code != 404 {
		t.Errorf("unknown run: status %d", rec.Code)
	}
}

// Ensure that the tap map is the report's SVG: the taps with per-tap rows
// by name and value, a legend of Cp steps; an empty frame that says so for
// a run without per-tap rows; and that the roof run page shows it.
func TestTapsSVG(t *testing.T) {
	s := roofServer(t)
	rec := get(t, s.Handler(), "GET", "/runs/5/taps.svg", nil)
	if rec.Code != 200 || rec.Header().Get("Content-Type") != "image/svg+xml" {
		t.Fatalf("status %d, type %q", rec.Code, rec.Header().Get("Content-Type"))
	}
	svg := rec.Body.String()
	for _, want := range []string{"<svg", "Tap map", "t01 -1.90", "t05 -1.40", "t09 -0.90", "Cp -1.90", "Cp -0.90", "x [m]"} {
		if !strings.Contains(svg, want) {
			t.Errorf("taps.svg lacks %q", want)
		}
	}
	if strings.Contains(svg, "t12") {
		t.Error("taps.svg shows a tap without a per-tap row")
	}
	if svg := get(t, s.Handler(), "GET", "/runs/1/taps.svg", nil).Body.String(); !strings.Contains(svg, "no per-tap results") {
		t.Errorf("taps.svg of a foil run does not say it has no taps")
	}
	if body := get(t, s.Handler(), "GET", "/runs/5", nil).Body.String(); !strings.Contains(body, "/runs/5/taps.svg") || strings.Count(body, "<td>t0") > 0 {
		t.Errorf("roof run page lacks the tap map, or lists tap rows in the zone table")
	}
}

// Ensure that the live page in a real browser shows the roof caution and
// fills the zone table from the stream, hides the lift tiles, and adds a
// block row for a roof segment.
func TestLivePage_RoofBrowser(t *testing.T) {
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	s := roofServer(t)
	// Serve (not httptest) so that stopping it ends the open event stream.
	ln := listen(t)
	sctx, stop := context.WithCancel(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- s.Serve(sctx, ln) }()
	t.Cleanup(func() { stop(); <-errc })
	run, segs := roofRun()
	run.Status, run.Ended = storage.StatusRecording, time.Time{}
	s.SetRun(run)
	s.PublishLive(roofLive())
	s.PublishSegment(segs[0])
	if err := chromedp.Do(ctx, chromedp.Navigate("http://"+ln.Addr().String()+"/")); err != nil {
		t.Fatal(err)
	}
	waitText(t, ctx, "conn", "connected")
	expr := `(() => { const tb = document.getElementById("zones").tBodies[0];
		return tb.rows.length === 3 && tb.rows[0].cells[0].textContent === "corner" && tb.rows[0].cells[5].textContent === "no" &&
			tb.rows[1].cells[5].textContent === "yes" && tb.rows[2].cells[5].textContent === "—" &&
			document.getElementById("roof-blocks").tBodies[0].rows.length === 1; })()`
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](expr, chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		html, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById("live").outerHTML`))
		t.Fatalf("zone table not filled: %v\n%s", err, html)
	}
	visible, err := chromedp.Run(ctx, chromedp.Evaluate[[]bool](`[".roof-caution", "#zones", "#v-cl"].map((q) => document.querySelector(q).offsetParent !== null)`))
	if err != nil {
		t.Fatal(err)
	}
	if len(visible) != 3 || !visible[0] || !visible[1] || visible[2] {
		t.Errorf("visible caution, zones, C_L tile = %v, want true, true, false", visible)
	}
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("page threw: %q", ex)
	}
}
