package dashboard

import (
	"bytes"
	"embed"
	"fmt"
	"html/template"
	"math"
	"net/http"
	"strconv"
	"strings"
	"time"

	"liftyard/acquire"
	"liftyard/report"
	"liftyard/storage"
)

//go:embed web
var webFS embed.FS

// pages holds the parsed templates, one set per page, parsed once by New.
type pages struct {
	live, runs, run *template.Template
	cal             *template.Template // calibration list and detail (calibration.go)
	compare         *template.Template // run against run (compare.go)
	err             *template.Template // error pages (errors.go)
}

func parsePages() (*pages, error) {
	parse := func(page string) (*template.Template, error) {
		t, err := template.New(page).Funcs(funcs).Funcs(calFuncs).ParseFS(webFS, "web/templates/base.html", "web/templates/"+page)
		if err != nil {
			return nil, fmt.Errorf("dashboard template %s: %w", page, err)
		}
		return t, nil
	}
	var p pages
	var err error
	if p.live, err = parse("live.html"); err != nil {
		return nil, err
	}
	if p.runs, err = parse("runs.html"); err != nil {
		return nil, err
	}
	if p.run, err = parse("run.html"); err != nil {
		return nil, err
	}
	if p.cal, err = parse("calibration.html"); err != nil {
		return nil, err
	}
	if p.compare, err = parse("compare.html"); err != nil {
		return nil, err
	}
	if p.err, err = parse("error.html"); err != nil {
		return nil, err
	}
	return &p, nil
}

// render executes a page into a buffer first, so a template error becomes
// a clean 500 instead of half a page.
func (s *Server) render(w http.ResponseWriter, r *http.Request, t *template.Template, data pageData) {
	s.renderStatus(w, r, t, http.StatusOK, data)
}

// renderStatus is render with a status other than 200 (a page that says
// what to fix in a request).
func (s *Server) renderStatus(w http.ResponseWriter, r *http.Request, t *template.Template, status int, data pageData) {
	if err := s.writePage(w, t, status, data); err != nil {
		s.fail(w, r, fmt.Errorf("render %s: %w", t.Name(), err), false)
	}
}

// writePage renders t with data into memory and, when that worked, sends
// it with status and the page headers; on a template error nothing has
// been written and the caller answers.
func (s *Server) writePage(w http.ResponseWriter, t *template.Template, status int, data pageData) error {
	data.Caps = s.caps()
	var buf bytes.Buffer
	if err := t.ExecuteTemplate(&buf, "base", data); err != nil {
		return err
	}
	h := w.Header()
	h.Set("Content-Type", "text/html; charset=utf-8")
	h.Set("Cache-Control", "no-store")
	h.Set("Content-Security-Policy", pageCSP)
	w.WriteHeader(status)
	buf.WriteTo(w)
	return nil
}

// pageCSP is the Content-Security-Policy of every page: its own scripts,
// styles and images only.
const pageCSP = "default-src 'self'; img-src 'self'; style-src 'self'; script-src 'self'; connect-src 'self'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'"

// pageData is what every page gets.
type pageData struct {
	Title   string
	Nav     string // "live" or "runs": the highlighted link
	Token   bool   // off loopback: show the sign-out button
	Caps    caps   // which links to offer
	Content any
}

type livePageData struct {
	Run  *storage.Run
	Live bool     // a recording feeds this dashboard (Config.Live)
	View kindView // the current run's view (the balance view without a run)
	// Layouts maps each rig kind to its live layout, for live.js.
	Layouts map[string]string
	// Acknowledge: a held overload alarm may be acknowledged from the page.
	Acknowledge bool
}

type runsPageData struct {
	Runs    []runRow
	Compare bool // offer the run-against-run form (Config.Compare)
}

type runRow struct {
	Run      storage.Run
	Duration time.Duration
}

type runPageData struct {
	Run      storage.Run
	View     kindView
	Caps     caps
	Duration time.Duration
	Segments []segmentJSON
	Health   []acquire.HealthSnapshot
}

func (s *Server) livePage(w http.ResponseWriter, r *http.Request) {
	cur := s.current.Load()
	view := balanceView()
	if cur != nil {
		view = viewOf(cur.Kind)
	}
	s.render(w, r, s.pages.live, pageData{
		Title: "Live", Nav: "live", Token: !s.loopback.Load(),
		Content: livePageData{Run: cur, Live: s.live, View: view, Layouts: layouts(), Acknowledge: s.caps().Acknowledge},
	})
}

