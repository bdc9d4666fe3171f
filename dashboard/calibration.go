package dashboard

import (
	"errors"
	"fmt"
	"html/template"
	"math"
	"net/http"
	"strconv"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"liftyard/calibrate"
	"liftyard/report"
)

// CalibrationStore reads stored calibration records. *storage.Store
// implements it.
//
// Its methods may be called concurrently from HTTP handlers. Calibration
// returns an error wrapping storage.ErrNotFound when no record has the id
// (the dashboard answers 404). Calibrations returns a channel's history
// newest first, every channel's when channel is empty. The returned values
// belong to the caller.
type CalibrationStore interface {
	Calibrations(channel string) ([]calibrate.Record, error)
	Calibration(id string) (calibrate.Record, error)
}

// calCurveSteps is how many segments draw the fitted curve.
const calCurveSteps = 200

// calibrationJSON is one record in the API and on the pages. Floats that
// are NaN print as null (num).
type calibrationJSON struct {
	ID                string     `json:"id"`
	Channel           string     `json:"channel"`
	Unit              string     `json:"unit"`
	Created           time.Time  `json:"created"`
	Who               string     `json:"who"`
	Reference         string     `json:"reference"`
	ReferenceU        num        `json:"reference_u"`
	ValidUntil        *time.Time `json:"valid_until"` // null: no expiry
	Expired           bool       `json:"expired"`
	Order             int        `json:"order"`
	Poly              []num      `json:"poly"`
	PolyU             []num      `json:"poly_u"`
	ResidualSD        num        `json:"residual_sd"`
	Dof               int        `json:"dof"`
	NonlinearityPctFS num        `json:"nonlinearity_pct_fs"`
	HysteresisPctFS   num        `json:"hysteresis_pct_fs"`
	Warnings          []string   `json:"warnings"`
	Note              string     `json:"note,omitempty"`
	Points            []pointRow `json:"points,omitempty"` // detail only
}

// pointRow is a calibration point with its fitted value and residual
// (applied − fitted), both in the record's unit.
type pointRow struct {
	Applied   num    `json:"applied"`
	Reading   num    `json:"reading"`
	Direction string `json:"direction"`
	Fitted    num    `json:"fitted"`
	Residual  num    `json:"residual"`
}

func nums(v []float64) []num {
	out := make([]num, len(v))
	for i, f := range v {
		out[i] = num(f)
	}
	return out
}

func toCalibrationJSON(r calibrate.Record, now time.Time, withPoints bool) calibrationJSON {
	out := calibrationJSON{
		ID: r.ID, Channel: r.Channel, Unit: r.Unit, Created: r.Created, Who: r.Who, Reference: r.Reference,
		ReferenceU: num(r.ReferenceU), Expired: r.Expired(now), Order: r.Fit.Order,
		Poly: nums(r.Fit.Poly), PolyU: nums(r.Fit.PolyU), ResidualSD: num(r.Fit.ResidualSD), Dof: r.Fit.Dof,
		NonlinearityPctFS: num(r.Fit.NonlinearityPctFS), HysteresisPctFS: num(r.Fit.HysteresisPctFS),
		Warnings: r.Fit.Warnings, Note: r.Note,
	}
	if !r.ValidUntil.IsZero() {
		vu := r.ValidUntil
		out.ValidUntil = &vu
	}
	if out.Warnings == nil {
		out.Warnings = []string{}
	}
	if withPoints {
		out.Points = pointRows(r)
	}
	return out
}

// pointRows evaluates the record's own polynomial at each point. That is
// formatting of the stored fit, not a new computation: the fit was made by
// calibrate.FitPoly.
func pointRows(r calibrate.Record) []pointRow {
	p := calibrate.Poly{Coef: r.Fit.Poly}
	rows := make([]pointRow, len(r.Points))
	for i, pt := range r.Points {
		f := p.Eval(pt.Reading)
		rows[i] = pointRow{Applied: num(pt.Applied), Reading: num(pt.Reading), Direction: string(pt.Direction), Fitted: num(f), Residual: num(pt.Applied - f)}
	}
	return rows
}

// calID returns the {id} path segment; every id the store holds is a
// non-empty printable string without '/'.
func calID(r *http.Request) (string, error) {
	id := r.PathValue("id")
	if id == "" || len(id) > 200 {
		return "", fmt.Errorf("%w: calibration id %q is empty or too long", errBadRequest, id)
	}
	return id, nil
}

