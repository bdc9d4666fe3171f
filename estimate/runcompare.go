package estimate

import (
	"errors"
	"fmt"
	"maps"
	"math"
	"slices"
	"sort"
	"strings"

	"liftyard/calibrate"
	"liftyard/rig"
)

// ErrRunCompare is returned by CompareRuns when the runs cannot be
// compared (fewer than two, different kinds of set-point).
var ErrRunCompare = errors.New("cannot compare the runs")

// RunSeries is one run of a comparison: its steady segments and the rig
// file it was recorded with (nil when not known: then nothing counts as
// shared with another run).
type RunSeries struct {
	Label    string // how the run is named in tables and verdicts, e.g. "run 3"
	Rig      *rig.Rig
	Segments []Segment
}

// RunCompareOptions sets CompareRuns. A zero value takes the defaults.
type RunCompareOptions struct {
	// MaxGapRad is the widest step between two points of the other run
	// across which its C_L(α) is interpolated (default 3°: wider than the
	// usual 1–2° sweep step, narrow enough that the curvature near stall
	// does not pass for a difference).
	MaxGapRad float64
	// MaxGapSpinRatio is the same for C_L(S) of rotors (default 0.5).
	MaxGapSpinRatio float64
}

func (o RunCompareOptions) withDefaults() RunCompareOptions {
	if !(o.MaxGapRad > 0) {
		o.MaxGapRad = rig.Rad(3)
	}
	if !(o.MaxGapSpinRatio > 0) {
		o.MaxGapSpinRatio = 0.5
	}
	return o
}

// RunDiff is the comparison of one run with the reference run.
type RunDiff struct {
	Ref, Other string // labels of the two runs
	// Spin is true when the set-point is the spin ratio S (rotors); else
	// it is the angle of attack α.
	Spin bool
	// Shared lists the inputs that are one error common to both runs
	// (same calibrations, same reference area): they cancel in a
	// difference and are left out of its uncertainty, except for the part
	// that scales with the coefficient (docs/physics.md, run against run).
	Shared []string
	Points []DiffPoint
	// Unmatched counts the reference points (with a C_L) that have no
	// partner in the other run: outside its range of set-points, or in a
	// gap wider than MaxGapRad (MaxGapSpinRatio).
	Unmatched int
	// AgreeCL counts the points with |En| ≤ 1 for C_L, DiffersCL the
	// others; AgreeCD and DiffersCD the same for C_D where both runs have
	// one.
	AgreeCL, DiffersCL, AgreeCD, DiffersCD int
}

// DiffPoint is the difference of the other run from the reference run at
// one reference point's set-point.
type DiffPoint struct {
	RefIndex int // Segment.Index of the reference point
	// OtherIndex holds the Segment.Index of the other run's point matched
	// to it, or the two points its value was interpolated between.
	OtherIndex   []int
	Interpolated bool
	AlphaRad     float64 // reference point's angle of attack (foils, bodies)
	SpinRatio    float64 // reference point's spin ratio (rotors)
	// AlphaOtherRad (SpinRatioOther) is the matched point's set-point; the
	// reference's own when interpolated.
	AlphaOtherRad  float64
	SpinRatioOther float64
	CLRef, CLOther float64 // C_L of the reference point and of the other run there
	// DeltaCL is C_L,other − C_L,ref with its standard uncertainty and
	// degrees of freedom (U95() gives the expanded one).
	DeltaCL calibrate.Value
	En      float64 // ΔC_L / U95(ΔC_L)
	// DeltaCD and EnCD are the same for C_D; NaN where either run has no C_D.
	DeltaCD calibrate.Value
	EnCD    float64
	// Budget is ΔC_L's uncertainty budget: each run's scatter, each input
	// not shared, and the shared inputs' remainder.
	Budget []Contribution
}

// AgreesCL reports |En| ≤ 1 for C_L: the two runs agree at this point
// within the combined U95 of their difference.
func (p DiffPoint) AgreesCL() bool { return math.Abs(p.En) <= 1 }

// Verdict is the pair's one-line verdict.
func (d RunDiff) Verdict() string {
	n := d.AgreeCL + d.DiffersCL
	var b strings.Builder
	switch {
	case n == 0:
		fmt.Fprintf(&b, "%s against %s: no matching set-points", d.Other, d.Ref)
	case d.DiffersCL == 0:
		fmt.Fprintf(&b, "%s against %s: C_L agrees (|En| ≤ 1) at all %d matched points", d.Other, d.Ref, n)
	default:
		fmt.Fprintf(&b, "%s against %s: C_L differs (|En| > 1) at %d of %d matched points", d.Other, d.Ref, d.DiffersCL, n)
	}
	if m := d.AgreeCD + d.DiffersCD; m > 0 {
		fmt.Fprintf(&b, "; C_D differs at %d of %d", d.DiffersCD, m)
	}
	if d.Unmatched > 0 {
		fmt.Fprintf(&b, "; %d reference point(s) without a partner", d.Unmatched)
	}
	return b.String()
}

