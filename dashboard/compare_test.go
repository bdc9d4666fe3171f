package dashboard_test

import (
	"bytes"
	"context"
	"encoding/json"
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
	"liftyard/report"
	"liftyard/rig"
	"liftyard/storage"
)

// cmpRigTOML is the stored rig of the compared runs (invented, our own): a
// strut on a tow rig whose two runs share every calibration.
const cmpRigTOML = `name = "strut-b"
kind = "foil"
fluid = "fresh_water"
[reference]
area_m2 = 0.12
area_u_m2 = 0.0004
length_m = 0.2
[[source]]
name = "balance"
type = "mqtt"
broker = "tcp://127.0.0.1:1883"
topic = "yard/strut/raw"
[[channel]]
name = "n_fore"
quantity = "force"
unit = "N"
capacity = "500 N"
calibration = { poly = [0.0, 0.0025], u = 0.15 }
[[channel]]
name = "pitot"
quantity = "pressure"
unit = "Pa"
capacity = "2 kPa"
calibration = { poly = [0.0, 0.001], u = 1.5 }
[lift]
normal = ["n_fore"]
angle = 4.0
dynamic_pressure = "pitot"
`

// cmpSegment is point i of the strut's sweep with a C_L budget (Type A
// scatter, the shared pitot calibration and area) and a C_D.
func cmpSegment(i int, alphaDeg, cl float64) estimate.Segment {
	b := []estimate.Contribution{
		{Input: "C_L scatter (loads and q together) (type A)", U: 0.004, Sensitivity: 1, UY: 0.004, Dof: 120, TypeA: true},
		{Input: "dynamic pressure calibration", U: 1.5, Sensitivity: -cl / 612.5, UY: math.Abs(cl/612.5) * 1.5, Dof: math.Inf(1)},
		{Input: "reference area", U: 0.0004, Sensitivity: -cl / 0.12, UY: math.Abs(cl/0.12) * 0.0004, Dof: math.Inf(1)},
	}
	c := estimate.Combine(b)
	c.X = cl
	t0 := epoch.Add(time.Duration(10+20*i) * time.Second)
	return estimate.Segment{Index: i, Kind: rig.KindFoil, TStart: t0, TEnd: t0.Add(12 * time.Second), N: 12000, NEff: 240,
		AlphaRad: calibrate.Value{X: rig.Rad(alphaDeg), U: rig.Rad(0.01), Dof: math.Inf(1)}, QPa: v(612.5, 1.5),
		CL: c, CLBudget: b, CD: v(0.012+0.05*cl*cl, 0.0008), En: math.NaN()}
}

// compareServer stores two runs of the strut, the second with a flap that
// adds 0.05 to C_L (run 2), and serves them with the compare capability.
func compareServer(t *testing.T) *dashboard.Server {
	t.Helper()
	st, err := storage.Open(filepath.Join(t.TempDir(), "cmp.db"), storage.Options{Now: fixedNow})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	for k, extra := range []float64{0, 0.05} {
		id, err := st.CreateRun(storage.Run{Rig: "strut-b", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.12, Started: epoch.Add(time.Duration(k) * time.Hour), RigTOML: cmpRigTOML})
		if err != nil {
			t.Fatal(err)
		}
		w := st.NewWriter(id, storage.WriterConfig{})
		q := w.NewQueue()
		for i, a := range []float64{-2, 0, 2, 4, 6, 8} {
			s := cmpSegment(i, a, 0.1*(a+1.5)+extra)
			q <- storage.Item{Segment: &s}
		}
		close(q)
		if err := w.Run(context.Background(), q); err != nil {
			t.Fatal(err)
		}
		if err := st.FinishRun(id, epoch.Add(time.Duration(k)*time.Hour+3*time.Minute), storage.StatusComplete, nil); err != nil {
			t.Fatal(err)
		}
	}
	s, _ := newServer(t, dashboard.Config{Runs: st, Addr: "127.0.0.1:0", Compare: func(ids []uint64) (*report.Comparison, error) {
		return report.BuildComparison(st, ids, report.Options{Now: fixedNow, Version: "test"})
	}})
	return s
}

