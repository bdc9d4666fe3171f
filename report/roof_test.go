package report_test

import (
	"context"
	"encoding/xml"
	"errors"
	"io"
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
	"liftyard/rig"
	"liftyard/storage"
)

// mustRoofStore stores an invented roof run of the example rig
// (testdata/rigs/roof-yard.toml): two 10-minute blocks of its three zones,
// with the design values of the rig file. The corner of block 1 is made
// to disagree with its design value.
func mustRoofStore(t *testing.T) (*storage.Store, uint64) {
	t.Helper()
	toml, err := os.ReadFile("../testdata/rigs/roof-yard.toml")
	require.NoError(t, err)
	t0, _ := time.Parse(time.RFC3339, "2026-04-02T11:00:00Z")
	st, err := storage.Open(filepath.Join(t.TempDir(), "roof.db"), storage.Options{Now: func() time.Time { return t0 }})
	require.NoError(t, err)
	t.Cleanup(func() { st.Close() })
	id, err := st.CreateRun(storage.Run{Rig: "roof-yard", Kind: "roof", Fluid: "air", AreaM2: 6, AreaKind: "tributary",
		Started: t0, RigTOML: string(toml)})
	require.NoError(t, err)

	design := map[string]float64{"corner": -2.2, "edge": -1.5, "field": -0.9}
	designU := map[string]float64{"corner": 0.25, "edge": 0.2, "field": 0.15} // expanded (95 %), as in the rig file
	measuredCp := [][]float64{{-2.05, -1.42, -0.86}, {-1.6, -1.38, -0.93}}
	var segs []estimate.Segment
	for b := range 2 {
		for z, zone := range []string{"corner", "edge", "field"} {
			ts := t0.Add(time.Duration(b) * 10 * time.Minute)
			cp := calibrate.Value{X: measuredCp[b][z], U: 0.04, Dof: 120}
			d := calibrate.Value{X: design[zone], U: designU[zone] / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)} // as estimate.RoofEstimator stores it
			segs = append(segs, estimate.Segment{
				Index: 3*b + z, Block: b, TStart: ts, TEnd: ts.Add(10*time.Minute - time.Millisecond), N: 120000, NEff: 1500,
				QPa: calibrate.Value{X: 88.2 + float64(b), U: 0.8, Dof: 300}, SpeedMPerS: calibrate.Value{X: 12.0, U: 0.05, Dof: 300},
				RhoKgPerM3: 1.225, Zone: zone, CpMean: cp, CpRMS: 0.31, CpPeak: cp.X - 1.1,
				UpliftN: calibrate.Value{X: cp.X * 88.2 * 2, U: 8, Dof: 120}, DesignCp: d,
				En:        (cp.X - d.X) / math.Hypot(cp.U95(), designU[zone]),
				CpPeakMax: cp.X + 0.9, CpPeakMaxU: 0.05, CpPeakU: 0.1, CpMin: cp.X - 1.3, CpMax: cp.X + 1.0, QAt: "mast",
				DirectionRad: rig.Rad(240 + 10*float64(b)), DirectionSpreadRad: rig.Rad(9), SectorRad: rig.Rad(240),
				SectorOutFrac: 0.2 * float64(b), TurbulenceIntensity: 0.15,
			})
		}
	}
	// Per-tap rows of block 0: the taps of the rig file, each at its zone's
	// value with a step across the panel so the map has a range.
	rg, err := rig.Parse("roof-yard.toml", toml)
	require.NoError(t, err)
	for j, tp := range rg.Taps {
		z := map[string]int{"corner": 0, "edge": 1, "field": 2}[tp.Zone]
		cp := calibrate.Value{X: measuredCp[0][z] + 0.02*float64(j%3), U: 0.05, Dof: 120}
		segs = append(segs, estimate.Segment{
			Index: 6 + j, Block: 0, TStart: t0, TEnd: t0.Add(10*time.Minute - time.Millisecond), N: 120000, NEff: 1500,
			QPa: calibrate.Value{X: 88.2, U: 0.8, Dof: 300}, RhoKgPerM3: 1.225, Zone: tp.Zone, Tap: tp.Name,
			CpMean: cp, CpRMS: 0.35, CpPeak: cp.X - 1.3, CpPeakMax: math.NaN(), CpMin: math.NaN(), CpMax: math.NaN(),
			DirectionRad: math.NaN(), DirectionSpreadRad: math.NaN(), SectorRad: math.NaN(), SectorOutFrac: math.NaN(), UpliftN: calibrate.Value{X: cp.X * 88.2 * 0.5, U: 3, Dof: 120}, En: math.NaN(),
		})
	}
	w := st.NewWriter(id, storage.WriterConfig{})
	q := w.NewQueue()
	for i := range segs {
		q <- storage.Item{Segment: &segs[i]}
	}
	close(q)
	require.NoError(t, w.Run(context.Background(), q))
	require.NoError(t, st.FinishRun(id, t0.Add(20*time.Minute), storage.StatusComplete, []acquire.HealthSnapshot{
		{Source: "scanner", Frames: 12000, Samples: 240000}}))
	return st, id
}

// Ensure that a roof run's report matches its golden file (plots replaced
// by a marker), is well-formed, shows the zone table, the zone plot and the
// building caution instead of the polar, and flags the disagreeing block.
func TestWriteHTML_RoofGolden(t *testing.T) {
	st, id := mustRoofStore(t)
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
	svgs := svgRE.FindAllString(html, -1)
	require.Len(t, svgs, 2, "zone plot and tap map (no q plot: it would repeat each block per zone)")
	for _, tap := range []string{"t01", "t12", "Tap map", "Cp "} {
		assert.Contains(t, svgs[1], tap, "tap map")
	}
	for _, z := range []string{"corner", "edge", "field", "net Cp"} {
		assert.Contains(t, svgs[0], z)
	}
	for _, want := range []string{"Roof zones by block", "Wind loads on buildings", "local building code", "licensed engineer",
		"Agrees with the design value at 5 of 6 compared zone results.", "6 zone results over 3 zones"} {
		assert.Contains(t, html, want)
	}
	assert.Contains(t, html, "Roof pressure test report: run")
	for _, not := range []string{"Lift curve and drag polar", "Uncertainty budgets of C<sub>L</sub>", "no lift-curve fit", "Lift test report"} {
		assert.NotContains(t, html, not)
	}
	// Block 1's corner: En = (−1.60 + 2.20)/√(0.0795² + 0.25²) = 2.29 > 1.
	// Rows are numbered by block (from 1), not by zone row.
	assert.Contains(t, html, `<tr class="bad"><td class="idx">2</td><td>corner</td>`)
	assert.Equal(t, 1, strings.Count(html, `<tr class="bad"><td class="idx">`), "only one zone result disagrees")

	got := svgRE.ReplaceAllStringFunc(html, func(string) string { return "<svg><!-- plot --></svg>" })
	golden := filepath.Join("testdata", "roof-yard.golden.html")
	if *update {
		require.NoError(t, os.WriteFile(golden, []byte(got), 0o644))
	}
	want, err := os.ReadFile(golden)
	require.NoError(t, err, "run go test ./report -update to create the golden file")
	assert.Equal(t, string(want), got)
}