// Shares says which inputs of the uncertainty budgets two runs have in
// common: the same calibration of every channel of a role, the same
// reference area. A shared input is one error common to both runs.
type Shares struct {
	Normal, Axial, Q, Angle, Area bool
}

// SharesOf compares two rig files role by role. A channel's calibration is
// the same when both name the same stored calibration id, or both state
// the same inline polynomial, u and unit; a role is shared when each of
// its channels is (in order). The dynamic pressure also needs the same
// pitot coefficient; a fixed angle the same angle and u; the reference
// area the same S and u(S). A nil rig shares nothing.
func SharesOf(a, b *rig.Rig) Shares {
	if a == nil || b == nil {
		return Shares{}
	}
	sameCal := func(x, y string) bool {
		cx, okx := a.Channel(x)
		cy, oky := b.Channel(y)
		if !okx || !oky {
			return false
		}
		if cx.Calibration.ID != "" || cy.Calibration.ID != "" {
			return cx.Calibration.ID == cy.Calibration.ID
		}
		return slices.Equal(cx.Calibration.Poly, cy.Calibration.Poly) &&
			cx.Calibration.U == cy.Calibration.U && cx.ToSI == cy.ToSI
	}
	sameAll := func(x, y []string) bool {
		if len(x) == 0 || len(x) != len(y) {
			return false
		}
		for i := range x {
			if !sameCal(x[i], y[i]) {
				return false
			}
		}
		return true
	}
	la, lb := a.Lift, b.Lift
	var s Shares
	s.Normal = sameAll(la.Normal, lb.Normal)
	s.Axial = sameAll(la.Axial, lb.Axial)
	switch {
	case la.DynamicPressure != "" && lb.DynamicPressure != "":
		s.Q = sameCal(la.DynamicPressure, lb.DynamicPressure) && la.PitotCoeff == lb.PitotCoeff
	case la.Speed != "" && lb.Speed != "":
		s.Q = sameCal(la.Speed, lb.Speed)
	}
	switch {
	case la.AngleChannel != "" && lb.AngleChannel != "":
		s.Angle = sameCal(la.AngleChannel, lb.AngleChannel) && la.AngleURad == lb.AngleURad
	case la.AngleChannel == "" && lb.AngleChannel == "":
		s.Angle = la.AngleRad == lb.AngleRad && la.AngleURad == lb.AngleURad
	}
	s.Area = a.Reference.AreaM2 == b.Reference.AreaM2 && a.Reference.AreaUM2 == b.Reference.AreaUM2
	return s
}

// Has reports whether the budget line named input (Contribution.Input) is
// shared. Lines are told apart by the role their name begins with
// ("normal force …", "axial force …", "dynamic pressure …" or "pitot …",
// "angle …", "reference area"); a Type A line, or a line of no known role,
// is never shared, which can only widen U(Δ).
func (s Shares) Has(input string) bool {
	switch r := roleOf(input); r {
	case "normal":
		return s.Normal
	case "axial":
		return s.Axial
	case "q":
		return s.Q
	case "angle":
		return s.Angle
	case "area":
		return s.Area
	}
	return false
}

// List names the shared roles, for display.
func (s Shares) List() []string {
	var out []string
	for _, e := range []struct {
		on   bool
		name string
	}{{s.Normal, "normal force calibration"}, {s.Axial, "axial force calibration"},
		{s.Q, "dynamic pressure calibration"}, {s.Angle, "angle of attack"}, {s.Area, "reference area"}} {
		if e.on {
			out = append(out, e.name)
		}
	}
	return out
}

func roleOf(input string) string {
	switch {
	case strings.HasSuffix(input, "(type A)"):
		return ""
	case strings.HasPrefix(input, "normal force"):
		return "normal"
	case strings.HasPrefix(input, "axial force"):
		return "axial"
	case strings.HasPrefix(input, "dynamic pressure"), strings.HasPrefix(input, "pitot"):
		return "q"
	case strings.HasPrefix(input, "angle"):
		return "angle"
	case strings.HasPrefix(input, "reference area"):
		return "area"
	}
	return ""
}

