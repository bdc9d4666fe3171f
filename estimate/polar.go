package estimate

import (
	"errors"
	"fmt"
	"maps"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"

	"liftyard/calibrate"
	"liftyard/rig"
)

// ErrPolar is returned by FitPolar when the points cannot give a lift-curve
// fit (too few distinct angles, all at one angle, an ill-conditioned fit).
var ErrPolar = errors.New("cannot fit the polar")

// DefaultGroupRad is the default PolarOptions.GroupRad: 0.25°, the angle
// band of one steady segment (docs/design.md §4), so that repeats of one
// angle step on later sweeps count as one set-point.
var DefaultGroupRad = rig.Rad(0.25)

// PolarOptions sets FitPolar. A zero PolarOptions chooses the linear range
// automatically.
type PolarOptions struct {
	// AlphaMinRad and AlphaMaxRad, when not both zero, fix the linear range:
	// every usable point with AlphaMinRad ≤ α ≤ AlphaMaxRad is fitted.
	AlphaMinRad, AlphaMaxRad float64
	// MinPoints is the fewest distinct angles a lift-curve fit uses
	// (default 3).
	MinPoints int
	// GroupRad is the width of one set-point, rad: points, sorted by α,
	// that lie within GroupRad of the first point of their group are
	// repeats of one angle (repeated sweeps, up and down). 0 means
	// DefaultGroupRad; a negative value groups only identical angles.
	GroupRad float64
}

// Polar is the lift curve and drag polar of one run: a weighted
// least-squares line C_L = a·(α − α_L0) over the linear range, the stall and
// C_L,max, and a parabolic drag polar. Every Value holds its standard
// uncertainty and degrees of freedom (U95() gives the expanded one).
type Polar struct {
	Points       int     // usable points (finite C_L with a positive uncertainty)
	Angles       int     // distinct angles (set-points) among them, repeats counted once
	Sweeps       int     // monotone runs of the angle in time order (an up and a down sweep are 2)
	Linear       []int   // indices into the input segments fitted as the linear range, by α
	LinearMinRad float64 // smallest α of the linear range
	LinearMaxRad float64 // largest α of the linear range

	SlopePerRad calibrate.Value // lift-curve slope a = dC_L/dα, per rad
	// SlopeBudget is the slope's uncertainty budget: the scatter of the
	// points about the line, and each input common to all points (reference
	// area, calibrations), which no number of points averages away.
	SlopeBudget   []Contribution
	AlphaZeroRad  calibrate.Value // zero-lift angle α_L0
	CLAtZeroAlpha calibrate.Value // intercept C_L(α = 0)
	// ChiSq is Σ (residual/u)² of the lift fit, with u each point's own
	// (Type A) uncertainty: the test of the scatter about the line. Inputs
	// common to all points do not enter it (they move every point alike).
	ChiSq  float64
	FitDof int  // points in the linear range − 2
	Scaled bool // the covariance was scaled by χ²/ν (scatter beyond the stated u)

	// Stalled is true when a set-point above the linear range falls below
	// the line by more than its U95 after C_L has stopped rising. StallRad
	// is then the α of C_L,max, the last angle before the lift falls.
	Stalled  bool
	StallRad float64 // NaN when no stall was seen
	// CLMax is the largest C_L measured at the set-point of C_L,max (a
	// lower bound when not Stalled), with the full uncertainty of its own
	// segment: Type A and every common input (the calibrations and the
	// reference area do not average out of a single value).
	CLMax         calibrate.Value
	AlphaCLMaxRad float64

	// Hysteresis compares the up and the down sweeps at each set-point
	// from the top of the linear range upwards (near stall) that was
	// measured in both directions; empty for a single sweep.
	Hysteresis []HysteresisStep

	// Drag polar C_D = C_D0 + K·(C_L − C_L,minD)², fitted over the linear
	// range; DragFitted is false when there are too few points or the
	// parabola does not open upwards.
	DragFitted bool
	CD0        calibrate.Value // minimum drag coefficient
	K          calibrate.Value // drag-due-to-lift factor
	CLMinD     calibrate.Value // C_L at minimum drag

	Warnings []string // what a test engineer should know before using the numbers
}

// HysteresisStep is one set-point measured on rising and on falling angle.
// CLUp and CLDown are the mean C_L of the segments reached with α rising
// and falling; their uncertainties are the Type A parts only, as the inputs
// common to the run (calibrations, area) move both alike and cancel in the
// difference CLDiff = CLUp − CLDown.
type HysteresisStep struct {
	AlphaRad     float64
	CLUp, CLDown calibrate.Value
	CLDiff       calibrate.Value
}

// Significant reports whether the up and down sweeps differ by more than
// the difference's U95.
func (h HysteresisStep) Significant() bool { return math.Abs(h.CLDiff.X) > h.CLDiff.U95() }

