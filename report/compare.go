package report

import (
	"bytes"
	_ "embed"
	"errors"
	"fmt"
	"html/template"
	"image/color"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// Comparison is run against run: several runs of a test campaign (flap or
// trim settings, repeat runs) compared with the first, at matching
// set-points (estimate.CompareRuns). It is data: WriteHTML renders the
// printable comparison, LiftSVG and DragSVG its overlay plots, Doc its
// JSON.
type Comparison struct {
	Generated time.Time
	Version   string
	Runs      []storage.Run // the runs, the reference first
	Series    []estimate.RunSeries
	Diffs     []estimate.RunDiff // one per run after the first
	Notes     []string
}

// ErrCompareUsage is returned by BuildComparison when the run list cannot
// be compared (fewer than two runs, a run listed twice, a roof run, a
// rotor with a foil); the message says which.
var ErrCompareUsage = errors.New("these runs cannot be compared")

// BuildComparison reads runs ids (the first is the reference) from store
// and compares them. An unknown run gives an error wrapping
// storage.ErrNotFound; a list that cannot be compared, ErrCompareUsage.
func BuildComparison(store *storage.Store, ids []uint64, opts Options) (*Comparison, error) {
	if store == nil {
		return nil, errors.New("compare: no store")
	}
	if len(ids) < 2 {
		return nil, fmt.Errorf("%d run(s) given, need at least two (the first is the reference): %w", len(ids), ErrCompareUsage)
	}
	now := time.Now
	if opts.Now != nil {
		now = opts.Now
	}
	c := &Comparison{Generated: now(), Version: opts.Version}
	if c.Version == "" {
		c.Version = "dev"
	}
	seen := map[uint64]bool{}
	for _, id := range ids {
		if seen[id] {
			return nil, fmt.Errorf("run %d is listed twice: %w", id, ErrCompareUsage)
		}
		seen[id] = true
		run, err := store.Run(id)
		if err != nil {
			return nil, fmt.Errorf("compare run %d: %w", id, err)
		}
		if sectionOf(run.Kind).zones {
			return nil, fmt.Errorf("run %d is a %s run: its rows are zones, not polar points: %w", id, run.Kind, ErrCompareUsage)
		}
		segs, err := store.Segments(id)
		if err != nil {
			return nil, fmt.Errorf("compare run %d: %w", id, err)
		}
		s := estimate.RunSeries{Label: "run " + strconv.FormatUint(id, 10), Segments: segs}
		switch rg, err := rig.Parse("", []byte(run.RigTOML)); {
		case run.RigTOML == "":
			c.Notes = append(c.Notes, s.Label+" has no stored rig file: no calibration is taken as shared with it")
		case err != nil:
			c.Notes = append(c.Notes, s.Label+"'s stored rig file does not parse with this version ("+err.Error()+"): no calibration is taken as shared with it")
		default:
			s.Rig = rg
		}
		c.Runs = append(c.Runs, run)
		c.Series = append(c.Series, s)
	}
	d, err := estimate.CompareRuns(c.Series, estimate.RunCompareOptions{})
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrCompareUsage, err)
	}
	c.Diffs = d
	return c, nil
}

// Spin reports whether the runs are compared on the spin ratio (rotors).
func (c *Comparison) Spin() bool { return len(c.Diffs) > 0 && c.Diffs[0].Spin }

// Verdict is the comparison's one-line verdict: every pair's, joined.
func (c *Comparison) Verdict() string {
	var vs []string
	for _, d := range c.Diffs {
		vs = append(vs, d.Verdict())
	}
	return strings.Join(vs, ". ")
}

// Run colours and glyphs: one per run, told apart in grey print by the
// glyph too (our own choice).
var (
	runColours = []color.RGBA{
		{R: 0x1f, G: 0x3a, B: 0x93, A: 0xff}, {R: 0xb3, G: 0x40, B: 0x00, A: 0xff}, {R: 0x2e, G: 0x7d, B: 0x32, A: 0xff},
		{R: 0x7b, G: 0x1f, B: 0xa2, A: 0xff}, {R: 0x00, G: 0x83, B: 0x8f, A: 0xff}, {R: 0x5d, G: 0x40, B: 0x37, A: 0xff},
	}
	runGlyphs = []draw.GlyphDrawer{draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}, draw.RingGlyph{}, draw.BoxGlyph{}, draw.PyramidGlyph{}}
)

