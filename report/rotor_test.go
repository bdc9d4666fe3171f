package report_test

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/report"
	"liftyard/storage"
)

// mustRotorStore stores an invented run of the example rotating cylinder
// (testdata/rigs/rotor-cylinder.toml): seven spin steps S = 0 … 3 whose
// C_L scatter about a saturating curve of our own, 9·tanh(S/4), compared
// with the rig's design against the spin ratio.
func mustRotorStore(t *testing.T) (*storage.Store, uint64) {
	t.Helper()
	toml, err := os.ReadFile("../testdata/rigs/rotor-cylinder.toml")
	require.NoError(t, err)
	design, err := os.Open("../testdata/rigs/design/rotor-cylinder-design.csv")
	require.NoError(t, err)
	defer design.Close()
	d, err := estimate.ParseSpinDesignCurve(design, "rotor-cylinder-design.csv")
	require.NoError(t, err)
	t0, _ := time.Parse(time.RFC3339, "2026-04-09T10:00:00Z")
	st, err := storage.Open(filepath.Join(t.TempDir(), "rotor.db"), storage.Options{Now: func() time.Time { return t0 }})
	require.NoError(t, err)
	t.Cleanup(func() { st.Close() })
	id, err := st.CreateRun(storage.Run{Rig: "rotor-cylinder", Kind: "rotor", Fluid: "air", AreaM2: 0.05, AreaKind: "projected",
		Started: t0, RigTOML: string(toml)})
	require.NoError(t, err)
	noise := []float64{0.4, -0.8, 0.3, 1.1, -0.5, 0.2, -0.9} // in units of u(C_L), fixed
	var segs []estimate.Segment
	for i := range 7 {
		s := 0.5 * float64(i)
		ts := t0.Add(time.Duration(i) * 15 * time.Second)
		uCL := 0.015 + 0.012*s
		cl := calibrate.Value{X: 9*math.Tanh(s/4) + noise[i]*uCL, U: uCL, Dof: 80}
		cd := calibrate.Value{X: 0.9 + 0.12*s*s, U: 0.02 + 0.01*s, Dof: 80}
		seg := estimate.Segment{Index: i, Kind: "rotor", TStart: ts, TEnd: ts.Add(13 * time.Second), N: 1300, NEff: 400,
			QPa: calibrate.Value{X: 38.9, U: 0.3, Dof: 200}, SpeedMPerS: calibrate.Value{X: 8.0, U: 0.04, Dof: 200},
			RhoKgPerM3: 1.21, MuPaS: 1.8e-5, Re: 53000, CL: cl, CD: cd,
			LiftN: calibrate.Value{X: cl.X * 38.9 * 0.05, U: 0.05, Dof: 80}, DragN: calibrate.Value{X: cd.X * 38.9 * 0.05, U: 0.04, Dof: 80},
			SpinRatio: s, SpinRatioU: 0.002 + 0.007*s, SpinRatioDof: 150, En: math.NaN()}
		seg.DesignCL, seg.En, _ = estimate.SpinDesignAt(d, seg.SpinRatioValue(), seg.CL)
		segs = append(segs, seg)
	}
	w := st.NewWriter(id, storage.WriterConfig{})
	q := w.NewQueue()
	for i := range segs {
		q <- storage.Item{Segment: &segs[i]}
	}
	close(q)
	require.NoError(t, w.Run(context.Background(), q))
	require.NoError(t, st.FinishRun(id, t0.Add(110*time.Second), storage.StatusComplete, []acquire.HealthSnapshot{
		{Source: "tunnel", Frames: 1100, Samples: 11000}}))
	return st, id
}

// Ensure the issue 12 "must show": a rotor run's report plots C_L against
// S with the fitted C_L(S) (and its U95 band) and the design values, plots
// C_D and L/D against S, states the fit in its summary, shows no lift curve
// in α, and matches its golden file (plots replaced by a marker).
func TestWriteHTML_RotorGolden(t *testing.T) {
	st, id := mustRotorStore(t)
	rep, html := render(t, st, id, report.Options{RigDir: "../testdata/rigs"})
	require.NotNil(t, rep.SpinCurve, rep.SpinCurveProblem)
	require.NotNil(t, rep.SpinDesign, rep.DesignProblem)
	assert.Nil(t, rep.Polar, "no lift curve in α for a rotor")

	svgs := svgRE.FindAllString(html, -1)
	require.GreaterOrEqual(t, len(svgs), 3)
	lift := plainSVG(svgs[0])
	for _, want := range []string{"spin ratio S = ωR/V", "fitted CL(S)", "fit ± U95", "design", "measured CL ± U95"} {
		assert.Contains(t, lift, want, "the C_L(S) plot")
	}
	assert.Contains(t, html, "Drag coefficient")
	assert.Contains(t, html, "Lift-to-drag ratio")
	assert.Contains(t, html, "fitted by a weighted least-squares cubic in S over S = 0.00 to 3.00")
	assert.Contains(t, html, "7 of 7 compared segments agree with the design")
	assert.NotContains(t, html, "angle of attack α [°]")

	got := svgRE.ReplaceAllStringFunc(html, func(string) string { return "<svg><!-- plot --></svg>" })
	golden := filepath.Join("testdata", "rotor-cylinder.golden.html")
	if *update {
		require.NoError(t, os.WriteFile(golden, []byte(got), 0o644))
	}
	want, err := os.ReadFile(golden)
	require.NoError(t, err, "run go test ./report -update to create the golden file")
	assert.Equal(t, string(want), got)
	assert.False(t, strings.Contains(got, "NaN"), "no NaN in the report")
}