// Describe says in one sentence (no capital, no full stop) how the sweeps
// differ at the step, for reports and the command line.
func (h HysteresisStep) Describe() string {
	s := fmt.Sprintf("up and down sweeps at %.1f°: C_L %.3f rising, %.3f falling, difference %.3f ± %.3f (95 %%)",
		rig.Deg(h.AlphaRad), h.CLUp.X, h.CLDown.X, h.CLDiff.X, h.CLDiff.U95())
	if h.Significant() {
		return s + ": hysteresis (the flow separates and reattaches at different angles)"
	}
	return s + ": within its uncertainty, no hysteresis seen"
}

// MaxHysteresis returns the step with the largest |CLUp − CLDown| relative to
// its U95; ok is false when no set-point was measured in both directions.
func (p Polar) MaxHysteresis() (h HysteresisStep, ok bool) {
	best := -1.0
	for _, s := range p.Hysteresis {
		r := math.Abs(s.CLDiff.X) / s.CLDiff.U95()
		if !(s.CLDiff.U95() > 0) {
			r = math.Inf(1)
		}
		if !ok || r > best {
			h, best, ok = s, r, true
		}
	}
	return h, ok
}

// SlopePerDeg returns the lift-curve slope per degree (display only).
func (p Polar) SlopePerDeg() float64 { return p.SlopePerRad.X * rig.Rad(1) }

// angleInput is the name of the C_L budget line of the angle's calibration
// (estimate.Reduce): a common error of every point, which FitPolar carries
// through the slope as well as through C_L.
const angleInput = "angle of attack"

// polarPoint is one usable segment, sorted by α.
type polarPoint struct {
	idx            int
	order          int // position among the usable points in time order
	up             bool
	alpha, uAlpha  float64 // uAlpha: the independent (Type A) part of u(α)
	cl, uCL, dofCL float64 // uCL: the independent part of u(C_L)
	full           calibrate.Value
	cd, uCD, dofCD float64
	hasCD          bool
	effU           float64 // independent u of C_L including the angle's independent u through the slope
	effDof         float64
	// shared holds the signed contributions c·u to C_L of inputs whose
	// error is common to every point of a run (reference area, the
	// calibrations); uCL then holds only the independent part.
	shared map[string]sharedContribution
	// angleSys is the angle calibration's u (rad) and the sensitivity of
	// C_L to it at fixed loads (the budget line angleInput); hasAngleSys
	// is false without that line.
	angleSysU, angleSysC, angleSysDof float64
	hasAngleSys                       bool
}

// splitShared separates a segment's C_L budget into the independent part
// (the Type A lines, from the segment's own samples) and the shared inputs
// (every other line: calibrations, reference area, angle calibration — one
// error common to all the points of a run). Without a budget the whole
// u(C_L) and u(α) count as independent.
func splitShared(pp *polarPoint, budget []Contribution) {
	if len(budget) == 0 {
		return
	}
	var ind []Contribution
	for _, c := range budget {
		if c.TypeA {
			ind = append(ind, c)
			continue
		}
		if c.Input == angleInput {
			pp.angleSysU, pp.angleSysC, pp.angleSysDof, pp.hasAngleSys = c.U, c.Sensitivity, dofOrInf(c.Dof), true
			// The angle calibration is in u(α) too: what is left is the
			// angle's scatter over the segment.
			pp.uAlpha = math.Sqrt(math.Max(pp.uAlpha*pp.uAlpha-c.U*c.U, 0))
			continue
		}
		if pp.shared == nil {
			pp.shared = map[string]sharedContribution{}
		}
		pp.shared[c.Input] = sharedContribution{d: c.Sensitivity * c.U, dof: dofOrInf(c.Dof)}
	}
	if len(ind) == 0 {
		return
	}
	v := Combine(ind)
	if v.U > 0 {
		pp.uCL, pp.dofCL = v.U, dofOrInf(v.Dof)
	}
}

// addAngleShared enters the angle calibration as a common input once the
// slope b is known. A common angle error δ moves every point's α by δ and
// its C_L by c·δ (c = ∂C_L/∂α at fixed loads), so about the line, at the
// recorded angle, the point is off by (c − b)·δ.
func addAngleShared(pts []polarPoint, b float64) {
	for i := range pts {
		pt := &pts[i]
		if !pt.hasAngleSys {
			continue
		}
		if pt.shared == nil {
			pt.shared = map[string]sharedContribution{}
		}
		pt.shared["angle calibration"] = sharedContribution{d: (pt.angleSysC - b) * pt.angleSysU, dof: pt.angleSysDof}
	}
}