// LiftSVG draws every run's C_L against α (S for rotors) with U95 bars,
// each run joined in order of its set-point, as a standalone SVG.
func (c *Comparison) LiftSVG() ([]byte, error) {
	p, err := c.overlay(false)
	if err != nil {
		return nil, err
	}
	return SVG(p, plotW, plotH)
}

// DragSVG draws every run's drag polar, C_D against C_L with U95 bars in
// both, as a standalone SVG (empty axes that say so when no run has C_D).
func (c *Comparison) DragSVG() ([]byte, error) {
	p, err := c.overlay(true)
	if err != nil {
		return nil, err
	}
	return SVG(p, plotW, plotH)
}

// overlay builds the lift (drag: the drag polar) overlay of the runs.
func (c *Comparison) overlay(drag bool) (*plot.Plot, error) {
	title, xLabel, yLabel := "Lift coefficient, run against run", "angle of attack α [°]", "C_L"
	switch {
	case drag:
		title, xLabel, yLabel = "Drag polar, run against run", "C_L", "C_D"
	case c.Spin():
		xLabel = "spin ratio S = ωR/V"
	}
	p := newPlot(title, xLabel, yLabel)
	xmin, xmax, ymin, ymax := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	shown := 0
	for i, s := range c.Series {
		var pts errPts
		for _, g := range s.Segments {
			x, ux := rig.Deg(g.AlphaRad.X), rig.Deg(u95Of(g.AlphaRad))
			y, uy := g.CL.X, u95Of(g.CL)
			switch {
			case drag:
				x, ux, y, uy = g.CL.X, u95Of(g.CL), g.CD.X, u95Of(g.CD)
				if !measured(g.CD) {
					continue
				}
			case c.Spin():
				x, ux = g.SpinRatio, 0
			}
			if !finite(x) || !measured(g.CL) {
				continue
			}
			pts.add(x, y, ux, uy)
		}
		if len(pts.XYs) == 0 {
			continue
		}
		shown++
		order := make([]int, len(pts.XYs))
		for k := range order {
			order[k] = k
		}
		if !drag {
			sort.SliceStable(order, func(a, b int) bool { return pts.XYs[order[a]].X < pts.XYs[order[b]].X })
			line := make(plotter.XYs, len(order))
			for k, o := range order {
				line[k] = pts.XYs[o]
			}
			if err := addCurve(p, line, runColours[i%len(runColours)], []vg.Length{vg.Points(2), vg.Points(2)}, ""); err != nil {
				return nil, fmt.Errorf("comparison plot: %w", err)
			}
		}
		if err := addRunPoints(p, &pts, i, c.Runs[i].ID); err != nil {
			return nil, fmt.Errorf("comparison plot: %w", err)
		}
		a, b, lo, hi := pts.bounds()
		xmin, xmax, ymin, ymax = min(xmin, a), max(xmax, b), min(ymin, lo), max(ymax, hi)
	}
	if shown == 0 {
		p.X.Label.Text += " — no run has points to show"
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
		return p, nil
	}
	p.X.Min, p.X.Max = pad(xmin, xmax)
	p.Y.Min, p.Y.Max = padY(ymin, ymax)
	return p, nil
}

// addRunPoints draws one run's points with U95 bars in both directions in
// the run's colour and glyph.
func addRunPoints(p *plot.Plot, pts *errPts, i int, id uint64) error {
	legend := "run " + strconv.FormatUint(id, 10)
	if i == 0 {
		legend += " (reference)"
	}
	return drawPoints(p, pts, true, runColours[i%len(runColours)], runGlyphs[i%len(runGlyphs)], vg.Points(2.8), legend+" ± U95")
}

