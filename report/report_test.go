package report_test

import (
	"bytes"
	"context"
	"encoding/xml"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/report"
	"liftyard/rig"
	"liftyard/storage"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

// The scenario is our own, invented for this test: a fin of 0.09 m² planform
// and 0.6 m span (aspect ratio 4) towed in fresh water at about 2 m/s,
// swept from −4° to 12° in 2° steps; it stalls above 10°. The "true" lift
// curve that the points scatter about is the lifting-line slope for AR 4,
// 2π/(1 + 2/AR) = 4.18879 per rad (Prandtl's lifting line; Anderson,
// Fundamentals of Aerodynamics, ch. 5, eq. for elliptic loading).
const (
	finAreaM2     = 0.09
	finSpanM      = 0.6
	trueSlope     = 2 * math.Pi / 1.5
	hostileName   = `fin <script>alert("x")</script> & co`
	reportTimeStr = "2026-03-14T12:00:00Z"
)

// finTOML is the stored rig file of the scenario; %s is the design entry.
const finTOML = `name = "fin-7"
kind = "foil"
fluid = "fresh_water"
[conditions]
temperature_c = 14.0
[reference]
area_m2 = 0.09
area_u_m2 = 0.0003
area_kind = "planform"
length_m = 0.15
span_m = 0.6
[[source]]
name = "carriage"
type = "mqtt"
broker = "tcp://127.0.0.1:1883"
topic = "yard/fin/raw"
[[channel]]
name = "n_fore"
quantity = "force"
unit = "N"
capacity = "500 N"
calibration = { poly = [0.0, 0.0025], u = 0.15 }
[[channel]]
name = "a_main"
quantity = "force"
unit = "N"
capacity = "100 N"
calibration = { poly = [0.0, 0.0005], u = 0.04 }
[[channel]]
name = "pitot"
quantity = "pressure"
unit = "Pa"
capacity = "5 kPa"
calibration = { poly = [0.0, 0.001], u = 2.5 }
[lift]
normal = ["n_fore"]
axial = ["a_main"]
angle = 4.0
angle_u_deg = 0.05
dynamic_pressure = "pitot"
%s
`

// finSegments are the invented steady segments. Offsets from the true line
// are fixed numbers (no RNG), the last two points fall off the line (stall).
func finSegments(t0 time.Time) []estimate.Segment {
	alphas := []float64{-4, -2, 0, 2, 4, 6, 8, 10, 12}
	offsets := []float64{0.004, -0.006, 0.002, 0.005, -0.003, 0.006, -0.004, -0.09, -0.32}
	var segs []estimate.Segment
	for i, a := range alphas {
		ar := rig.Rad(a)
		cl := trueSlope*ar + offsets[i]
		qPa := 2000.0 + float64(i%3)*6
		budget := []estimate.Contribution{
			{Input: "normal force (type A)", U: 2.0, Sensitivity: 1 / (qPa * finAreaM2), Dof: 30, TypeA: true},
			{Input: "normal force calibration", U: 0.15, Sensitivity: 1 / (qPa * finAreaM2), Dof: math.Inf(1)},
			{Input: "dynamic pressure (type A)", U: 2.5, Sensitivity: -cl / qPa, Dof: 50, TypeA: true},
			{Input: "reference area", U: 0.0003, Sensitivity: -cl / finAreaM2, Dof: math.Inf(1)},
		}
		var sum2 float64
		for j := range budget {
			budget[j].UY = math.Abs(budget[j].Sensitivity) * budget[j].U
			sum2 += budget[j].UY * budget[j].UY
		}
		uCL := math.Sqrt(sum2)
		dof := estimate.WelchSatterthwaite(budget)
		cd := 0.009 + 0.08*cl*cl
		segs = append(segs, estimate.Segment{
			Index: i, TStart: t0.Add(time.Duration(i) * 20 * time.Second), TEnd: t0.Add(time.Duration(i)*20*time.Second + 15*time.Second),
			N: 1500, NEff: 140 + float64(i),
			AlphaRad:   calibrate.Value{X: ar, U: rig.Rad(0.05), Dof: math.Inf(1)},
			QPa:        calibrate.Value{X: qPa, U: 3.1, Dof: 60},
			SpeedMPerS: calibrate.Value{X: math.Sqrt(2 * qPa / 999.24), U: 0.0016, Dof: 60},
			RhoKgPerM3: 999.24, MuPaS: 1.17e-3, Re: 2.57e5, Fn: 1.65,
			LiftN:    calibrate.Value{X: cl * qPa * finAreaM2, U: uCL * qPa * finAreaM2, Dof: dof},
			DragN:    calibrate.Value{X: cd * qPa * finAreaM2, U: 0.05, Dof: 40},
			CL:       calibrate.Value{X: cl, U: uCL, Dof: dof},
			CD:       calibrate.Value{X: cd, U: 0.05 / (qPa * finAreaM2), Dof: 40},
			En:       math.NaN(),
			CLBudget: budget,
		})
	}
	return segs
}

// mustFinStore builds the scenario's store in a TempDir and returns it with
// the run id. design is the [lift] design line of the stored rig file.
func mustFinStore(t *testing.T, runName, design string) (*storage.Store, uint64) {
	t.Helper()
	t0, _ := time.Parse(time.RFC3339, "2026-03-14T09:30:00Z")
	clock := t0
	st, err := storage.Open(filepath.Join(t.TempDir(), "fin.db"), storage.Options{Now: func() time.Time { return clock }})
	require.NoError(t, err)
	t.Cleanup(func() { st.Close() })

	id, err := st.CreateRun(storage.Run{Rig: runName, Kind: "foil", Fluid: "fresh_water", AreaM2: finAreaM2, AreaKind: "planform",
		Started: t0, RigTOML: fmt.Sprintf(finTOML, design), Note: "sweep 1 of 3, " + runName})
	require.NoError(t, err)

	segs := finSegments(t0)
	w := st.NewWriter(id, storage.WriterConfig{})
	q := w.NewQueue()
	for i := range segs {
		q <- storage.Item{Segment: &segs[i]}
	}
	q <- storage.Item{Event: &storage.Event{T: t0.Add(95 * time.Second), Kind: "gap", Source: "carriage", Message: "3 blocks missing (seq 812 to 814)"}}
	q <- storage.Item{Event: &storage.Event{T: t0.Add(150 * time.Second), Kind: "overload_warning", Source: "carriage", Message: "n_fore at 83 % of capacity <check>"}}
	close(q)
	require.NoError(t, w.Run(context.Background(), q))

	cal, err := st.PutCalibration(calibrate.Record{Channel: "n_fore", Unit: "N", Created: t0.AddDate(0, -14, 0),
		ValidUntil: t0.AddDate(0, -2, 0), Points: []calibrate.Point{{Applied: 0, Reading: 0}, {Applied: 100, Reading: 40000}},
		Fit: calibrate.Fit{Order: 1, Poly: []float64{0, 0.0025}, PolyU: []float64{0.01, 1e-6}, Cov: [][]float64{{1e-4, 0}, {0, 1e-12}}}})
	require.NoError(t, err)
	require.NoError(t, st.SetRunCalibrations(id, []string{cal}))

	clock = t0.Add(200 * time.Second)
	require.NoError(t, st.CorrectRun(id, segs, "flow-off zero drift removed", []calibrate.DriftLine{
		{Channel: "n_fore", StartSI: 0.41, EndSI: 0.62, ChangeSI: 0.21}}))
	require.NoError(t, st.SetRunChannels(id,
		[]acquire.ChannelHealth{{Channel: "n_fore", Source: "carriage", Samples: 13500, Missing: 2}},
		[]calibrate.LoadHealth{{Channel: "n_fore", CapacitySI: 500, Unit: "N", MaxFrac: 0.83, Warnings: 41}}))
	require.NoError(t, st.FinishRun(id, t0.Add(185*time.Second), storage.StatusComplete, []acquire.HealthSnapshot{
		{Source: "carriage", Frames: 1800, Samples: 13500, Rejected: 3, RejectedBy: map[string]uint64{"crc": 2, "parse": 1}, Gaps: 1}}))
	return st, id
}

func reportTime() time.Time {
	t, _ := time.Parse(time.RFC3339, reportTimeStr)
	return t
}

func render(t *testing.T, st *storage.Store, id uint64, opts report.Options) (*report.Report, string) {
	t.Helper()
	if opts.Now == nil {
		opts.Now = reportTime
	}
	opts.Version = "test"
	rep, err := report.Build(st, id, opts)
	require.NoError(t, err)
	var buf bytes.Buffer
	require.NoError(t, rep.WriteHTML(&buf))
	return rep, buf.String()
}

var svgRE = regexp.MustCompile(`(?s)<svg.*?</svg>`)

// Ensure that the report of a fixed run matches its golden file (plots
// replaced by a marker: gonum/plot's SVG is checked separately, so a
// library bump does not break the golden) and is the same byte for byte
// when made twice.
func TestWriteHTML_Golden(t *testing.T) {
	st, id := mustFinStore(t, "fin-7", `design = "thin-airfoil"`)
	_, html1 := render(t, st, id, report.Options{})
	_, html2 := render(t, st, id, report.Options{})
	require.Equal(t, html1, html2, "the report is deterministic for a fixed Now")

	got := svgRE.ReplaceAllStringFunc(html1, func(s string) string { return "<svg><!-- plot --></svg>" })
	golden := filepath.Join("testdata", "fin-thin-airfoil.golden.html")
	if *update {
		require.NoError(t, os.WriteFile(golden, []byte(got), 0o644))
	}
	want, err := os.ReadFile(golden)
	require.NoError(t, err, "run go test ./report -update to create the golden file")
	assert.Equal(t, string(want), got)
}

// Ensure that the whole page is well-formed markup (strict XML, so every
// element is closed), carries no scripts or external references, and that
// each inlined plot is a well-formed SVG with its axis labels.
func TestWriteHTML_SelfContainedAndWellFormed(t *testing.T) {
	st, id := mustFinStore(t, "fin-7", `design = "thin-airfoil"`)
	_, html := render(t, st, id, report.Options{})

	dec := xml.NewDecoder(strings.NewReader(html))
	dec.Strict = true
	for {
		_, err := dec.Token()
		if errors.Is(err, io.EOF) {
			break
		}
		require.NoError(t, err, "the report must be well-formed")
	}
	for _, bad := range []string{"<script", "<link", " src=", "url(", "@import", "<iframe", "<img"} {
		assert.NotContains(t, html, bad, "a self-contained report has no %s", bad)
	}
	svgs := svgRE.FindAllString(html, -1)
	require.Len(t, svgs, 4, "lift curve, drag polar, En and q plots")
	for i, s := range svgs {
		require.NoError(t, xml.Unmarshal([]byte(s), new(struct{})), "plot %d parses as XML", i)
	}
	// Subscripts are set as such (C with a lowered L), never a literal "C_L".
	assert.Contains(t, svgs[0], `C<tspan dy="3.08" font-size="8.25px">L</tspan>`)
	assert.NotContains(t, html, "C_L</text>")
	assert.Contains(t, svgs[0], "angle of attack α [°]")
	assert.Contains(t, plainSVG(svgs[1]), "drag coefficient CD")
	assert.Contains(t, plainSVG(svgs[2]), "En")
	assert.Contains(t, svgs[3], "q [Pa]")
}

// Ensure that the report holds the cautions of docs/design.md §6, a row for every
// segment, the polar parameters and the record-quality facts.
func TestWriteHTML_Contents(t *testing.T) {
	st, id := mustFinStore(t, "fin-7", `design = "thin-airfoil"`)
	rep, html := render(t, st, id, report.Options{})

	for _, c := range []string{"test data, not a design approval", "local building code and a licensed engineer", "only within the rated capacities"} {
		assert.Contains(t, html, c)
	}
	// Every segment row: the α column as the table writes it (U95 of α is
	// 1.96 × 0.05° = 0.098°, two significant digits: 0.098).
	for _, a := range []string{"−4.000", "−2.000", "0.000", "2.000", "4.000", "6.000", "8.000", "10.000", "12.000"} {
		assert.Contains(t, html, "<td class=\"num\">"+a+" ± 0.098</td>", "segment at %s°", a)
	}
	require.Len(t, rep.Segments, 9)
	require.NotNil(t, rep.Polar)
	p := rep.Polar
	// The points scatter about the lifting-line slope for AR 4 (see the
	// scenario): the fitted slope must agree with it within its U95.
	assert.InDelta(t, trueSlope, p.SlopePerRad.X, p.SlopePerRad.U95())
	assert.True(t, p.Stalled, "the 12° point falls off the line")
	assert.Contains(t, html, "Lift-curve slope a [1/rad]")
	d := 1 - int(math.Floor(math.Log10(p.SlopePerRad.U95())))
	slope := strings.Replace(fmt.Sprintf("%.*f ± %.*f", d, p.SlopePerRad.X, d, p.SlopePerRad.U95()), "-", "−", 1)
	assert.Contains(t, html, slope, "the slope with its U95 to two significant digits")
	assert.Contains(t, html, "Zero-lift angle α_L0 [°]")

	// Design comparison with the thin-airfoil + lifting-line curve.
	require.NotNil(t, rep.Comparison)
	assert.Equal(t, estimate.VerdictDisagrees, rep.Comparison.Verdict, "the stalled points disagree")
	assert.Contains(t, html, "lifting-line correction for AR 4.00")
	assert.Regexp(t, `Agrees with the design at 7 of 9 compared points; all at or above 10\.0°`, html)

	// Record quality.
	assert.Contains(t, html, "EXPIRED before the run started")
	assert.Contains(t, html, "crc 2, parse 1")
	assert.Contains(t, html, "83.0 %")
	assert.Contains(t, html, "flow-off zero drift removed")
	assert.Contains(t, html, `<td class="num">0.21</td>`, "drift change")
	assert.Contains(t, html, "n_fore at 83 % of capacity &lt;check&gt;", "event message escaped")
	assert.Contains(t, html, "Welch–Satterthwaite")
	assert.Contains(t, html, "CIPM-2007")
	assert.Contains(t, html, "JCGM 100")
	assert.Contains(t, html, "Helmbold")
	// issue 13: full budgets only for the representative segments (lowest
	// and highest angle, largest U95: here −4°, 12° and one of them or
	// another), every segment's budget in brief in the appendix.
	n := strings.Count(html, "<details open=\"open\">")
	assert.True(t, n >= 2 && n <= 3, "%d full budgets", n)
	assert.Contains(t, html, "Segment 0 at α = −4.00°")
	assert.Contains(t, html, "Segment 8 at α = 12.00°")
	app := html[strings.Index(html, "Appendix: the budget of every segment"):]
	app = app[strings.Index(app, "<tbody>"):strings.Index(app, "</tbody>")]
	assert.Equal(t, 9, strings.Count(app, "<tr>"), "one appendix row per segment")
}

// Ensure that a hostile rig name comes out escaped everywhere.
func TestWriteHTML_EscapesUserStrings(t *testing.T) {
	st, id := mustFinStore(t, hostileName, `design = "thin-airfoil"`)
	_, html := render(t, st, id, report.Options{})
	assert.NotContains(t, html, `<script>`)
	assert.Contains(t, html, `fin &lt;script&gt;alert(&#34;x&#34;)&lt;/script&gt; &amp; co`)
}

// Ensure that a design-curve CSV is read relative to RigDir, and that a
// missing one is said in the report without failing it.
func TestBuild_DesignCurveFile(t *testing.T) {
	dir := t.TempDir()
	// Design values on the lifting-line line for AR 4 (the scenario's truth)
	// with U95 0.03, from −6° to 9°: 12° and 10° lie outside.
	var b strings.Builder
	b.WriteString("alpha_deg,cl,cl_u95\n")
	for a := -6.0; a <= 9; a += 3 {
		fmt.Fprintf(&b, "%g,%.5f,0.03\n", a, trueSlope*rig.Rad(a))
	}
	require.NoError(t, os.WriteFile(filepath.Join(dir, "fin-design.csv"), []byte(b.String()), 0o644))
	st, id := mustFinStore(t, "fin-7", `design = "fin-design.csv"`)

	rep, html := render(t, st, id, report.Options{RigDir: dir})
	require.NotNil(t, rep.Comparison)
	assert.Empty(t, rep.DesignProblem)
	assert.Equal(t, 2, rep.Comparison.Outside, "10° and 12° lie beyond the curve")
	assert.Equal(t, estimate.VerdictAgrees, rep.Comparison.Verdict)
	assert.Contains(t, html, "2 points lie outside the design curve")

	rep, html = render(t, st, id, report.Options{RigDir: t.TempDir()})
	assert.Nil(t, rep.Comparison)
	assert.Contains(t, rep.DesignProblem, `"fin-design.csv"`)
	assert.Contains(t, html, "cannot be read")
	assert.Contains(t, html, "--rig-dir")
	assert.NotNil(t, rep.Polar, "the rest of the report is made")
}

// Ensure that an unknown run is an error wrapping storage.ErrNotFound.
func TestBuild_UnknownRun(t *testing.T) {
	st, _ := mustFinStore(t, "fin-7", "")
	_, err := report.Build(st, 99, report.Options{})
	require.ErrorIs(t, err, storage.ErrNotFound)
	assert.Contains(t, err.Error(), "99")
}

// Ensure that a run without segments or rig file still gives a report that
// says what is missing.
func TestWriteHTML_EmptyRun(t *testing.T) {
	st, err := storage.Open(filepath.Join(t.TempDir(), "e.db"), storage.Options{})
	require.NoError(t, err)
	t.Cleanup(func() { st.Close() })
	id, err := st.CreateRun(storage.Run{Rig: "bare", Kind: "foil", Fluid: "air", AreaM2: 0.1, Started: reportTime()})
	require.NoError(t, err)
	rep, html := render(t, st, id, report.Options{})
	assert.Nil(t, rep.Polar)
	assert.Contains(t, html, "No steady segments were found")
	assert.Contains(t, html, "no stored rig file")
	assert.Contains(t, html, `The run&#39;s status is &#34;recording&#34;`)
}

var tspanRE = regexp.MustCompile(`</?tspan[^>]*>`)

// plainSVG is an SVG's text without the subscript markup ("C_L" reads "CL").
func plainSVG(s string) string { return tspanRE.ReplaceAllString(s, "") }