// addShared adds the shared inputs to the line's covariance. The fitted
// parameters are linear in the C_L values (a = Σ wa_i·C_L,i), so an error
// common to every point moves them by Σ wa_i·δ_i: fully correlated inputs
// add (Σ wa_i·δ_i)² to var(a) — not Σ (wa_i·δ_i)², which would shrink with
// the number of points (JCGM 100 §5.2, correlated input quantities).
// It returns the slope's budget: the fit's own scatter and each shared
// input.
func (l *line) addShared(pts []polarPoint) []Contribution {
	budget := []Contribution{{Input: "scatter of the points about the line", U: math.Sqrt(l.varB), Sensitivity: 1, UY: math.Sqrt(l.varB), Dof: l.dofB}}
	names := map[string]bool{}
	for _, pt := range pts {
		for n := range pt.shared {
			names[n] = true
		}
	}
	csA := []Contribution{{UY: math.Sqrt(l.varA), Dof: l.dofA}}
	csB := []Contribution{{UY: math.Sqrt(l.varB), Dof: l.dofB}}
	for _, n := range slices.Sorted(maps.Keys(names)) {
		var da, db float64
		dof := math.Inf(1)
		for i, pt := range pts {
			c := pt.shared[n]
			da += l.wa[i] * c.d
			db += l.wb[i] * c.d
			dof = math.Min(dof, c.dof)
		}
		l.varA += da * da
		l.varB += db * db
		l.cov += da * db
		csA = append(csA, Contribution{UY: math.Abs(da), Dof: dof})
		csB = append(csB, Contribution{UY: math.Abs(db), Dof: dof})
		budget = append(budget, Contribution{Input: n + " (common to all points)", U: math.Abs(db), Sensitivity: 1, UY: math.Abs(db), Dof: dof})
	}
	l.dofA, l.dofB = WelchSatterthwaite(csA), WelchSatterthwaite(csB)
	return budget
}

// sharedContribution is one shared input's signed effect on a point's C_L.
type sharedContribution struct {
	d   float64 // c_i·u(x_i), signed
	dof float64
}

// angleGroup is one set-point: the points pts[lo..hi] (sorted by α) that
// repeat one angle.
type angleGroup struct {
	lo, hi int
	alpha  float64 // mean α of the points
}

// groupAngles splits the sorted points into set-points: a group holds
// every point within tol of its first.
func groupAngles(pts []polarPoint, tol float64) []angleGroup {
	var gs []angleGroup
	for i := range pts {
		if len(gs) == 0 || pts[i].alpha-pts[gs[len(gs)-1].lo].alpha > tol {
			gs = append(gs, angleGroup{lo: i, hi: i})
			continue
		}
		gs[len(gs)-1].hi = i
	}
	for k := range gs {
		s := 0.0
		for i := gs[k].lo; i <= gs[k].hi; i++ {
			s += pts[i].alpha
		}
		gs[k].alpha = s / float64(gs[k].hi-gs[k].lo+1)
	}
	return gs
}

// sweepDirections marks each point (in time order) as reached with the
// angle rising (up) or falling, and returns the number of monotone runs.
// A repeat of the same set-point keeps the direction before it; the
// points before the first move take the direction of that move.
func sweepDirections(byTime []*polarPoint, tol float64) int {
	dir := make([]int, len(byTime))
	for i := 1; i < len(byTime); i++ {
		switch d := byTime[i].alpha - byTime[i-1].alpha; {
		case d > tol:
			dir[i] = 1
		case d < -tol:
			dir[i] = -1
		default:
			dir[i] = dir[i-1]
		}
	}
	first := 1
	for _, d := range dir {
		if d != 0 {
			first = d
			break
		}
	}
	sweeps, last := 1, 0
	for i := range dir {
		if dir[i] == 0 {
			dir[i] = first
		}
		if i > 0 && dir[i] != last {
			sweeps++
		}
		last = dir[i]
		byTime[i].up = dir[i] > 0
	}
	return sweeps
}

// groupValue is the mean C_L of the points of g (of the up sweeps only
// when up is true and the group has any), with the independent part
// averaged over the repeats and the common part in full.
func groupValue(pts []polarPoint, g angleGroup, upOnly bool) calibrate.Value {
	hasUp := false
	for i := g.lo; i <= g.hi; i++ {
		hasUp = hasUp || pts[i].up
	}
	var sum, vInd, vShared float64
	dof := math.Inf(1)
	n := 0
	for i := g.lo; i <= g.hi; i++ {
		pt := pts[i]
		if upOnly && hasUp && !pt.up {
			continue
		}
		n++
		sum += pt.cl
		vInd += pt.effU * pt.effU
		vShared += math.Max(pt.full.U*pt.full.U-pt.uCL*pt.uCL, 0)
		dof = math.Min(dof, pt.effDof)
	}
	fn := float64(n)
	return calibrate.Value{X: sum / fn, U: math.Sqrt(vInd/(fn*fn) + vShared/fn), Dof: dof}
}