// DiffDoc is one point of a pair in the comparison's JSON (Doc).
type DiffDoc struct {
	RefSegment     int          `json:"ref_segment"`
	OtherSegments  []int        `json:"other_segments"`
	Interpolated   bool         `json:"interpolated"`
	AlphaDeg       estimate.Num `json:"alpha_deg"`
	AlphaOtherDeg  estimate.Num `json:"alpha_other_deg"`
	SpinRatio      estimate.Num `json:"spin_ratio,omitempty"`
	SpinRatioOther estimate.Num `json:"spin_ratio_other,omitempty"`
	CLRef          estimate.Num `json:"cl_ref"`
	CLOther        estimate.Num `json:"cl_other"`
	DeltaCL        estimate.Num `json:"delta_cl"`
	DeltaCLU95     estimate.Num `json:"delta_cl_u95"`
	En             estimate.Num `json:"en"`
	DeltaCD        estimate.Num `json:"delta_cd"`
	DeltaCDU95     estimate.Num `json:"delta_cd_u95"`
	EnCD           estimate.Num `json:"en_cd"`
	Agrees         bool         `json:"agrees"`
}

// PairDoc is one pair of the comparison's JSON.
type PairDoc struct {
	RefRun    uint64    `json:"ref_run"`
	OtherRun  uint64    `json:"other_run"`
	SetPoint  string    `json:"set_point"` // "alpha" or "spin_ratio"
	Shared    []string  `json:"shared"`
	Points    []DiffDoc `json:"points"`
	Unmatched int       `json:"unmatched"`
	AgreeCL   int       `json:"agree_cl"`
	DiffersCL int       `json:"differs_cl"`
	AgreeCD   int       `json:"agree_cd"`
	DiffersCD int       `json:"differs_cd"`
	Verdict   string    `json:"verdict"`
}

// CompareDoc is the comparison as JSON: `liftyard compare --format json`
// and the dashboard's /api/v1/compare give the same document.
type CompareDoc struct {
	Runs    []uint64  `json:"runs"`
	Pairs   []PairDoc `json:"pairs"`
	Notes   []string  `json:"notes"`
	Verdict string    `json:"verdict"`
}

// Doc returns the comparison's JSON document.
func (c *Comparison) Doc() CompareDoc {
	d := CompareDoc{Runs: []uint64{}, Pairs: []PairDoc{}, Notes: c.Notes, Verdict: c.Verdict()}
	if d.Notes == nil {
		d.Notes = []string{}
	}
	for _, r := range c.Runs {
		d.Runs = append(d.Runs, r.ID)
	}
	for i, diff := range c.Diffs {
		pd := PairDoc{RefRun: c.Runs[0].ID, OtherRun: c.Runs[i+1].ID, SetPoint: "alpha", Shared: diff.Shared, Points: []DiffDoc{},
			Unmatched: diff.Unmatched, AgreeCL: diff.AgreeCL, DiffersCL: diff.DiffersCL, AgreeCD: diff.AgreeCD, DiffersCD: diff.DiffersCD,
			Verdict: diff.Verdict()}
		if diff.Spin {
			pd.SetPoint = "spin_ratio"
		}
		if pd.Shared == nil {
			pd.Shared = []string{}
		}
		for _, p := range diff.Points {
			pd.Points = append(pd.Points, DiffDoc{RefSegment: p.RefIndex, OtherSegments: p.OtherIndex, Interpolated: p.Interpolated,
				AlphaDeg: estimate.Num(rig.Deg(p.AlphaRad)), AlphaOtherDeg: estimate.Num(rig.Deg(p.AlphaOtherRad)),
				SpinRatio: estimate.Num(p.SpinRatio), SpinRatioOther: estimate.Num(p.SpinRatioOther),
				CLRef: estimate.Num(p.CLRef), CLOther: estimate.Num(p.CLOther),
				DeltaCL: estimate.Num(p.DeltaCL.X), DeltaCLU95: estimate.Num(p.DeltaCL.U95()), En: estimate.Num(p.En),
				DeltaCD: estimate.Num(p.DeltaCD.X), DeltaCDU95: estimate.Num(p.DeltaCD.U95()), EnCD: estimate.Num(p.EnCD),
				Agrees: p.AgreesCL()})
		}
		d.Pairs = append(d.Pairs, pd)
	}
	return d
}

// DiffRow is one table row of a pair, every number rounded to text (the
// printable comparison, `liftyard compare`'s table and the dashboard's
// compare page show the same rows).
type DiffRow struct {
	SetPoint, Match, CLRef, CLOther, DeltaCL, U95, En, DeltaCD, U95CD, EnCD string
	Differs                                                                 bool
}