// runPoint is one usable segment of a run, by set-point.
type runPoint struct {
	idx       int
	x         float64 // set-point: α (rad) or S
	uxInd     float64 // u of the set-point, its own part (scatter)
	uxCal     float64 // u of the set-point common to the run (angle calibration)
	cl, cd    coefPart
	hasCD     bool
	alphaRad  float64
	spinRatio float64
}

// coefPart is a coefficient split as splitShared splits it: the value, the
// independent (Type A) part of its u and the signed shared lines c·u.
type coefPart struct {
	x            float64
	uInd, dofInd float64
	shared       map[string]sharedContribution
}

func splitCoef(v calibrate.Value, budget []Contribution) coefPart {
	pp := polarPoint{uCL: v.U, dofCL: dofOrInf(v.Dof)}
	splitShared(&pp, budget)
	return coefPart{x: v.X, uInd: pp.uCL, dofInd: pp.dofCL, shared: pp.shared}
}

func runPoints(segs []Segment, spin bool) []runPoint {
	var pts []runPoint
	for _, s := range segs {
		if !finite(s.CL.X) || !(s.CL.U >= 0) {
			continue
		}
		pt := runPoint{idx: s.Index, cl: splitCoef(s.CL, s.CLBudget), alphaRad: s.AlphaRad.X, spinRatio: s.SpinRatio}
		if spin {
			if !finite(s.SpinRatio) || s.SpinRatio == 0 {
				continue
			}
			pt.x = s.SpinRatio
			// S = ωR/V: the speed's relative u carries over (ω taken as exact).
			if v := s.SpeedMPerS; v.X != 0 && finite(v.U) {
				pt.uxInd = math.Abs(s.SpinRatio * v.U / v.X)
			}
		} else {
			if !finite(s.AlphaRad.X) {
				continue
			}
			pt.x = s.AlphaRad.X
			uCal := 0.0
			for _, c := range s.CLBudget {
				if roleOf(c.Input) == "angle" {
					uCal = math.Hypot(uCal, c.U)
				}
			}
			uAll := s.AlphaRad.U
			if !finite(uAll) {
				uAll = 0
			}
			pt.uxCal = math.Min(uCal, uAll)
			pt.uxInd = math.Sqrt(math.Max(0, uAll*uAll-pt.uxCal*pt.uxCal))
		}
		if finite(s.CD.X) && s.CD.U >= 0 && s.CD != (calibrate.Value{}) {
			pt.cd, pt.hasCD = splitCoef(s.CD, s.CDBudget), true
		}
		pts = append(pts, pt)
	}
	sort.SliceStable(pts, func(i, j int) bool { return pts[i].x < pts[j].x })
	return pts
}

// isSpin reports whether a run's set-point is the spin ratio.
func isSpin(r RunSeries) bool {
	for i := range r.Segments {
		k := r.Segments[i].Kind
		if k == "" && r.Rig != nil {
			k = r.Rig.Kind
		}
		if KindOf(&r.Segments[i], k) == rig.KindRotor {
			return true
		}
	}
	return false
}