// FitPolar fits the lift curve and drag polar of steady segments, given in
// time order (as a run stores them).
//
// # Set-points and sweeps
//
// The points are sorted by α and grouped into set-points (PolarOptions
// GroupRad): repeats of one angle on later sweeps, up and down, are one
// set-point. The fit needs MinPoints distinct angles; fewer, or every point
// at one angle, is refused with ErrPolar and a plain reason. In time
// order each point is marked as reached with α rising or falling.
//
// # Lift curve
//
// Weighted least squares of C_L on α over every point of the linear range
// (all sweeps), weights 1/u², where u² = u_A(C_L)² + (a·u_A(α))²: the
// independent (Type A) parts of the point's C_L and angle, the angle's
// carried into C_L through the slope a of a first fit ("effective
// variance"). The fit is solved by QR (gonum mat) and the parameter
// covariance is (RᵀR)⁻¹. The estimates are linear in the C_L values, β =
// Σ_i c_i·C_L,i, so the degrees of freedom follow from Welch–Satterthwaite
// over the points (JCGM 100 G.4). χ² = Σ (residual/u)² tests the scatter
// about the line against those independent u; when it exceeds its 95 %
// quantile the covariance is scaled by χ²/ν (the Birge ratio, common
// practice) with ν = n − 2, and Scaled is set.
//
// Inputs common to every point (reference area, calibrations, the angle's
// calibration: all budget lines but the Type A ones) are added after the
// fit as fully correlated errors, since averaging over points does not
// reduce them (see SlopeBudget). A common angle error moves α_L0 and
// C_L(0) but not the slope.
//
// α_L0 = −C_L(0)/a; its uncertainty comes from the covariance of the two
// parameters (first-order propagation, JCGM 100 eq. 13).
//
// # Linear range
//
// Unless the options fix it, the range starts from the three set-points
// around the C_L closest to zero and grows one set-point at a time, on
// whichever side is nearer in α, while the next set-point lies within its
// U95 of the line fitted so far (the weighted mean residual of its points,
// with the combined standard uncertainty of that mean and the line's
// prediction there, times k95). A set-point outside is still taken when
// the one after it is inside again (one noisy point is not a bend); a side
// stops at two outside in a row, or at one outside at its end.
//
// # Stall and hysteresis
//
// Above the linear range, each set-point is judged by the mean of its
// up-sweep points (the stall is met on rising angle): the first that falls
// below the line by more than its U95 while C_L no longer rises marks the
// stall; StallRad is the set-point of the largest C_L up to there and
// C_L,max the largest single segment at it, with that segment's full
// uncertainty. Stall on the negative side is not looked for. From the top
// set-point of the linear range upwards, set-points measured on both
// rising and falling angle give Hysteresis.
//
// # Drag polar
//
// C_D = b0 + b1·C_L + b2·C_L² by weighted least squares (weights 1/u(C_D)²)
// over the linear range, reported as C_D0 = b0 − b1²/(4b2), K = b2 and
// C_L,minD = −b1/(2b2) with first-order uncertainties. The uncertainty of
// C_L in this fit is not carried (C_L is far better known than C_D on a
// balance; a warning says so when it is not).
//
// The inputs are not changed. Points with a non-finite C_L or α, or no
// positive u(C_L), are skipped.
func FitPolar(segs []Segment, opts PolarOptions) (Polar, error) {
	p := Polar{StallRad: math.NaN(), AlphaCLMaxRad: math.NaN()}
	minPts := opts.MinPoints
	if minPts < 3 {
		minPts = 3
	}
	tol := opts.GroupRad
	switch {
	case tol == 0:
		tol = DefaultGroupRad
	case tol < 0:
		tol = 0
	}
	var pts []polarPoint
	for i, s := range segs {
		if !finite(s.CL.X) || !finite(s.AlphaRad.X) || !(s.CL.U > 0) || !finite(s.CL.U) {
			continue
		}
		pp := polarPoint{idx: i, order: len(pts), alpha: s.AlphaRad.X, uAlpha: s.AlphaRad.U, cl: s.CL.X, uCL: s.CL.U,
			dofCL: dofOrInf(s.CL.Dof), full: s.CL}
		if finite(s.CD.X) && s.CD.U > 0 && finite(s.CD.U) {
			pp.cd, pp.uCD, pp.dofCD, pp.hasCD = s.CD.X, s.CD.U, dofOrInf(s.CD.Dof), true
		}
		if !finite(pp.uAlpha) {
			pp.uAlpha = 0
		}
		splitShared(&pp, s.CLBudget)
		pp.effU, pp.effDof = pp.uCL, pp.dofCL
		pts = append(pts, pp)
	}
	p.Points = len(pts)
	if len(pts) == 0 {
		return p, fmt.Errorf("no usable points (each needs a finite C_L and α and a positive u(C_L)): %w", ErrPolar)
	}
	byTime := make([]*polarPoint, len(pts))
	for i := range pts {
		byTime[i] = &pts[i]
	}
	p.Sweeps = sweepDirections(byTime, tol)
	sort.SliceStable(pts, func(i, j int) bool { return pts[i].alpha < pts[j].alpha })
	gs := groupAngles(pts, tol)
	p.Angles = len(gs)
	switch {
	case pts[len(pts)-1].alpha-pts[0].alpha <= 0:
		return p, fmt.Errorf("every point is at the same angle (%.2f°): no spread in α to fit a slope to: %w", rig.Deg(pts[0].alpha), ErrPolar)
	case len(gs) < minPts:
		return p, fmt.Errorf("%d usable points at only %d distinct angles (repeats within %.2f° count once), need at least %d angles: %w",
			len(pts), len(gs), rig.Deg(tol), minPts, ErrPolar)
	}

	var glo, ghi int // the linear range gs[glo..ghi]
	if opts.AlphaMinRad != 0 || opts.AlphaMaxRad != 0 {
		glo, ghi = -1, -1
		for k, g := range gs {
			if g.alpha >= opts.AlphaMinRad && g.alpha <= opts.AlphaMaxRad {
				if glo < 0 {
					glo = k
				}
				ghi = k
			}
		}
		if glo < 0 || ghi-glo+1 < minPts {
			return p, fmt.Errorf("%d distinct angles in the given range %.2f°…%.2f°, need at least %d: %w",
				max(0, ghi-glo+1), rig.Deg(opts.AlphaMinRad), rig.Deg(opts.AlphaMaxRad), minPts, ErrPolar)
		}
	} else {
		var err error
		if glo, ghi, err = growLinear(pts, gs, minPts); err != nil {
			return p, err
		}
	}
	lo, hi := gs[glo].lo, gs[ghi].hi

	// Fit twice: the second pass carries u(α) through the first slope.
	lf, err := fitLine(pts[lo : hi+1])
	if err != nil {
		return p, err
	}
	for i := range pts {
		ua := lf.b * pts[i].uAlpha
		pts[i].effU = math.Hypot(pts[i].uCL, ua)
		pts[i].effDof = WelchSatterthwaite([]Contribution{{UY: pts[i].uCL, Dof: pts[i].dofCL}, {UY: ua, Dof: math.Inf(1)}})
	}
	if lf, err = fitLine(pts[lo : hi+1]); err != nil {
		return p, err
	}
	addAngleShared(pts, lf.b)
	for i := lo; i <= hi; i++ {
		p.Linear = append(p.Linear, pts[i].idx)
	}
	p.LinearMinRad, p.LinearMaxRad = pts[lo].alpha, pts[hi].alpha
	p.ChiSq, p.FitDof, p.Scaled = lf.chi2, hi-lo+1-2, lf.scaled
	p.SlopeBudget = lf.addShared(pts[lo : hi+1])
	p.SlopePerRad = calibrate.Value{X: lf.b, U: math.Sqrt(lf.varB), Dof: lf.dofB}
	p.CLAtZeroAlpha = calibrate.Value{X: lf.a, U: math.Sqrt(lf.varA), Dof: lf.dofA}
	p.AlphaZeroRad = lf.alphaZero()
	if lf.scaled {
		p.Warnings = append(p.Warnings, fmt.Sprintf("scatter about the lift line exceeds the points' own (Type A) uncertainties (χ²/ν = %.1f): the fit's uncertainties are scaled up; look for unsteady points, drift between sweeps or a wrong calibration u", lf.chi2/float64(p.FitDof)))
	}
	if ghi-glo+1 == minPts && opts.AlphaMinRad == 0 && opts.AlphaMaxRad == 0 {
		p.Warnings = append(p.Warnings, fmt.Sprintf("the linear range holds only %d angles: add angle steps between %.1f° and %.1f°", minPts, rig.Deg(p.LinearMinRad), rig.Deg(p.LinearMaxRad)))
	}

	// Stall and C_L,max, judged set-point by set-point on the up sweeps.
	reps := make([]calibrate.Value, len(gs))
	best := 0
	for k, g := range gs {
		reps[k] = groupValue(pts, g, true)
		if reps[k].X > reps[best].X {
			best = k
		}
	}
	runMax, bend := ghi, -1
	for k := ghi + 1; k < len(gs); k++ {
		below := lf.predict(gs[k].alpha) - reps[k].X
		if below > reps[k].U95() && reps[k].X <= reps[runMax].X {
			p.Stalled = true
			break
		}
		if below > reps[k].U95() && bend < 0 {
			bend = k
		}
		if reps[k].X > reps[runMax].X {
			runMax = k
		}
	}
	if !p.Stalled && bend >= 0 {
		p.Warnings = append(p.Warnings, fmt.Sprintf("C_L falls below the lift line from %.1f° while still rising: onset of stall; measure higher angles to find C_L,max", rig.Deg(gs[bend].alpha)))
	}
	if p.Stalled {
		best = runMax
		p.StallRad = gs[best].alpha
	} else {
		p.Warnings = append(p.Warnings, "no stall in the measured range: C_L,max is the largest measured C_L, a lower bound")
	}
	bp := pts[gs[best].lo]
	for i := gs[best].lo; i <= gs[best].hi; i++ {
		if pts[i].cl > bp.cl {
			bp = pts[i]
		}
	}
	p.CLMax = bp.full
	p.AlphaCLMaxRad = bp.alpha

	// Hysteresis from the top of the linear range upwards.
	for k := ghi; k < len(gs); k++ {
		if h, ok := hysteresisAt(pts, gs[k]); ok {
			p.Hysteresis = append(p.Hysteresis, h)
		}
	}

	p.fitDrag(pts[lo : hi+1])
	return p, nil
}

