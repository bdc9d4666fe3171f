package main

import (
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/chromedp/chromedp"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/dashboard"
	"liftyard/internal/browsertest"
	"liftyard/storage"
)

// importWithDesign imports importCSV with the example rig plus a design
// curve named by a relative path, both in their own folder; it returns the
// store and that folder.
func importWithDesign(t *testing.T) (db, rigDir string) {
	t.Helper()
	rigDir = t.TempDir()
	rigText, err := os.ReadFile(towtankRig)
	require.NoError(t, err)
	design, err := os.ReadFile(designCSV)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(rigDir, "towtank-design.csv"), design, 0o644))
	// [lift] is the rig file's last table: the line lands in it.
	rigPath := filepath.Join(rigDir, "towtank.toml")
	require.NoError(t, os.WriteFile(rigPath, append(rigText, []byte("\ndesign = \"towtank-design.csv\"\n")...), 0o644))
	db = filepath.Join(t.TempDir(), "report.db")
	code, _, errOut := runCLI(t, "import", "--rig", rigPath, "--db", db, importCSV)
	require.Equal(t, 0, code, errOut)
	return db, rigDir
}

// Ensure that `report` of an imported run writes one HTML file with every
// segment, the lift slope and the design comparison (design curve read
// through --rig-dir), prints its path, and that Chromium renders it: a
// screenshot and an A4 PDF are kept for people to look at.
func TestReport_ImportedRunEndToEnd(t *testing.T) {
	db, rigDir := importWithDesign(t)
	out := filepath.Join(t.TempDir(), "run1.html")
	code, stdout, errOut := runCLI(t, "report", "--db", db, "--run", "latest", "--out", out, "--rig-dir", rigDir)
	require.Equal(t, 0, code, errOut)
	abs, _ := filepath.Abs(out)
	assert.Equal(t, abs+"\n", stdout, "report prints the file's path")

	data, err := os.ReadFile(out)
	require.NoError(t, err)
	html := string(data)
	rows := exportRows(t, db, "1")
	require.Len(t, rows, len(importStep))
	tbody := html[strings.Index(html, "<h2>Steady segments</h2>"):]
	tbody = tbody[strings.Index(tbody, "<tbody>"):strings.Index(tbody, "</tbody>")]
	assert.Equal(t, len(rows), strings.Count(tbody, "<tr"), "one table row per stored segment")
	assert.Contains(t, html, "Lift-curve slope a [1/rad]")
	assert.Contains(t, html, "Lift slope ")
	assert.Contains(t, html, "design curve towtank-design.csv")
	assert.Contains(t, html, "foil-towtank")
	assert.Contains(t, html, "test data, not a design approval")
	assert.NotContains(t, html, "cannot be read")

	// Without --rig-dir the relative design path is not found: the report
	// is still made and says so.
	out2 := filepath.Join(t.TempDir(), "run1-nodesign.html")
	code, _, errOut = runCLI(t, "report", "--db", db, "--run", "1", "--out", out2)
	require.Equal(t, 0, code, errOut)
	data2, err := os.ReadFile(out2)
	require.NoError(t, err)
	assert.Contains(t, string(data2), "cannot be read")
	assert.Contains(t, string(data2), "--rig-dir")

	if testing.Short() {
		return
	}
	tab := browsertest.Browser(t)
	require.NoError(t, chromedp.Do(tab, chromedp.Navigate("file://"+abs)))
	title, err := chromedp.Run(tab, chromedp.Text(chromedp.CSS("h1")))
	require.NoError(t, err)
	assert.Equal(t, "Lift test report: run 1", title)
	nsvg, err := chromedp.Run(tab, chromedp.Evaluate[int](`document.querySelectorAll("figure svg").length`))
	require.NoError(t, err)
	assert.Equal(t, 4, nsvg, "lift, drag polar, En and q plots")
	// The plots are laid out at a readable size, not collapsed.
	// issue 13: the lift curve sits on page one at a smaller size, the
	// others two to a row.
	w, err := chromedp.Run(tab, chromedp.Evaluate[float64](`Math.min(...[...document.querySelectorAll("figure svg")].map(e => e.getBoundingClientRect().height))`))
	require.NoError(t, err)
	assert.Greater(t, w, 120.0)
	assert.Empty(t, browsertest.Exceptions(tab))

	png, err := chromedp.Run(tab, chromedp.FullScreenshot(100))
	require.NoError(t, err)
	pdf, err := chromedp.Run(tab, chromedp.PrintToPDF(chromedp.PDFPaper(chromedp.PaperA4), chromedp.PDFPrintBackground()))
	require.NoError(t, err)
	assert.True(t, strings.HasPrefix(string(pdf), "%PDF-"))
	for name, b := range map[string][]byte{"report.png": png, "report.pdf": pdf} {
		require.NoError(t, os.WriteFile(filepath.Join(t.ArtifactDir(), name), b, 0o644))
		if dir := os.Getenv("LIFTYARD_SCREENSHOTS"); dir != "" {
			require.NoError(t, os.WriteFile(filepath.Join(dir, name), b, 0o644))
		}
	}
	if _, err := exec.LookPath("pdfinfo"); err == nil {
		pdfPath := filepath.Join(t.ArtifactDir(), "report.pdf")
		info, err := exec.Command("pdfinfo", pdfPath).Output()
		require.NoError(t, err)
		assert.Regexp(t, `Pages:\s+([4-9]|\d\d)`, string(info), "sections break onto their own pages")
	}
}