// PairView is one pair's table with its heading and verdict.
type PairView struct {
	Title, Shared, Verdict, SetPointLabel string
	Rows                                  []DiffRow
}

// Pairs returns every pair's table.
func (c *Comparison) Pairs() []PairView {
	var out []PairView
	for _, d := range c.Diffs {
		pv := PairView{Title: d.Other + " against " + d.Ref + " (reference)", Verdict: d.Verdict(), SetPointLabel: "α [°]"}
		if d.Spin {
			pv.SetPointLabel = "S"
		}
		pv.Shared = "none (every input adds from both runs)"
		if len(d.Shared) > 0 {
			pv.Shared = strings.Join(d.Shared, ", ")
		}
		for _, p := range d.Points {
			row := DiffRow{SetPoint: fix(rig.Deg(p.AlphaRad), 2), CLRef: fix(p.CLRef, 4), CLOther: fix(p.CLOther, 4),
				DeltaCL: signed(p.DeltaCL.X, 4), U95: fix(p.DeltaCL.U95(), 4), En: signed(p.En, 2),
				DeltaCD: signed(p.DeltaCD.X, 5), U95CD: fix(p.DeltaCD.U95(), 5), EnCD: signed(p.EnCD, 2), Differs: !p.AgreesCL()}
			other := p.AlphaOtherRad
			if d.Spin {
				row.SetPoint = fix(p.SpinRatio, 3)
			}
			switch {
			case p.Interpolated && len(p.OtherIndex) == 2:
				row.Match = fmt.Sprintf("interpolated #%d–#%d", p.OtherIndex[0], p.OtherIndex[1])
			case d.Spin:
				row.Match = fmt.Sprintf("#%d at %s", p.OtherIndex[0], fix(p.SpinRatioOther, 3))
			default:
				row.Match = fmt.Sprintf("#%d at %s°", p.OtherIndex[0], fix(rig.Deg(other), 2))
			}
			pv.Rows = append(pv.Rows, row)
		}
		out = append(out, pv)
	}
	return out
}

// signed is fix with a "+" on positive values: a difference reads with
// its sign.
func signed(v float64, digits int) string {
	s := fix(v, digits)
	if v > 0 && strings.Trim(s, "0.") != "" {
		return "+" + s
	}
	return s
}

//go:embed compare.html.tmpl
var compareTmplText string

var compareTmpl = template.Must(template.New("compare").Funcs(template.FuncMap{
	"svg": func(s string) template.HTML { return template.HTML(s) },
}).Parse(compareTmplText))

// WriteHTML writes the printable comparison: the runs, the overlay of
// their lift curves (and drag polars), and one difference table per pair
// with its verdict.
func (c *Comparison) WriteHTML(w io.Writer) error {
	v := struct {
		Title, Generated, Version, Verdict string
		Runs                               []storage.Run
		Lift, Drag                         string
		Pairs                              []PairView
		Notes                              []string
		Spin                               bool
	}{Generated: c.Generated.UTC().Format("2006-01-02 15:04 UTC"), Version: c.Version, Verdict: c.Verdict(),
		Runs: c.Runs, Pairs: c.Pairs(), Notes: c.Notes, Spin: c.Spin()}
	var ids []string
	for _, r := range c.Runs {
		ids = append(ids, strconv.FormatUint(r.ID, 10))
	}
	v.Title = "runs " + strings.Join(ids, ", ")
	p, err := c.overlay(false)
	if err != nil {
		return err
	}
	if v.Lift, err = svgOf(p); err != nil {
		return fmt.Errorf("comparison plot: %w", err)
	}
	if !v.Spin {
		if p, err = c.overlay(true); err != nil {
			return err
		}
		if v.Drag, err = svgOf(p); err != nil {
			return fmt.Errorf("comparison plot: %w", err)
		}
	}
	var buf bytes.Buffer
	if err := compareTmpl.Execute(&buf, v); err != nil {
		return fmt.Errorf("render comparison: %w", err)
	}
	_, err = w.Write(buf.Bytes())
	return err
}