func (s *Server) runsPage(w http.ResponseWriter, r *http.Request) {
	rs, err := s.runs()
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	now := s.now()
	rows := make([]runRow, len(rs))
	for i, run := range rs {
		rows[i] = runRow{Run: run, Duration: runDuration(run, now)}
	}
	s.render(w, r, s.pages.runs, pageData{
		Title: "Runs", Nav: "runs", Token: !s.loopback.Load(),
		Content: runsPageData{Runs: rows, Compare: s.compare != nil},
	})
}

func (s *Server) runPage(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	run, segs, err := s.run(id)
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	s.render(w, r, s.pages.run, pageData{
		Title: "Run " + strconv.FormatUint(id, 10), Nav: "runs", Token: !s.loopback.Load(),
		Content: runPageData{Run: run, View: viewOf(run.Kind), Caps: s.caps(), Duration: runDuration(run, s.now()), Segments: segs, Health: notAllZero(run.Sources)},
	})
}

// funcs format numbers for the pages. They only round and label; every
// number was computed by estimate (angles arrive in degrees, U95 expanded).
var funcs = template.FuncMap{
	// words shows an identifier as words: fresh_water → fresh water.
	"words": func(v any) string { return strings.ReplaceAll(fmt.Sprint(v), "_", " ") },
	"fix": func(v any, digits int) string {
		switch v := v.(type) {
		case num:
			return fix(v, digits)
		case float64:
			return fix(num(v), digits)
		}
		return fmt.Sprint(v)
	},
	"pm":    pm,
	"sci":   sci,
	"dur":   func(d time.Duration) string { return d.Round(time.Second).String() },
	"when":  func(t time.Time) string { return whenStr(t) },
	"count": func(n uint64) string { return strconv.FormatUint(n, 10) },
	"json":  func(v map[string]string) string { return string(mustJSON(v)) },
}

func finite(n num) bool { f := float64(n); return !math.IsNaN(f) && !math.IsInf(f, 0) }

// fix rounds to digits decimals; "—" for a missing value.
func fix(n num, digits int) string {
	if !finite(n) {
		return "—"
	}
	return strconv.FormatFloat(float64(n), 'f', digits, 64)
}

// pm writes "v ± U" by the one rounding rule of the report and every page
// (report.PlusMinus): U to two significant digits and v to the same decimal
// place; without a usable U, v to digits decimals.
func pm(v, u num, digits int) string { return report.PlusMinus(float64(v), float64(u), digits) }

var superscript = strings.NewReplacer("0", "⁰", "1", "¹", "2", "²", "3", "³", "4", "⁴", "5", "⁵", "6", "⁶", "7", "⁷", "8", "⁸", "9", "⁹", "-", "⁻")

// sci writes a large number such as a Reynolds number as "3.21×10⁵".
func sci(n num) string {
	if !finite(n) {
		return "—"
	}
	f := float64(n)
	if f == 0 {
		return "0"
	}
	e := int(math.Floor(math.Log10(math.Abs(f))))
	if e >= -2 && e < 4 {
		return strconv.FormatFloat(f, 'g', 3, 64)
	}
	m := f / math.Pow(10, float64(e))
	if math.Abs(m) >= 9.995 { // rounding carried into the next power
		m /= 10
		e++
	}
	return strconv.FormatFloat(m, 'f', 2, 64) + "×10" + superscript.Replace(strconv.Itoa(e))
}

func whenStr(t time.Time) string {
	if t.IsZero() {
		return "—"
	}
	return t.Format("2006-01-02 15:04:05 MST")
}

// notAllZero drops source rows whose every counter is zero (the store's
// own row on a clean run), which say nothing (issue 13).
func notAllZero(hs []acquire.HealthSnapshot) []acquire.HealthSnapshot {
	var out []acquire.HealthSnapshot
	for _, h := range hs {
		if h.Frames == 0 && h.Samples == 0 && h.Rejected == 0 && h.SamplesDropped == 0 && h.BlocksDropped == 0 &&
			h.Duplicates == 0 && h.Gaps == 0 && h.Late == 0 && h.Reconnects == 0 {
			continue
		}
		out = append(out, h)
	}
	return out
}