// hysteresisAt compares the up-sweep and down-sweep points of g; ok is
// false unless g has both.
func hysteresisAt(pts []polarPoint, g angleGroup) (HysteresisStep, bool) {
	mean := func(up bool) (calibrate.Value, bool) {
		var sum, v float64
		var cs []Contribution
		n := 0
		for i := g.lo; i <= g.hi; i++ {
			if pts[i].up != up {
				continue
			}
			n++
			sum += pts[i].cl
			v += pts[i].effU * pts[i].effU
			cs = append(cs, Contribution{UY: pts[i].effU, Dof: pts[i].effDof})
		}
		if n == 0 {
			return calibrate.Value{}, false
		}
		fn := float64(n)
		return calibrate.Value{X: sum / fn, U: math.Sqrt(v) / fn, Dof: WelchSatterthwaite(cs)}, true
	}
	up, okU := mean(true)
	down, okD := mean(false)
	if !okU || !okD {
		return HysteresisStep{}, false
	}
	diff := calibrate.Value{X: up.X - down.X, U: math.Hypot(up.U, down.U),
		Dof: WelchSatterthwaite([]Contribution{{UY: up.U, Dof: up.Dof}, {UY: down.U, Dof: down.Dof}})}
	return HysteresisStep{AlphaRad: g.alpha, CLUp: up, CLDown: down, CLDiff: diff}, true
}

