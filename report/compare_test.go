package report_test

import (
	"bytes"
	"context"
	"encoding/json"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/report"
	"liftyard/storage"
)

// mustCampaignStore stores three runs of the scenario's fin (invented, our
// own): run 1 the reference, run 2 a repeat whose points lie a little off
// run 1's (fixed numbers, no RNG), run 3 with a trim tab that adds 0.05 to
// C_L everywhere. All three share the rig file, so the calibrations and
// the reference area are shared.
func mustCampaignStore(t *testing.T) *storage.Store {
	t.Helper()
	t0, _ := time.Parse(time.RFC3339, "2026-03-14T09:30:00Z")
	st, err := storage.Open(filepath.Join(t.TempDir(), "campaign.db"), storage.Options{Now: func() time.Time { return t0 }})
	require.NoError(t, err)
	t.Cleanup(func() { st.Close() })
	repeat := []float64{0.0004, -0.0003, 0.0002, -0.0005, 0.0003, 0.0001, -0.0002, 0.0004, -0.0001}
	for k, note := range []string{"tab neutral", "tab neutral, repeat", "tab +5°"} {
		start := t0.Add(time.Duration(k) * time.Hour)
		id, err := st.CreateRun(storage.Run{Rig: "fin-7", Kind: "foil", Fluid: "fresh_water", AreaM2: finAreaM2, AreaKind: "planform",
			Started: start, RigTOML: fmt.Sprintf(finTOML, ""), Note: note})
		require.NoError(t, err)
		segs := finSegments(start)
		for i := range segs {
			switch k {
			case 1:
				segs[i].CL.X += repeat[i]
			case 2:
				segs[i].CL.X += 0.05
			}
		}
		w := st.NewWriter(id, storage.WriterConfig{})
		q := w.NewQueue()
		for i := range segs {
			q <- storage.Item{Segment: &segs[i]}
		}
		close(q)
		require.NoError(t, w.Run(context.Background(), q))
		require.NoError(t, st.FinishRun(id, start.Add(185*time.Second), storage.StatusComplete, nil))
	}
	return st
}

// Ensure that the printable comparison of a fixed campaign matches its
// golden file (plots replaced by a marker), is well-formed and
// self-contained, draws the lift and drag overlays, and flags the trim-tab
// run at every point while the repeat run agrees.
func TestComparison_Golden(t *testing.T) {
	st := mustCampaignStore(t)
	c, err := report.BuildComparison(st, []uint64{1, 2, 3}, report.Options{Now: reportTime, Version: "test"})
	require.NoError(t, err)
	require.Len(t, c.Diffs, 2)
	assert.Equal(t, 0, c.Diffs[0].DiffersCL, "the repeat run agrees")
	assert.Equal(t, 9, c.Diffs[1].DiffersCL, "a 0.05 offset is far above U95(Δ) when the calibrations are shared")
	assert.Equal(t, []string{"normal force calibration", "axial force calibration", "dynamic pressure calibration", "angle of attack", "reference area"}, c.Diffs[0].Shared)

	var buf bytes.Buffer
	require.NoError(t, c.WriteHTML(&buf))
	html := buf.String()
	dec := xml.NewDecoder(strings.NewReader(html))
	dec.Strict = true
	for {
		_, err := dec.Token()
		if errors.Is(err, io.EOF) {
			break
		}
		require.NoError(t, err, "the comparison must be well-formed")
	}
	for _, bad := range []string{"<script", "<link", " src=", "url(", "<img"} {
		assert.NotContains(t, html, bad)
	}
	svgs := svgRE.FindAllString(html, -1)
	require.Len(t, svgs, 2, "lift overlay and drag polar overlay")
	assert.Contains(t, svgs[0], "run 1 (reference) ± U95")
	assert.Contains(t, svgs[0], "run 3 ± U95")
	assert.Contains(t, svgs[1], "Drag polar")

	got := svgRE.ReplaceAllStringFunc(html, func(string) string { return "<svg><!-- plot --></svg>" })
	golden := filepath.Join("testdata", "compare.golden.html")
	if *update {
		require.NoError(t, os.WriteFile(golden, []byte(got), 0o644))
	}
	want, err := os.ReadFile(golden)
	require.NoError(t, err, "run go test ./report -update to create the golden file")
	assert.Equal(t, string(want), got)
}

// Ensure that the JSON document carries every pair with its verdict and
// null (not NaN) where a run has no C_D difference.
func TestComparison_Doc(t *testing.T) {
	st := mustCampaignStore(t)
	c, err := report.BuildComparison(st, []uint64{3, 1}, report.Options{Now: reportTime})
	require.NoError(t, err)
	b, err := json.Marshal(c.Doc())
	require.NoError(t, err)
	var doc report.CompareDoc
	require.NoError(t, json.Unmarshal(b, &doc))
	assert.Equal(t, []uint64{3, 1}, doc.Runs)
	require.Len(t, doc.Pairs, 1)
	p := doc.Pairs[0]
	assert.Equal(t, "alpha", p.SetPoint)
	assert.Equal(t, 9, p.DiffersCL)
	require.Len(t, p.Points, 9)
	assert.InDelta(t, -0.05, float64(p.Points[0].DeltaCL), 1e-12, "run 1 against the trim-tab run 3")
	assert.Equal(t, "run 1 against run 3: C_L differs (|En| > 1) at 9 of 9 matched points; C_D differs at 0 of 9", doc.Verdict)
}

// Ensure that lists that cannot be compared are refused with
// ErrCompareUsage (a usage error in the command line, 400 on the
// dashboard) and an unknown run with storage.ErrNotFound.
func TestBuildComparison_Refused(t *testing.T) {
	st := mustCampaignStore(t)
	for _, tc := range []struct {
		name string
		ids  []uint64
		want error
		msg  string
	}{
		{"one run", []uint64{1}, report.ErrCompareUsage, "need at least two"},
		{"twice", []uint64{1, 2, 1}, report.ErrCompareUsage, "run 1 is listed twice"},
		{"unknown", []uint64{1, 9}, storage.ErrNotFound, "run 9"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := report.BuildComparison(st, tc.ids, report.Options{})
			assert.ErrorIs(t, err, tc.want)
			assert.ErrorContains(t, err, tc.msg)
		})
	}
}