// errNoCalStore is returned when the dashboard was started without a
// calibration store.
var errNoCalStore = errors.New("this dashboard has no calibration store")

// failCal answers like fail, but names a calibration in the 404.
func (s *Server) failCal(w http.ResponseWriter, r *http.Request, err error, api bool) {
	if isNotFound(err) || errors.Is(err, errNoCalStore) {
		msg := "no such calibration"
		if errors.Is(err, errNoCalStore) {
			msg = err.Error()
		}
		if api {
			writeJSONStatus(w, http.StatusNotFound, map[string]string{"error": msg})
			return
		}
		s.errorPage(w, r, http.StatusNotFound, msg)
		return
	}
	s.fail(w, r, err, api)
}

func (s *Server) calibration(r *http.Request) (calibrate.Record, error) {
	id, err := calID(r)
	if err != nil {
		return calibrate.Record{}, err
	}
	if s.cals == nil {
		return calibrate.Record{}, errNoCalStore
	}
	rec, err := s.cals.Calibration(id)
	if err != nil {
		return calibrate.Record{}, fmt.Errorf("read calibration %q: %w", id, err)
	}
	return rec, nil
}

// calibrationList returns the history, filtered by the ?channel= query.
func (s *Server) calibrationList(r *http.Request) ([]calibrate.Record, error) {
	if s.cals == nil {
		return nil, nil
	}
	recs, err := s.cals.Calibrations(r.URL.Query().Get("channel"))
	if err != nil {
		return nil, fmt.Errorf("list calibrations: %w", err)
	}
	return recs, nil
}

func (s *Server) apiCalibrations(w http.ResponseWriter, r *http.Request) {
	recs, err := s.calibrationList(r)
	if err != nil {
		s.failCal(w, r, err, true)
		return
	}
	now := s.now()
	out := make([]calibrationJSON, len(recs))
	for i, rec := range recs {
		out[i] = toCalibrationJSON(rec, now, false)
	}
	writeJSONStatus(w, http.StatusOK, out)
}

func (s *Server) apiCalibration(w http.ResponseWriter, r *http.Request) {
	rec, err := s.calibration(r)
	if err != nil {
		s.failCal(w, r, err, true)
		return
	}
	writeJSONStatus(w, http.StatusOK, toCalibrationJSON(rec, s.now(), true))
}

// calibrationPageData feeds calibration.html: the history list, or one
// record when Detail is set.
type calibrationPageData struct {
	Detail  *calibrationJSON
	Channel string // the ?channel= filter of the list, or ""
	Store   bool   // a calibration store is attached
	List    []calibrationJSON
}

func (s *Server) calibrationsPage(w http.ResponseWriter, r *http.Request) {
	recs, err := s.calibrationList(r)
	if err != nil {
		s.failCal(w, r, err, false)
		return
	}
	now := s.now()
	list := make([]calibrationJSON, len(recs))
	for i, rec := range recs {
		list[i] = toCalibrationJSON(rec, now, false)
	}
	s.render(w, r, s.pages.cal, pageData{
		Title: "Calibrations", Nav: "calibrations", Token: !s.loopback.Load(),
		Content: calibrationPageData{Channel: r.URL.Query().Get("channel"), Store: s.cals != nil, List: list},
	})
}

func (s *Server) calibrationPage(w http.ResponseWriter, r *http.Request) {
	rec, err := s.calibration(r)
	if err != nil {
		s.failCal(w, r, err, false)
		return
	}
	cj := toCalibrationJSON(rec, s.now(), true)
	s.render(w, r, s.pages.cal, pageData{
		Title: "Calibration " + rec.ID, Nav: "calibrations", Token: !s.loopback.Load(),
		Content: calibrationPageData{Detail: &cj, Store: true},
	})
}

func (s *Server) calibrationFitSVG(w http.ResponseWriter, r *http.Request) {
	s.calibrationSVG(w, r, calFitPlot)
}

func (s *Server) calibrationResidualSVG(w http.ResponseWriter, r *http.Request) {
	s.calibrationSVG(w, r, calResidualPlot)
}

func (s *Server) calibrationSVG(w http.ResponseWriter, r *http.Request, draw func(calibrate.Record) ([]byte, error)) {
	rec, err := s.calibration(r)
	if err != nil {
		s.failCal(w, r, err, false)
		return
	}
	b, err := draw(rec)
	if err != nil {
		s.fail(w, r, fmt.Errorf("calibration %q: %w", rec.ID, err), false)
		return
	}
	w.Header().Set("Content-Type", "image/svg+xml")
	w.Header().Set("Cache-Control", "no-store")
	w.Write(b)
}