// growLinear picks the automatic linear range over set-points (see
// FitPolar).
func growLinear(pts []polarPoint, gs []angleGroup, minPts int) (lo, hi int, err error) {
	absMean := func(g angleGroup) float64 {
		s := 0.0
		for i := g.lo; i <= g.hi; i++ {
			s += pts[i].cl
		}
		return math.Abs(s / float64(g.hi-g.lo+1))
	}
	c := 0
	for k := range gs {
		if absMean(gs[k]) < absMean(gs[c]) {
			c = k
		}
	}
	lo, hi = c-(minPts-1)/2, c+minPts/2
	if lo < 0 {
		hi -= lo
		lo = 0
	}
	if hi > len(gs)-1 {
		lo -= hi - (len(gs) - 1)
		hi = len(gs) - 1
	}
	if lo < 0 {
		return 0, 0, fmt.Errorf("%d distinct angles: %w", len(gs), ErrPolar)
	}
	downOK, upOK := lo > 0, hi < len(gs)-1
	for downOK || upOK {
		lf, ferr := fitLine(pts[gs[lo].lo : gs[hi].hi+1])
		if ferr != nil {
			return 0, 0, ferr
		}
		inside := func(k int) bool {
			var sw, swr float64
			dof := math.Inf(1)
			for i := gs[k].lo; i <= gs[k].hi; i++ {
				w := 1 / (pts[i].uCL * pts[i].uCL)
				sw += w
				swr += w * (pts[i].cl - lf.predict(pts[i].alpha))
				dof = math.Min(dof, pts[i].dofCL)
			}
			u := math.Hypot(1/math.Sqrt(sw), lf.predictU(gs[k].alpha))
			return math.Abs(swr/sw) <= calibrate.K95(dof)*u
		}
		// Try the side nearer in α first. A set-point outside is taken
		// with the next one when that one is inside again: noise, not a
		// bend.
		down := downOK && (!upOK || gs[lo].alpha-gs[lo-1].alpha <= gs[hi+1].alpha-gs[hi].alpha)
		if down {
			switch {
			case inside(lo - 1):
				lo--
			case lo >= 2 && inside(lo-2):
				lo -= 2
			default:
				downOK = false
			}
			downOK = downOK && lo > 0
			continue
		}
		switch {
		case inside(hi + 1):
			hi++
		case hi+2 < len(gs) && inside(hi+2):
			hi += 2
		default:
			upOK = false
		}
		upOK = upOK && hi < len(gs)-1
	}
	return lo, hi, nil
}