// CompareRuns compares each further run with the first (the reference)
// at the reference run's set-points: the angle of attack α for foils and
// bodies, the spin ratio S for rotors.
//
// # Matching
//
// For each reference point with a C_L, the other run's point nearest in
// set-point is taken when the two set-points differ by no more than
// k95·u(Δx), u(Δx) from the two set-points' own uncertainties (the angle
// scatter, and the angle calibration unless the runs share it; for S, the
// speed's relative uncertainty). Otherwise the other run's C_L and C_D are
// interpolated linearly between its two points that bracket the set-point,
// when they lie no more than MaxGapRad (MaxGapSpinRatio) apart; outside
// the other run's range nothing is extrapolated (Unmatched).
//
// # Difference and its uncertainty
//
// ΔC_L = C_L,other − C_L,ref, the other's value being Σ w_j·C_L,j (w = 1
// for a match, linear weights when interpolated). Its variance (JCGM 100
// §5.2, correlated inputs) adds: each run's Type A part (Σ w_j²·u_j² for
// the other); for each input the two runs share (Shares), the square of
// the difference of their signed effects c·u — an error common to both
// runs cancels except for the part that scales with the coefficient; for
// each input not shared, both effects squared; and, for the set-points,
// (s·u(Δx))² with s the local slope of the reference run's C_L against x,
// since the two points are compared at set-points known only to u(Δx).
// Degrees of freedom follow from Welch–Satterthwaite, U95 = k95·u, and
//
//	En = ΔC_L / U95(ΔC_L)
//
// (the normalised error of ISO/IEC 17043:2010 Annex B, docs/references.md
// §17, with the two runs' correlation taken into U(Δ)). |En| ≤ 1: the
// runs agree at that point. C_D is treated in the same way.
func CompareRuns(runs []RunSeries, opts RunCompareOptions) ([]RunDiff, error) {
	if len(runs) < 2 {
		return nil, fmt.Errorf("%d run(s), need at least two: %w", len(runs), ErrRunCompare)
	}
	opts = opts.withDefaults()
	spin := isSpin(runs[0])
	ref := runPoints(runs[0].Segments, spin)
	var out []RunDiff
	for _, o := range runs[1:] {
		if isSpin(o) != spin {
			return nil, fmt.Errorf("%s and %s: one is a rotor (C_L against spin ratio), the other not: %w", runs[0].Label, o.Label, ErrRunCompare)
		}
		sh := SharesOf(runs[0].Rig, o.Rig)
		d := RunDiff{Ref: runs[0].Label, Other: o.Label, Spin: spin, Shared: sh.List()}
		other := runPoints(o.Segments, spin)
		maxGap := opts.MaxGapRad
		if spin {
			maxGap = opts.MaxGapSpinRatio
		}
		for i, rp := range ref {
			ws, ok := match(rp, other, sh, maxGap)
			if !ok {
				d.Unmatched++
				continue
			}
			p := diffAt(rp, localSlope(ref, i, func(p runPoint) coefPart { return p.cl }), other, ws, sh, func(p runPoint) coefPart { return p.cl })
			dp := DiffPoint{RefIndex: rp.idx, AlphaRad: rp.alphaRad, SpinRatio: rp.spinRatio,
				CLRef: rp.cl.x, DeltaCL: p.v, En: p.en, Budget: p.budget, EnCD: math.NaN(),
				DeltaCD: calibrate.Value{X: math.NaN(), U: math.NaN(), Dof: math.NaN()}}
			dp.CLOther = rp.cl.x + p.v.X
			dp.AlphaOtherRad, dp.SpinRatioOther = rp.alphaRad, rp.spinRatio
			for _, w := range ws {
				dp.OtherIndex = append(dp.OtherIndex, other[w.j].idx)
			}
			if len(ws) == 1 {
				dp.AlphaOtherRad, dp.SpinRatioOther = other[ws[0].j].alphaRad, other[ws[0].j].spinRatio
			} else {
				dp.Interpolated = true
			}
			if rp.hasCD && allCD(other, ws) {
				c := diffAt(rp, localSlope(ref, i, func(p runPoint) coefPart { return p.cd }), other, ws, sh, func(p runPoint) coefPart { return p.cd })
				dp.DeltaCD, dp.EnCD = c.v, c.en
				if math.Abs(c.en) <= 1 {
					d.AgreeCD++
				} else {
					d.DiffersCD++
				}
			}
			if dp.AgreesCL() {
				d.AgreeCL++
			} else {
				d.DiffersCL++
			}
			d.Points = append(d.Points, dp)
		}
		out = append(out, d)
	}
	return out, nil
}

// weight is one of the other run's points and its weight in the value
// compared.
type weight struct {
	j int
	w float64
}

func allCD(pts []runPoint, ws []weight) bool {
	for _, w := range ws {
		if !pts[w.j].hasCD {
			return false
		}
	}
	return true
}

// setPointU2 is u²(Δx) of two set-points: each one's own part, and the
// calibration parts unless shared.
func setPointU2(rp runPoint, other []runPoint, ws []weight, sh Shares) float64 {
	u2 := rp.uxInd * rp.uxInd
	calB := 0.0
	for _, w := range ws {
		u2 += w.w * w.w * other[w.j].uxInd * other[w.j].uxInd
		calB += w.w * other[w.j].uxCal
	}
	if !sh.Angle {
		u2 += rp.uxCal*rp.uxCal + calB*calB
	} else {
		u2 += (calB - rp.uxCal) * (calB - rp.uxCal)
	}
	return u2
}

