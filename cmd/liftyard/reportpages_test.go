package main

import (
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"regexp"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/internal/browsertest"
	"liftyard/storage"
)

// pdfPage matches one page object of a PDF (not the /Pages tree node).
var pdfPage = regexp.MustCompile(`/Type\s*/Page[^s]`)

// demoRunOffline stores a run of the demo rig with the demo's simulator
// settings for d of device time, the blocks stamped as if received live,
// through the one pipeline (recordOffline): the demo's run without waiting
// for it in real time.
func demoRunOffline(t *testing.T, d time.Duration) string {
	t.Helper()
	r, err := demoRig("tcp://127.0.0.1:1")
	require.NoError(t, err)
	fl, err := estimate.Properties(r.Fluid, r.Conditions)
	require.NoError(t, err)
	start := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	s, err := sim.New(r, sim.Config{Seed: 1, FlowOffBefore: 2 * time.Second, Start: start,
		QPa: estimate.DynamicPressure(fl.RhoKgPerM3, defaultSpeed(r.Fluid))}, fl.RhoKgPerM3)
	require.NoError(t, err)
	var bs acquire.Blocks
	for t0 := start; t0.Sub(start) < d; {
		b := s.Next()
		end := time.UnixMicro(b.T0Us + int64(b.Len())*b.DtUs).UTC()
		b.Received = end.Add(2 * time.Millisecond)
		bs = append(bs, b)
		t0 = end
	}
	db := filepath.Join(t.TempDir(), "demo.db")
	store, err := storage.Open(db, storage.Options{})
	require.NoError(t, err)
	var h acquire.Health
	_, _, err = recordOffline(t.Context(), store, r, string(demoRigTOML), "demo run made offline", bs, &h, r.Sources[0].Name,
		slog.New(slog.NewTextHandler(io.Discard, nil)), 0)
	require.NoError(t, err)
	require.NoError(t, store.Close())
	return db
}

// Ensure that the report of the demo's two-minute run prints on at most six
// A4 pages in Chromium: page one holds what a signer needs, budgets are
// given for representative segments only (issue 13, "must show").
func TestReport_DemoFitsSixPages(t *testing.T) {
	if testing.Short() {
		t.Skip("needs headless Chromium")
	}
	db := demoRunOffline(t, 2*time.Minute)
	rows := exportRows(t, db, "1")
	require.Greater(t, len(rows), 10, "the demo's sweep gives many segments")
	out := filepath.Join(t.TempDir(), "demo.html")
	code, _, stderr := runCLI(t, "report", "--db", db, "--run", "1", "--out", out)
	require.Equal(t, 0, code, stderr)
	abs, err := filepath.Abs(out)
	require.NoError(t, err)
	tab := browsertest.Browser(t)
	require.NoError(t, chromedp.Do(tab, chromedp.Navigate("file://"+abs)))
	pdf, err := chromedp.Run(tab, chromedp.PrintToPDF(chromedp.PDFPaper(chromedp.PaperA4), chromedp.PDFPrintBackground()))
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(t.ArtifactDir(), "demo-report.pdf"), pdf, 0o644))
	if dir := os.Getenv("LIFTYARD_SCREENSHOTS"); dir != "" {
		require.NoError(t, os.WriteFile(filepath.Join(dir, "demo-report.pdf"), pdf, 0o644))
	}
	pages := len(pdfPage.FindAll(pdf, -1))
	t.Logf("%d segments, %d A4 pages", len(rows), pages)
	require.Greater(t, pages, 0, "pages counted")
	require.LessOrEqual(t, pages, 6, "the demo's report prints on at most 6 A4 pages")
}