// Ensure that the compare routes answer: the page with the verdict and both
// overlay plots, the plots as SVG, the API as JSON matching its golden
// file; a list the client must fix is a 400 that says what, an unknown run
// a 404; and the runs page offers the compare form.
func TestCompare_Routes(t *testing.T) {
	h := compareServer(t).Handler()
	page := get(t, h, "GET", "/compare?runs=1,2", nil)
	body := page.Body.String()
	if page.Code != 200 {
		t.Fatalf("compare page: %d %s", page.Code, body)
	}
	for _, want := range []string{`src="/compare/lift.svg?runs=1%2c2"`, `src="/compare/drag.svg?runs=1%2c2"`,
		"run 2 against run 1: C_L differs (|En| &gt; 1) at 6 of 6 matched points", "Shared inputs: normal force calibration, dynamic pressure calibration, angle of attack, reference area."} {
		if !strings.Contains(body, want) {
			t.Errorf("compare page lacks %q", want)
		}
	}
	for _, p := range []string{"/compare/lift.svg?runs=1,2", "/compare/drag.svg?runs=1,2"} {
		rec := get(t, h, "GET", p, nil)
		if rec.Code != 200 || rec.Header().Get("Content-Type") != "image/svg+xml" {
			t.Errorf("%s: %d %s", p, rec.Code, rec.Header().Get("Content-Type"))
		}
		wellFormed(t, rec.Body.Bytes())
	}
	for _, tt := range []struct {
		path string
		code int
		want string
	}{
		{"/compare", 200, "Give the runs to compare, the reference first."},
		{"/compare?runs=1", 400, "give two or more runs"},
		{"/compare?runs=1,x", 400, `run id &#34;x&#34; is not a positive whole number`},
		{"/compare?runs=1,1", 400, "run 1 is listed twice"},
		{"/compare?runs=1,9", 404, "run 9"},
		{"/api/v1/compare?runs=1", 400, `"error":"bad request: give two or more runs`},
		{"/api/v1/compare?runs=1,9", 404, `"error":"no such run"`},
		{"/compare/lift.svg?runs=2", 400, "give two or more runs"},
	} {
		rec := get(t, h, "GET", tt.path, nil)
		if rec.Code != tt.code || !strings.Contains(rec.Body.String(), tt.want) {
			t.Errorf("GET %s: %d %q, want %d with %q", tt.path, rec.Code, rec.Body, tt.code, tt.want)
		}
	}
	runs := get(t, h, "GET", "/runs", nil).Body.String()
	if !strings.Contains(runs, `action="/compare"`) || !strings.Contains(runs, `name="runs"`) {
		t.Errorf("runs page has no compare form:\n%s", runs)
	}

	rec := get(t, h, "GET", "/api/v1/compare?runs=1,2", nil)
	var pretty bytes.Buffer
	if err := json.Indent(&pretty, rec.Body.Bytes(), "", "  "); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, rec.Body)
	}
	golden := filepath.Join("testdata", "api", "compare.golden")
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
		t.Errorf("GET /api/v1/compare differs from %s:\ngot:\n%s", golden, pretty.Bytes())
	}
}

// Ensure that in a real browser the runs page's form leads to the compare
// page, whose two overlay plots load and whose table marks every point of
// the flap run, with no exception thrown.
func TestComparePage_Browser(t *testing.T) {
	ctx := browsertest.Browser(t)
	ctx, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	ts := loopbackServer(t, compareServer(t))
	if err := chromedp.Do(ctx, chromedp.Navigate(ts.URL+"/runs")); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Run(ctx, chromedp.Evaluate[bool](`(() => { const f = document.getElementById("compare-runs"); f.value = "1,2"; f.form.requestSubmit(); return true; })()`)); err != nil {
		t.Fatalf("submit the compare form: %v", err)
	}
	for deadline := time.Now().Add(10 * time.Second); ; { // the page navigates: poll across the reload
		ok, err := chromedp.Run(ctx, chromedp.Evaluate[bool](`location.pathname === "/compare" && document.readyState === "complete"`))
		if err == nil && ok {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("the form did not lead to the compare page: %v", err)
		}
		time.Sleep(50 * time.Millisecond)
	}
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`(() => { const i = document.querySelectorAll(".polar img"); return i.length === 2 && [...i].every(x => x.complete && x.naturalWidth > 0); })()`,
		chromedp.WithPollingTimeout(10*time.Second))); err != nil {
		t.Fatalf("the overlay plots did not load: %v", err)
	}
	verdict, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById("compare-verdict").textContent`))
	if err != nil || verdict != "run 2 against run 1: C_L differs (|En| > 1) at 6 of 6 matched points; C_D differs at 3 of 6." {
		t.Errorf("verdict %q (%v)", verdict, err)
	}
	marked, err := chromedp.Run(ctx, chromedp.Evaluate[float64](`document.querySelectorAll(".compare-table tr.differs").length`))
	if err != nil || marked != 6 {
		t.Errorf("%v rows marked (%v), want 6", marked, err)
	}
	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(t.ArtifactDir(), "dashboard-compare.png"), png, 0o644); err != nil {
		t.Error(err)
	}
	if ex := browsertest.Exceptions(ctx); len(ex) > 0 {
		t.Errorf("page threw: %q", ex)
	}
}
