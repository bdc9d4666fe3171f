package report

import (
	"bytes"
	"cmp"
	_ "embed"
	"fmt"
	"html/template"
	"io"
	"maps"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

//go:embed report.html.tmpl
var pageTmpl string

// tmpl is parsed once; a broken template is a bug that every test catches.
var tmpl = template.Must(template.New("report").Funcs(template.FuncMap{
	// svg marks a plot rendered by this package as safe HTML. Plots carry
	// only our own labels and numbers (newPlot), never a user string.
	"svg": func(s string) template.HTML { return template.HTML(s) },
}).Parse(pageTmpl))

// maxEventRows bounds the event table; a run with thousands of gaps lists
// the first ones and counts the rest by kind.
const maxEventRows = 200

// row is one table row of label and value.
type row struct{ K, V string }

type segRow struct {
	Index, Alpha, Q, V, Re, Fn, Spin, CL, CD, N, NEff, Design, En string
	Linear, Disagree                                              bool
}

type budgetRow struct{ Input, U, C, UY, Share, Dof string }

// budgetBrief is one segment's budget in one line.
type budgetBrief struct{ Index, Alpha, CL, UC, DofEff, K, First, Second string }

type budgetView struct {
	Title                    string
	Rows                     []budgetRow
	UC, DofEff, K, U95, Note string
}

type healthRow struct {
	Source, Frames, Samples, Rejected, RejectedBy, Dropped, Duplicates, Gaps, Late, Reconnects string
}

type chanRow struct{ Channel, Source, Samples, Missing, Saturated, Stale string }

type loadRow struct {
	Channel, Capacity, Max, Warnings, Alarms string
	Warn, Alarm                              bool
}

type driftRow struct{ Channel, Start, End, Change, Unit string }

type calRow struct {
	ID, Channel, Created, ValidUntil, State string
	Bad                                     bool
}

type eventRow struct{ T, Kind, Source, Message string }

// view is the template's data: every number already rounded to text.
type view struct {
	Title     string
	RunID     uint64
	Rig       string
	Generated string
	Version   string

	Summary []string
	Facts   []row

	// Lead is the first plot (the lift curve, or the kind's main plot),
	// shown on page one; Figures are the others.
	Lead    *figure
	Figures []*figure

	// Spin adds the spin-ratio column S (rotor runs).
	Water, Spin bool
	Segments    []segRow

	// Heading is the report's title: "Lift test report", or the roof's.
	Heading string

	// Roof runs show RoofRows (zones × blocks) instead of the polar.
	Roof     bool
	RoofRows []roofRow
	// RoofSectors sums the roof's blocks by direction sector and zone.
	RoofSectors []sectorRow

	PolarRows     []row
	PolarWarnings []string
	PolarProblem  string

	DesignDesc    string
	Verdict       string
	VerdictClass  string
	Reasons       []string
	DesignProblem string

	// Budgets are the full budgets of the representative segments
	// (representative), BudgetWhich says which; BudgetBrief is every
	// segment's budget in one line, for the appendix.
	Budgets     []budgetView
	BudgetWhich string
	BudgetBrief []budgetBrief

	Health      []healthRow
	Channels    []chanRow
	Loads       []loadRow
	Drift       []driftRow
	Cals        []calRow
	Events      []eventRow
	EventsMore  string
	EventCounts string

	Notes []string

	// Corrections lists the corrections applied to the run (corrections.go).
	Corrections []string
}

// WriteHTML writes the report as one self-contained HTML page (inline CSS
// and SVG, no scripts or external files). It is deterministic for the same
// Report.
func (r *Report) WriteHTML(w io.Writer) error {
	v, err := r.view()
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := tmpl.Execute(&buf, v); err != nil {
		return fmt.Errorf("render report of run %d: %w", r.Run.ID, err)
	}
	_, err = buf.WriteTo(w)
	return err
}

func (r *Report) view() (*view, error) {
	v := &view{
		Title:     fmt.Sprintf("Run %d: %s", r.Run.ID, r.Run.Rig),
		RunID:     r.Run.ID,
		Rig:       r.Run.Rig,
		Generated: when(r.Generated),
		Version:   r.Version,
		Summary:   r.Summary(),
		Water:     r.Run.Fluid == string(rig.FluidFreshWater) || r.Run.Fluid == string(rig.FluidSeaWater),
		Spin:      r.section().spin,
		Notes:     r.Notes,

		Corrections: r.corrections(),
	}
	v.Facts = r.facts()
	for _, f := range r.section().figures(r) {
		fig, err := f()
		if err != nil {
			return nil, fmt.Errorf("report of run %d: %w", r.Run.ID, err)
		}
		switch {
		case fig == nil:
		case v.Lead == nil:
			v.Lead = fig
		default:
			v.Figures = append(v.Figures, fig)
		}
	}
	linear := map[int]bool{}
	if r.Polar != nil {
		for _, i := range r.Polar.Linear {
			linear[i] = true
		}
	}
	compared := map[int]estimate.ComparisonPoint{}
	if r.Comparison != nil {
		for _, pt := range r.Comparison.Points {
			compared[pt.Segment] = pt
		}
	}
	v.Heading = r.section().heading
	if r.section().zones {
		v.Roof, v.RoofRows, v.RoofSectors = true, r.roofRows(), r.sectorRows()
		r.recordView(v)
		return v, nil
	}
	for i, s := range r.Segments {
		// The design column shows the comparison this report states (the
		// same estimate.DesignAt the recorder used), else what was stored.
		if pt, ok := compared[s.Index]; ok {
			s.DesignCL, s.En = pt.DesignCL, pt.En
		}
		v.Segments = append(v.Segments, r.segRow(s, linear[i]))
		if b := briefOf(s); b != nil {
			v.BudgetBrief = append(v.BudgetBrief, *b)
		}
	}
	picks, why := representative(r.Segments)
	for _, i := range picks {
		if b := budgetOf(r.Segments[i]); b != nil {
			v.Budgets = append(v.Budgets, *b)
		}
	}
	v.BudgetWhich = why
	r.polarView(v)
	r.designView(v)
	r.recordView(v)
	return v, nil
}

func (r *Report) facts() []row {
	run := r.Run
	f := []row{
		{"Run", strconv.FormatUint(run.ID, 10)},
		{"Rig", run.Rig},
		{"Kind, fluid", run.Kind + ", " + strings.ReplaceAll(run.Fluid, "_", " ")},
		{"Reference area S [m²]", fmt.Sprintf("%s (%s)", sig(run.AreaM2, 4), orDash(run.AreaKind))},
	}
	if g := r.Rig; g != nil {
		ref := g.Reference
		if ref.AreaUM2 > 0 {
			f = append(f, row{"u(S) [m²]", sig(ref.AreaUM2, 2)})
		}
		if ref.LengthM > 0 {
			f = append(f, row{"Reference length (chord) [m]", sig(ref.LengthM, 4)})
		}
		if ref.SpanM > 0 {
			f = append(f, row{"Span [m]", sig(ref.SpanM, 4)}, row{"Aspect ratio b²/S", fix(ref.AspectRatio(), 2)})
		}
		if ref.RadiusM > 0 {
			f = append(f, row{"Rotor radius [m]", sig(ref.RadiusM, 4)})
		}
		c := g.Conditions
		cond := fmt.Sprintf("%s °C", fix(c.TempK-273.15, 1))
		if g.Fluid == rig.FluidAir {
			cond += fmt.Sprintf(", %s Pa, RH %s %%", fix(c.PressurePa, 0), fix(100*c.RelHumidity, 0))
		}
		if g.Fluid == rig.FluidSeaWater {
			cond += fmt.Sprintf(", salinity %s g/kg", fix(1000*c.SalinityKgPerKg, 2))
		}
		if g.Lift.Temperature != "" {
			cond += " (temperature measured by channel " + g.Lift.Temperature + "; the fixed value applies when it does not read)"
		}
		f = append(f, row{"Fixed conditions", cond})
		d := g.Lift.Design
		if d == "" {
			d = "none"
		}
		f = append(f, row{"Design ([lift] design)", d})
	}
	f = append(f,
		row{"Started", when(run.Started)},
		row{"Ended", when(run.Ended)},
		row{"Duration", dur(r.Duration)},
		row{"Status", string(run.Status)},
		row{"Samples stored, segments", fmt.Sprintf("%d, %d", run.Samples, len(r.Segments))},
	)
	if run.Note != "" {
		f = append(f, row{"Note", run.Note})
	}
	return f
}

func orDash(s string) string {
	if s == "" {
		return "kind not recorded"
	}
	return s
}

func (r *Report) segRow(s estimate.Segment, linear bool) segRow {
	// The values come through the result column table, so the report shows
	// a value exactly where the exports and the API have one.
	row := estimate.NewRow(r.Run.ID, rig.Kind(r.Run.Kind), &s)
	f := row.Float
	sr := segRow{
		Index:  strconv.Itoa(s.Index),
		Alpha:  pm(f("alpha_deg"), f("alpha_u95_deg"), 2),
		Q:      pm(f("q_pa"), f("q_u95_pa"), 1),
		V:      pm(f("speed_m_s"), f("speed_u95_m_s"), 3),
		Re:     sig(f("re"), 2),
		Fn:     fix(f("fn"), 3),
		Spin:   fix(f("spin_ratio"), 3),
		CL:     pm(f("cl"), f("cl_u95"), 3),
		CD:     pm(f("cd"), f("cd_u95"), 4),
		N:      strconv.Itoa(s.N),
		NEff:   fix(f("n_eff"), 0),
		Design: pm(f("design_cl"), f("design_cl_u95"), 3),
		En:     fix(f("en"), 2),
		Linear: linear,
	}
	if a, ok := row.Value("agrees"); ok {
		sr.Disagree = !a.(bool)
	}
	return sr
}

// budgetOf is the C_L budget of one segment (JCGM 100 §8).
func budgetOf(s estimate.Segment) *budgetView {
	if len(s.CLBudget) == 0 {
		return nil
	}
	b := &budgetView{Title: fmt.Sprintf("Segment %d at α = %s°: C_L = %s", s.Index, fix(rig.Deg(s.AlphaRad.X), 2), pm(s.CL.X, u95Of(s.CL), 3))}
	var sum2 float64
	for _, c := range s.CLBudget {
		if finite(c.UY) {
			sum2 += c.UY * c.UY
		}
	}
	for _, c := range s.CLBudget {
		share := dash
		if sum2 > 0 && finite(c.UY) {
			share = fix(100*c.UY*c.UY/sum2, 1) + " %"
		}
		b.Rows = append(b.Rows, budgetRow{Input: c.Input, U: sig(c.U, 2), C: sig(c.Sensitivity, 3), UY: sig(c.UY, 2), Share: share, Dof: dof(c.Dof)})
	}
	b.UC = sig(s.CL.U, 2)
	b.DofEff = dof(s.CL.Dof)
	b.K = fix(calibrate.K95(s.CL.Dof), 2)
	b.U95 = sig(s.CL.U95(), 2)
	if math.Abs(math.Sqrt(sum2)-s.CL.U) > 0.02*s.CL.U {
		b.Note = "The listed contributions do not add up in quadrature to u_c: inputs are correlated or a term is carried elsewhere (see the methods)."
	}
	return b
}

// representative picks the segments whose full budget the report prints:
// the lowest and the highest angle (the ends of the polar) and the one with
// the largest U95 of C_L, each once, in segment order. It returns their
// positions in segs and a sentence saying which they are.
func representative(segs []estimate.Segment) ([]int, string) {
	lo, hi, big := -1, -1, -1
	for i, s := range segs {
		if len(s.CLBudget) == 0 {
			continue
		}
		if lo < 0 || s.AlphaRad.X < segs[lo].AlphaRad.X {
			lo = i
		}
		if hi < 0 || s.AlphaRad.X > segs[hi].AlphaRad.X {
			hi = i
		}
		if big < 0 || u95Of(s.CL) > u95Of(segs[big].CL) {
			big = i
		}
	}
	if lo < 0 {
		return nil, ""
	}
	var picks []int
	for _, i := range []int{lo, hi, big} {
		if !slices.Contains(picks, i) {
			picks = append(picks, i)
		}
	}
	slices.Sort(picks)
	name := func(i int) string { return fmt.Sprintf("segment %d", segs[i].Index) }
	why := fmt.Sprintf("the lowest angle (%s), the highest angle (%s) and the largest U95 of C_L (%s)", name(lo), name(hi), name(big))
	return picks, why
}

// briefOf is s's budget in one line: u_c, ν_eff, k and the two largest
// contributions.
func briefOf(s estimate.Segment) *budgetBrief {
	if len(s.CLBudget) == 0 {
		return nil
	}
	var sum2 float64
	for _, c := range s.CLBudget {
		if finite(c.UY) {
			sum2 += c.UY * c.UY
		}
	}
	order := make([]int, len(s.CLBudget))
	for i := range order {
		order[i] = i
	}
	uy := func(i int) float64 {
		if x := s.CLBudget[i].UY; finite(x) {
			return math.Abs(x)
		}
		return -1
	}
	slices.SortStableFunc(order, func(a, b int) int { return cmp.Compare(uy(b), uy(a)) })
	part := func(k int) string {
		if k >= len(order) || sum2 <= 0 || uy(order[k]) < 0 {
			return dash
		}
		c := s.CLBudget[order[k]]
		return fmt.Sprintf("%s (%s %%)", c.Input, fix(100*c.UY*c.UY/sum2, 0))
	}
	return &budgetBrief{Index: fmt.Sprint(s.Index), Alpha: fix(rig.Deg(s.AlphaRad.X), 2), CL: pm(s.CL.X, u95Of(s.CL), 3),
		UC: sig(s.CL.U, 2), DofEff: dof(s.CL.Dof), K: fix(calibrate.K95(s.CL.Dof), 2), First: part(0), Second: part(1)}
}

// hysteresisNote marks a difference between the sweeps beyond its U95.
func hysteresisNote(h estimate.HysteresisStep) string {
	if h.Significant() {
		return " (hysteresis)"
	}
	return ""
}

func (r *Report) polarView(v *view) {
	p := r.Polar
	if p == nil {
		v.PolarProblem = r.PolarProblem
		if why := r.section().noLiftCurve; why != "" {
			v.PolarProblem = why
		}
		return
	}
	perDeg := rig.Rad(1) // rad per degree: a slope per rad times this is a slope per degree
	v.PolarRows = []row{
		{"Lift-curve slope a [1/rad]", pm(p.SlopePerRad.X, p.SlopePerRad.U95(), 3)},
		{"Lift-curve slope a [1/°]", pm(p.SlopePerRad.X*perDeg, p.SlopePerRad.U95()*perDeg, 4)},
		{"Zero-lift angle α_L0 [°]", pm(rig.Deg(p.AlphaZeroRad.X), rig.Deg(p.AlphaZeroRad.U95()), 2)},
		{"C_L at α = 0", pm(p.CLAtZeroAlpha.X, p.CLAtZeroAlpha.U95(), 3)},
		{"Points, angles, sweeps", plural(p.Points, "point", "points") + " at " + plural(p.Angles, "angle", "angles") + " in " + plural(p.Sweeps, "sweep", "sweeps")},
		{"Linear range [°]", fix(rig.Deg(p.LinearMinRad), 1) + " to " + fix(rig.Deg(p.LinearMaxRad), 1) + " (" + plural(len(p.Linear), "point", "points") + ")"},
		{"χ² of the lift fit, ν", fix(p.ChiSq, 2) + ", " + strconv.Itoa(p.FitDof) + scaledNote(p.Scaled)},
	}
	// Where the slope's uncertainty comes from: the points' scatter, and
	// the inputs common to every point that no number of points averages.
	for _, c := range p.SlopeBudget {
		v.PolarRows = append(v.PolarRows, row{"u(a) from " + c.Input + " [1/rad]", sig(c.UY, 2)})
	}
	if p.Stalled {
		v.PolarRows = append(v.PolarRows, row{"Stall angle [°]", fix(rig.Deg(p.StallRad), 1)})
	} else {
		v.PolarRows = append(v.PolarRows, row{"Stall", "not reached in the measured range"})
	}
	v.PolarRows = append(v.PolarRows, row{"C_L,max (at " + fix(rig.Deg(p.AlphaCLMaxRad), 1) + "°)", pm(p.CLMax.X, p.CLMax.U95(), 3) + lowerBound(p.Stalled)})
	for _, h := range p.Hysteresis {
		v.PolarRows = append(v.PolarRows, row{"C_L rising − falling at " + fix(rig.Deg(h.AlphaRad), 1) + "°", pm(h.CLDiff.X, h.CLDiff.U95(), 3) + hysteresisNote(h)})
	}
	if p.DragFitted {
		v.PolarRows = append(v.PolarRows,
			row{"Minimum drag C_D0", pm(p.CD0.X, p.CD0.U95(), 4)},
			row{"Drag-due-to-lift factor K", pm(p.K.X, p.K.U95(), 3)},
			row{"C_L at minimum drag", pm(p.CLMinD.X, p.CLMinD.U95(), 3)})
	}
	v.PolarWarnings = p.Warnings
}

func scaledNote(scaled bool) string {
	if scaled {
		return " (uncertainties scaled by χ²/ν)"
	}
	return ""
}

func lowerBound(stalled bool) string {
	if stalled {
		return ""
	}
	return " (a lower bound)"
}

func (r *Report) designView(v *view) {
	v.DesignProblem = r.DesignProblem
	if r.SpinDesign != nil {
		r.spinDesignView(v) // rotor.go
		return
	}
	c := r.Comparison
	if c == nil {
		return
	}
	v.DesignDesc = c.Design
	v.Verdict = fmt.Sprintf("%s (%d points agree, %d disagree, %d outside the design's range)", verdictWord(c), c.Agree, c.Disagree, c.Outside)
	v.VerdictClass = strings.ReplaceAll(c.Verdict, " ", "-")
	v.Reasons = c.Reasons
}

func (r *Report) recordView(v *view) {
	for _, h := range r.Sources {
		if h.Frames == 0 && h.Samples == 0 && h.Rejected == 0 && h.SamplesDropped == 0 && h.BlocksDropped == 0 &&
			h.Duplicates == 0 && h.Gaps == 0 && h.Late == 0 && h.Reconnects == 0 {
			continue // an all-zero row (the store's own counters on a clean run) says nothing
		}
		hr := healthRow{Source: h.Source, Frames: u(h.Frames), Samples: u(h.Samples), Rejected: u(h.Rejected),
			Dropped: u(h.SamplesDropped) + " samples, " + u(h.BlocksDropped) + " blocks", Duplicates: u(h.Duplicates),
			Gaps: u(h.Gaps), Late: u(h.Late), Reconnects: u(h.Reconnects)}
		var by []string
		for _, k := range slices.Sorted(maps.Keys(h.RejectedBy)) {
			by = append(by, k+" "+u(h.RejectedBy[k]))
		}
		hr.RejectedBy = strings.Join(by, ", ")
		v.Health = append(v.Health, hr)
	}
	for _, c := range r.Channels {
		st := "no"
		if c.Stale {
			st = "yes"
		}
		v.Channels = append(v.Channels, chanRow{c.Channel, c.Source, u(c.Samples), u(c.Missing), u(c.Saturated), st})
	}
	for _, l := range r.Loads {
		v.Loads = append(v.Loads, loadRow{Channel: l.Channel, Capacity: sig(l.CapacitySI, 3) + " " + l.Unit, Max: pct(l.MaxFrac),
			Warnings: u(l.Warnings), Alarms: u(l.Alarms), Warn: l.MaxFrac >= 0.8, Alarm: l.MaxFrac >= 1 || l.Alarms > 0})
	}
	for _, d := range r.Drift {
		unit := r.DriftUnit(d.Channel)
		v.Drift = append(v.Drift, driftRow{d.Channel, sig(d.StartSI, 4), sig(d.EndSI, 4), sig(d.ChangeSI, 2), unit})
	}
	for _, c := range r.Calibrations {
		cr := calRow{ID: c.ID, Channel: c.Channel, Created: day(c.Created), ValidUntil: day(c.ValidUntil), State: "valid at the run"}
		switch {
		case c.Missing != "":
			cr.State, cr.Bad = c.Missing, true
		case c.Expired:
			cr.State, cr.Bad = "EXPIRED before the run started", true
		case c.ValidUntil.IsZero():
			cr.State = "no end of validity stated"
		}
		v.Cals = append(v.Cals, cr)
	}
	counts := map[string]int{}
	for i, e := range r.Events {
		counts[e.Kind]++
		if i < maxEventRows {
			v.Events = append(v.Events, eventRow{when(e.T), e.Kind, e.Source, e.Message})
		}
	}
	if n := len(r.Events) - maxEventRows; n > 0 {
		v.EventsMore = fmt.Sprintf("… and %d more events (liftyard export has them all).", n)
	}
	kinds := make([]string, 0, len(counts))
	for k := range counts {
		kinds = append(kinds, k)
	}
	sort.Strings(kinds)
	var parts []string
	for _, k := range kinds {
		parts = append(parts, fmt.Sprintf("%s %d", k, counts[k]))
	}
	v.EventCounts = strings.Join(parts, ", ")
}

func u(n uint64) string { return strconv.FormatUint(n, 10) }