// finitePoints splits a record's points into loading and unloading sets,
// leaving out any that are not finite (plotter refuses them).
func finitePoints(rec calibrate.Record, y func(calibrate.Point) float64) (up, down plotter.XYs, dropped int) {
	for _, p := range rec.Points {
		yv := y(p)
		if math.IsNaN(p.Reading) || math.IsInf(p.Reading, 0) || math.IsNaN(yv) || math.IsInf(yv, 0) {
			dropped++
			continue
		}
		xy := plotter.XY{X: p.Reading, Y: yv}
		if p.Direction == calibrate.Down {
			down = append(down, xy)
		} else {
			up = append(up, xy)
		}
	}
	return up, down, dropped
}

// unitLabel is "[N]" or "" when the record states no unit.
func unitLabel(u string) string {
	if u == "" {
		return ""
	}
	return " [" + u + "]"
}

// addPoints draws loading points as filled circles and unloading points as
// open triangles, so they differ without colour.
func addPoints(p *plot.Plot, up, down plotter.XYs) error {
	if len(up) > 0 {
		sc, err := plotter.NewScatter(up)
		if err != nil {
			return err
		}
		sc.GlyphStyle.Shape = draw.CircleGlyph{}
		sc.GlyphStyle.Radius = vg.Points(3)
		p.Add(sc)
		p.Legend.Add("loading points", sc)
	}
	if len(down) > 0 {
		sc, err := plotter.NewScatter(down)
		if err != nil {
			return err
		}
		sc.GlyphStyle.Shape = draw.TriangleGlyph{}
		sc.GlyphStyle.Radius = vg.Points(3.5)
		p.Add(sc)
		p.Legend.Add("unloading points", sc)
	}
	return nil
}