// match finds the other run's points to compare rp with: the nearest
// within k95·u(Δx), else the two that bracket rp.x no more than maxGap
// apart.
func match(rp runPoint, other []runPoint, sh Shares, maxGap float64) ([]weight, bool) {
	if len(other) == 0 {
		return nil, false
	}
	best := -1
	for j := range other {
		if best < 0 || math.Abs(other[j].x-rp.x) < math.Abs(other[best].x-rp.x) {
			best = j
		}
	}
	one := []weight{{best, 1}}
	tol := calibrate.K95(math.Inf(1)) * math.Sqrt(setPointU2(rp, other, one, sh))
	if math.Abs(other[best].x-rp.x) <= tol {
		return one, true
	}
	// other is sorted by x: the last point below and the first above.
	hi := sort.Search(len(other), func(j int) bool { return other[j].x > rp.x })
	lo := hi - 1
	if lo < 0 || hi >= len(other) {
		return nil, false
	}
	gap := other[hi].x - other[lo].x
	if !(gap > 0) || gap > maxGap {
		return nil, false
	}
	t := (rp.x - other[lo].x) / gap
	return []weight{{lo, 1 - t}, {hi, t}}, true
}

// localSlope is dC/dx of the reference run at its point i: the difference
// quotient between the nearest points on either side at a distinct x
// (one-sided at an end; 0 with no other x).
func localSlope(pts []runPoint, i int, f func(runPoint) coefPart) float64 {
	x := pts[i].x
	lo, hi := -1, -1
	for j := i - 1; j >= 0; j-- {
		if pts[j].x < x {
			lo = j
			break
		}
	}
	for j := i + 1; j < len(pts); j++ {
		if pts[j].x > x {
			hi = j
			break
		}
	}
	switch {
	case lo >= 0 && hi >= 0:
		return (f(pts[hi]).x - f(pts[lo]).x) / (pts[hi].x - pts[lo].x)
	case lo >= 0:
		return (f(pts[i]).x - f(pts[lo]).x) / (x - pts[lo].x)
	case hi >= 0:
		return (f(pts[hi]).x - f(pts[i]).x) / (pts[hi].x - x)
	}
	return 0
}

type diffResult struct {
	v      calibrate.Value
	en     float64
	budget []Contribution
}

// diffAt is the difference of the other run's coefficient (weighted over
// ws) from rp's, with its budget (see CompareRuns).
func diffAt(rp runPoint, slope float64, other []runPoint, ws []weight, sh Shares, f func(runPoint) coefPart) diffResult {
	a := f(rp)
	var xb, uIndB2 float64
	dofB := math.Inf(1)
	sharedB := map[string]float64{}
	dofs := map[string]float64{}
	for n, c := range a.shared {
		dofs[n] = c.dof
	}
	for _, w := range ws {
		b := f(other[w.j])
		xb += w.w * b.x
		uIndB2 += w.w * w.w * b.uInd * b.uInd
		if w.w != 0 {
			dofB = math.Min(dofB, b.dofInd)
		}
		for n, c := range b.shared {
			sharedB[n] += w.w * c.d
			if d, ok := dofs[n]; !ok || c.dof < d {
				dofs[n] = c.dof
			}
		}
	}
	budget := []Contribution{
		{Input: "reference run scatter (type A)", U: a.uInd, Sensitivity: -1, UY: a.uInd, Dof: a.dofInd, TypeA: true},
		{Input: "other run scatter (type A)", U: math.Sqrt(uIndB2), Sensitivity: 1, UY: math.Sqrt(uIndB2), Dof: dofB, TypeA: true},
	}
	for _, n := range slices.Sorted(maps.Keys(dofs)) {
		da, db := a.shared[n].d, sharedB[n]
		if sh.Has(n) {
			budget = append(budget, Contribution{Input: n + " (shared: the runs' difference)", U: math.Abs(db - da), Sensitivity: 1, UY: math.Abs(db - da), Dof: dofs[n]})
			continue
		}
		budget = append(budget,
			Contribution{Input: n + " (reference run)", U: math.Abs(da), Sensitivity: 1, UY: math.Abs(da), Dof: dofs[n]},
			Contribution{Input: n + " (other run)", U: math.Abs(db), Sensitivity: 1, UY: math.Abs(db), Dof: dofs[n]})
	}
	if ux := math.Sqrt(setPointU2(rp, other, ws, sh)); ux > 0 && finite(slope) && slope != 0 {
		budget = append(budget, Contribution{Input: "set-point difference", U: ux, Sensitivity: slope, UY: math.Abs(slope) * ux, Dof: math.Inf(1)})
	}
	v := Combine(budget)
	v.X = xb - a.x
	var en float64
	switch u95 := v.U95(); {
	case u95 > 0:
		en = v.X / u95
	case v.X != 0:
		en = math.Copysign(math.Inf(1), v.X) // a difference with no uncertainty at all
	}
	return diffResult{v: v, en: en, budget: budget}
}