// line is a weighted straight-line fit y = a + b·x with its covariance.
type line struct {
	a, b            float64
	varA, varB, cov float64
	dofA, dofB      float64
	chi2            float64
	scaled          bool
	wa, wb          []float64 // a = Σ wa_i y_i, b = Σ wb_i y_i
	us, dofs        []float64 // the u and ν of each y
}

func (l line) predict(x float64) float64 { return l.a + l.b*x }

// predictU is the standard uncertainty of the line at x.
func (l line) predictU(x float64) float64 {
	v := l.varA + x*x*l.varB + 2*x*l.cov
	return math.Sqrt(math.Max(v, 0))
}

// alphaZero returns x where the line crosses zero, −a/b, with its
// uncertainty from the covariance and its Welch–Satterthwaite dof.
func (l line) alphaZero() calibrate.Value {
	x0 := -l.a / l.b
	// ∂x0/∂a = −1/b, ∂x0/∂b = a/b² = −x0/b.
	v := (l.varA + x0*x0*l.varB + 2*x0*l.cov) / (l.b * l.b)
	cs := make([]Contribution, len(l.wa))
	for i := range l.wa {
		ci := -(l.wa[i] + x0*l.wb[i]) / l.b
		cs[i] = Contribution{UY: math.Abs(ci) * l.us[i], Dof: l.dofs[i]}
	}
	dof := WelchSatterthwaite(cs)
	if l.scaled {
		dof = float64(len(l.wa) - 2)
	}
	return calibrate.Value{X: x0, U: math.Sqrt(math.Max(v, 0)), Dof: dof}
}

// fitLine fits C_L on α over pts with weights 1/effU².
func fitLine(pts []polarPoint) (line, error) {
	n := len(pts)
	xs := make([]float64, n)
	ys := make([]float64, n)
	us := make([]float64, n)
	dofs := make([]float64, n)
	for i, pt := range pts {
		xs[i], ys[i], us[i], dofs[i] = pt.alpha, pt.cl, pt.effU, pt.effDof
	}
	beta, cov, w, chi2, err := wls([][]float64{ones(n), xs}, ys, us)
	if err != nil {
		return line{}, err
	}
	l := line{a: beta[0], b: beta[1], varA: cov.At(0, 0), varB: cov.At(1, 1), cov: cov.At(0, 1),
		chi2: chi2, wa: w[0], wb: w[1], us: us, dofs: dofs}
	if !(l.b != 0) {
		return line{}, fmt.Errorf("the lift line is flat: %w", ErrPolar)
	}
	l.dofA, l.dofB = linearDof(w[0], us, dofs), linearDof(w[1], us, dofs)
	if nu := n - 2; nu > 0 && chi2/float64(nu) > chiSq95(nu)/float64(nu) {
		s := chi2 / float64(nu)
		l.varA, l.varB, l.cov = s*l.varA, s*l.varB, s*l.cov
		l.dofA, l.dofB = float64(nu), float64(nu)
		l.scaled = true
	}
	return l, nil
}

// chiSq95 is the 95 % quantile of χ² with ν degrees of freedom.
func chiSq95(nu int) float64 { return distuv.ChiSquared{K: float64(nu)}.Quantile(0.95) }

// linearDof is the Welch–Satterthwaite dof of Σ w_i y_i with u(y_i), ν_i.
func linearDof(w, us, dofs []float64) float64 {
	cs := make([]Contribution, len(w))
	for i := range w {
		cs[i] = Contribution{UY: math.Abs(w[i]) * us[i], Dof: dofs[i]}
	}
	return WelchSatterthwaite(cs)
}

func ones(n int) []float64 {
	o := make([]float64, n)
	for i := range o {
		o[i] = 1
	}
	return o
}