// calFitPlot draws the points (applied against reading) and the fitted
// polynomial over the calibrated range.
func calFitPlot(rec calibrate.Record) ([]byte, error) {
	p := plot.New()
	p.Title.Text = "Calibration " + rec.ID + ": fit of order " + strconv.Itoa(rec.Fit.Order)
	p.X.Label.Text = "raw reading"
	p.Y.Label.Text = "applied value" + unitLabel(rec.Unit)
	p.Add(plotter.NewGrid())
	up, down, dropped := finitePoints(rec, func(pt calibrate.Point) float64 { return pt.Applied })
	if dropped > 0 {
		p.X.Label.Text += fmt.Sprintf(" — %d point(s) not finite, not shown", dropped)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, xy := range append(append(plotter.XYs{}, up...), down...) {
		lo, hi = min(lo, xy.X), max(hi, xy.X)
	}
	if lo < hi && len(rec.Fit.Poly) > 0 {
		poly := calibrate.Poly{Coef: rec.Fit.Poly}
		curve := make(plotter.XYs, 0, calCurveSteps+1)
		for i := 0; i <= calCurveSteps; i++ {
			x := lo + (hi-lo)*float64(i)/calCurveSteps
			if y := poly.Eval(x); !math.IsNaN(y) && !math.IsInf(y, 0) {
				curve = append(curve, plotter.XY{X: x, Y: y})
			}
		}
		if len(curve) > 1 {
			l, err := plotter.NewLine(curve)
			if err != nil {
				return nil, fmt.Errorf("fit curve: %w", err)
			}
			p.Add(l)
			p.Legend.Add("fitted polynomial", l)
		}
	} else {
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
	}
	if err := addPoints(p, up, down); err != nil {
		return nil, fmt.Errorf("calibration points: %w", err)
	}
	if all := append(append(plotter.XYs{}, up...), down...); len(all) > 0 {
		ylo, yhi := math.Inf(1), math.Inf(-1)
		for _, xy := range all {
			ylo, yhi = min(ylo, xy.Y), max(yhi, xy.Y)
		}
		p.X.Min, p.X.Max = padRange(lo, hi)
		p.Y.Min, p.Y.Max = padRange(ylo, yhi)
	}
	// A calibration curve rises (or falls) across the plot: the legend goes
	// in the left corner it leaves empty (top for a rising curve, bottom for
	// a falling one), clear of the title and the axes.
	rising := len(rec.Fit.Poly) < 2 || rec.Fit.Poly[1] >= 0
	p.Legend.Top, p.Legend.Left = rising, true
	p.Legend.XOffs = vg.Points(10)
	p.Legend.YOffs = vg.Points(10)
	if rising {
		p.Legend.YOffs = -vg.Points(14)
	}
	return report.SVG(p, 6.5*vg.Inch, 4*vg.Inch)
}

// calResidualPlot draws applied − fitted against the reading, with the
// zero line and ± the residual SD.
func calResidualPlot(rec calibrate.Record) ([]byte, error) {
	poly := calibrate.Poly{Coef: rec.Fit.Poly}
	p := plot.New()
	p.Title.Text = "Residuals: applied − fitted"
	p.X.Label.Text = "raw reading"
	p.Y.Label.Text = "residual" + unitLabel(rec.Unit)
	p.Add(plotter.NewGrid())
	up, down, dropped := finitePoints(rec, func(pt calibrate.Point) float64 { return pt.Applied - poly.Eval(pt.Reading) })
	if dropped > 0 {
		p.X.Label.Text += fmt.Sprintf(" — %d point(s) not finite, not shown", dropped)
	}
	all := append(append(plotter.XYs{}, up...), down...)
	if len(all) == 0 {
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, -1, 1
	} else {
		lo, hi := math.Inf(1), math.Inf(-1)
		ymax := 0.0
		for _, xy := range all {
			lo, hi = min(lo, xy.X), max(hi, xy.X)
			ymax = max(ymax, math.Abs(xy.Y))
		}
		sd := rec.Fit.ResidualSD
		if !math.IsNaN(sd) && !math.IsInf(sd, 0) && sd > 0 && lo < hi {
			for _, level := range []float64{sd, -sd} {
				l, err := plotter.NewLine(plotter.XYs{{X: lo, Y: level}, {X: hi, Y: level}})
				if err != nil {
					return nil, fmt.Errorf("residual SD line: %w", err)
				}
				l.LineStyle.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
				p.Add(l)
				if level > 0 {
					p.Legend.Add("± residual SD", l)
				}
			}
			ymax = max(ymax, sd)
		}
		if ymax == 0 {
			ymax = 1
		}
		// Headroom above the points for the legend.
		p.Y.Min, p.Y.Max = -1.2*ymax, 2.4*ymax
		p.X.Min, p.X.Max = padRange(lo, hi)
	}
	if err := addPoints(p, up, down); err != nil {
		return nil, fmt.Errorf("residual points: %w", err)
	}
	p.Legend.Top, p.Legend.Left = true, true
	p.Legend.XOffs, p.Legend.YOffs = vg.Points(10), -vg.Points(12)
	return report.SVG(p, 6.5*vg.Inch, 3.2*vg.Inch)
}

// padRange widens [lo, hi] by 5 % on each side, so no point sits on the
// frame.
func padRange(lo, hi float64) (float64, float64) {
	m := 0.05 * (hi - lo)
	if m == 0 {
		m = 0.5 * max(math.Abs(lo), 1)
	}
	return lo - m, hi + m
}

// calFuncs format the calibration pages' numbers. They only print.
var calFuncs = template.FuncMap{
	// sig prints 3 significant digits, for uncertainties and residuals.
	"sig": func(n num) string { return sigStr(n, 3) },
	// sig6 prints 6 significant digits, for fitted values.
	"sig6": func(n num) string { return sigStr(n, 6) },
	// full prints every digit the record holds (coefficients, points).
	"full": fullStr,
	"day":  func(t *time.Time) string { return t.Format("2006-01-02") },
	"inc":  func(i int) int { return i + 1 },
}

func sigStr(n num, digits int) string {
	if !finite(n) {
		return "—"
	}
	return strconv.FormatFloat(float64(n), 'g', digits, 64)
}

// fullStr prints every digit of n (the shortest form that reads back to
// the same float64): plain for ordinary magnitudes such as 24-bit ADC
// readings, as "2.4375×10⁻⁵" for very small or large ones.
func fullStr(n num) string {
	if !finite(n) {
		return "—"
	}
	f := float64(n)
	if a := math.Abs(f); a == 0 || (a >= 1e-4 && a < 1e15) {
		return strconv.FormatFloat(f, 'f', -1, 64)
	}
	s := strconv.FormatFloat(f, 'e', -1, 64)
	mant, exp, _ := strings.Cut(s, "e")
	e, err := strconv.Atoi(exp)
	if err != nil {
		return s
	}
	return mant + "×10" + superscript.Replace(strconv.Itoa(e))
}