// Ensure that bad usage exits 2 and names what to fix: an unknown run is
// named, a missing --out or --run is asked for.
func TestReport_BadUsage(t *testing.T) {
	db, _ := importWithDesign(t)
	out := filepath.Join(t.TempDir(), "x.html")
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"unknown run", []string{"--db", db, "--run", "42", "--out", out}, "run 42: no such run"},
		{"bad run ref", []string{"--db", db, "--run", "first", "--out", out}, `"first"`},
		{"no out", []string{"--db", db, "--run", "1"}, "--out missing"},
		{"no run", []string{"--db", db, "--out", out}, "--run missing"},
		{"no store", []string{"--db", filepath.Join(t.TempDir(), "none.db"), "--run", "1", "--out", out}, "none.db"},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, errOut := runCLI(t, append([]string{"report"}, c.args...)...)
			assert.Equal(t, 2, code)
			assert.Contains(t, errOut, c.want)
			_, err := os.Stat(out)
			assert.True(t, os.IsNotExist(err), "no file written on bad usage")
		})
	}
}

// Ensure that the dashboard serves the same report at /runs/{id}/report
// as HTML under a strict content policy, links it from the run page, and
// answers 404 for an unknown run.
func TestReport_DashboardRoute(t *testing.T) {
	db, _ := importWithDesign(t)
	store, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer store.Close()
	srv, err := dashboard.New(dashboard.Config{Runs: store, Report: reportWriter(store, ""), Calibrations: store})
	require.NoError(t, err)
	ts := httptest.NewServer(srv.Handler())
	defer ts.Close()

	get := func(path string) (*http.Response, string) {
		t.Helper()
		req, err := http.NewRequest("GET", ts.URL+path, nil)
		require.NoError(t, err)
		req.Host = "127.0.0.1:8470" // the dashboard checks Host on loopback
		resp, err := ts.Client().Do(req)
		require.NoError(t, err)
		defer resp.Body.Close()
		b, err := io.ReadAll(resp.Body)
		require.NoError(t, err)
		return resp, string(b)
	}
	resp, body := get("/runs/1/report")
	require.Equal(t, http.StatusOK, resp.StatusCode, body)
	assert.Equal(t, "text/html; charset=utf-8", resp.Header.Get("Content-Type"))
	assert.Contains(t, resp.Header.Get("Content-Security-Policy"), "default-src 'none'")
	assert.Contains(t, body, "Lift test report: run 1")
	assert.Contains(t, body, "Lift-curve slope a [1/rad]")

	resp, body = get("/runs/1")
	require.Equal(t, http.StatusOK, resp.StatusCode, body)
	assert.Contains(t, body, `<a href="/runs/1/report"`)
	assert.Contains(t, body, "Report (printable)")

	resp, _ = get("/runs/77/report")
	assert.Equal(t, http.StatusNotFound, resp.StatusCode)
}