// wls solves the weighted least-squares problem y ≈ Σ_k β_k·cols[k] with
// standard uncertainties us by QR (rows scaled by 1/u_i). It returns β, the
// covariance (RᵀR)⁻¹, the linear weights W (β_k = Σ_i W[k][i]·y_i) and χ².
// A near-singular design gives an error wrapping ErrPolar.
func wls(cols [][]float64, ys, us []float64) (beta []float64, cov *mat.Dense, w [][]float64, chi2 float64, err error) {
	n, m := len(ys), len(cols)
	if n < m {
		return nil, nil, nil, 0, fmt.Errorf("%d points for %d parameters: %w", n, m, ErrPolar)
	}
	a := mat.NewDense(n, m, nil)
	b := mat.NewVecDense(n, nil)
	for i := range n {
		for k := range m {
			a.Set(i, k, cols[k][i]/us[i])
		}
		b.SetVec(i, ys[i]/us[i])
	}
	var qr mat.QR
	qr.Factorize(a)
	if c := qr.Cond(); c > 1e12 || math.IsNaN(c) {
		return nil, nil, nil, 0, fmt.Errorf("fit ill-conditioned (condition number %.3g): %w", c, ErrPolar)
	}
	var x mat.VecDense
	if err := qr.SolveVecTo(&x, false, b); err != nil {
		return nil, nil, nil, 0, fmt.Errorf("least squares: %v: %w", err, ErrPolar)
	}
	var r mat.Dense
	qr.RTo(&r)
	rs := r.Slice(0, m, 0, m)
	var rinv mat.Dense
	if err := rinv.Inverse(rs); err != nil {
		return nil, nil, nil, 0, fmt.Errorf("covariance: %v: %w", err, ErrPolar)
	}
	cov = mat.NewDense(m, m, nil)
	cov.Mul(&rinv, rinv.T())
	// W = cov·Aᵀ·diag(1/u²) in the unscaled variables: W = cov·(A_s)ᵀ·diag(1/u).
	var wm mat.Dense
	wm.Mul(cov, a.T())
	w = make([][]float64, m)
	for k := range m {
		w[k] = make([]float64, n)
		for i := range n {
			w[k][i] = wm.At(k, i) / us[i]
		}
	}
	beta = make([]float64, m)
	for k := range m {
		beta[k] = x.AtVec(k)
	}
	for i := range n {
		pred := 0.0
		for k := range m {
			pred += beta[k] * cols[k][i]
		}
		d := (ys[i] - pred) / us[i]
		chi2 += d * d
	}
	return beta, cov, w, chi2, nil
}

// fitDrag fits the parabolic drag polar over the linear range.
func (p *Polar) fitDrag(pts []polarPoint) {
	var cl, cd, ucd, dofs, ucl []float64
	for _, pt := range pts {
		if pt.hasCD {
			cl = append(cl, pt.cl)
			cd = append(cd, pt.cd)
			ucd = append(ucd, pt.uCD)
			dofs = append(dofs, pt.dofCD)
			ucl = append(ucl, pt.uCL)
		}
	}
	if len(cl) < 4 {
		p.Warnings = append(p.Warnings, fmt.Sprintf("drag polar not fitted: %d points with C_D in the linear range, need 4", len(cl)))
		return
	}
	sq := make([]float64, len(cl))
	for i, c := range cl {
		sq[i] = c * c
	}
	beta, cov, w, chi2, err := wls([][]float64{ones(len(cl)), cl, sq}, cd, ucd)
	if err != nil {
		p.Warnings = append(p.Warnings, "drag polar not fitted: "+err.Error())
		return
	}
	b0, b1, b2 := beta[0], beta[1], beta[2]
	if !(b2 > 0) {
		p.Warnings = append(p.Warnings, "drag polar not fitted: C_D does not rise on both sides of its minimum over the linear range")
		return
	}
	scale, scaled := 1.0, false
	if nu := len(cl) - 3; nu > 0 && chi2 > chiSq95(nu) {
		scale, scaled = chi2/float64(nu), true
	}
	// Gradients of (C_D0, K, C_L,minD) with respect to (b0, b1, b2).
	grads := [3][3]float64{
		{1, -b1 / (2 * b2), b1 * b1 / (4 * b2 * b2)},
		{0, 0, 1},
		{0, -1 / (2 * b2), b1 / (2 * b2 * b2)},
	}
	xs := [3]float64{b0 - b1*b1/(4*b2), b2, -b1 / (2 * b2)}
	var out [3]calibrate.Value
	for q := range 3 {
		v := 0.0
		for i := range 3 {
			for j := range 3 {
				v += grads[q][i] * grads[q][j] * cov.At(i, j)
			}
		}
		cs := make([]Contribution, len(cl))
		for i := range cl {
			ci := 0.0
			for k := range 3 {
				ci += grads[q][k] * w[k][i]
			}
			cs[i] = Contribution{UY: math.Abs(ci) * ucd[i], Dof: dofs[i]}
		}
		dof := WelchSatterthwaite(cs)
		if scaled {
			dof = float64(len(cl) - 3)
		}
		out[q] = calibrate.Value{X: xs[q], U: math.Sqrt(math.Max(scale*v, 0)), Dof: dof}
	}
	p.CD0, p.K, p.CLMinD = out[0], out[1], out[2]
	p.DragFitted = true
	if scaled {
		p.Warnings = append(p.Warnings, fmt.Sprintf("drag polar: scatter exceeds the stated uncertainties (χ²/ν = %.1f): uncertainties scaled up", scale))
	}
	// C_L's uncertainty moves the points sideways; ignored when small.
	for i := range cl {
		if slope := math.Abs(b1 + 2*b2*cl[i]); slope*ucl[i] > 0.5*ucd[i] {
			p.Warnings = append(p.Warnings, "drag polar: the uncertainty of C_L is not small next to that of C_D, and the fit does not carry it")
			break
		}
	}
}
