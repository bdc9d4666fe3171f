package estimate

import (
	"errors"
	"fmt"
	"math"

	"liftyard/calibrate"
)

// ErrNoSamples is returned by Reduce when fewer than two sample times carry a
// value on every required channel.
var ErrNoSamples = errors.New("fewer than two complete samples")

// ErrReference is returned by Reduce when the reference area is missing or
// not positive.
var ErrReference = errors.New("reference area must be positive")

// Window is the input of Reduce: aligned sample series over one window of a
// run (the live window or a steady segment), all in SI units. Sample i of
// every series belongs to the same time. NaN means "no sample"; a sample time
// is used only when normal force, q and angle all have a value there (and the
// axial force, when AxialN is not nil). Series of unequal length are cut to
// the shortest.
//
// The U fields are Type B standard uncertainties of one sample from the
// calibration (calibrate.Series.U). They are systematic within a run, so
// averaging does not reduce them; for a force summed from several load cells
// with independent calibrations, pass √(Σ u_j²). A Dof of 0 means +Inf (the
// uncertainty is stated without doubt).
type Window struct {
	NormalN  []float64 // normal force (body axes), N
	AxialN   []float64 // axial force (body axes), N; nil when there is no axial channel
	QPa      []float64 // dynamic pressure, Pa
	AlphaRad []float64 // angle of attack, rad

	NormalUN, AxialUN, QUPa, AlphaURad  float64 // Type B standard uncertainties
	NormalDof, AxialDof, QDof, AlphaDof float64 // their degrees of freedom; 0 = +Inf
	AreaM2, AreaUM2                     float64 // reference area S and its standard uncertainty, m²
	LengthM                             float64 // reference length for Re, m (0: Re not computed)
	Fluid                               Fluid   // fluid properties for speed and Re

	// Corrections are the Type B inputs of the weight tare and the balance
	// matrix applied to the loads before the window (own budget lines).
	Corrections []CorrectionInput
	// Blockage, when not nil, corrects q and the coefficients for solid
	// and wake blockage (corrections.go), with its own budget line.
	Blockage *Blockage
	// Span (relative) Type B standard uncertainties, calibrate.Series.URel:
	// each gives u = URel·|mean| of its input (0: none). QCoeffURel is the
	// relative u of q from the pitot coefficient, 2·u(C)/C for q = C²·Δp.
	NormalSpanURel, AxialSpanURel, QSpanURel, QCoeffURel float64
}

// Point is the reduced result of one Window: one polar point with its
// uncertainty budgets. Every Value holds its standard uncertainty and the
// Welch–Satterthwaite degrees of freedom; U95() gives the expanded one.
type Point struct {
	N          int     // complete samples used
	NEff       float64 // effective independent samples of the C_L series
	QPa        calibrate.Value
	AlphaRad   calibrate.Value
	LiftN      calibrate.Value
	DragN      calibrate.Value
	CL         calibrate.Value // NaN when q̄ ≤ 0 (no flow)
	CD         calibrate.Value // NaN when q̄ ≤ 0 (no flow)
	SpeedMPerS calibrate.Value // √(2q̄/ρ); NaN when ρ is unknown
	Re         float64         // ρ·V·L/μ; NaN when L or μ is unknown
	CLBudget   []Contribution
	CDBudget   []Contribution
	QBudget    []Contribution
}

// Reduce turns a window of samples into coefficients with uncertainty. It is
// the one computation behind both live and segment results.
//
// # Estimates
//
// From the means N̄, Ā, q̄, ᾱ of the complete samples:
//
//	L = N̄·cos ᾱ − Ā·sin ᾱ,  D = N̄·sin ᾱ + Ā·cos ᾱ   (WindAxes)
//	C_L = L/(q̄·S),  C_D = D/(q̄·S)
//
// # Type A (scatter)
//
// The model is linearised about the means (the "delta method", JCGM 100
// §5.1.2): for C_L the series
//
//	z_i = c_N·N_i + c_A·A_i + c_q·q_i + c_α·α_i
//	c_N = cos ᾱ/(q̄S), c_A = −sin ᾱ/(q̄S), c_q = −C_L/q̄, c_α = −D/(q̄S)
//
// has mean-of-z variance equal to the first-order variance of C_L including
// every covariance between the inputs (JCGM 100 §5.2: the load follows the
// gusts in q, so N and q are strongly correlated and must not be combined as
// independent). Its standard error and degrees of freedom come from the
// autocorrelation of z by TypeAMean (integrated autocorrelation time with
// Sokal's automatic window, bias-corrected; ν = N/(2W+1)). C_D, L, D, q and
// α are treated the same way with their own sensitivities.
//
// # Type B (calibration, geometry)
//
// One contribution per systematic input: normal and axial force calibration
// (absolute u, and span u = URel·|N̄| or URel·|Ā| when the calibration states
// one), q calibration (absolute and span, u = URel·q̄), the pitot coefficient
// (u = 2·u(C)/C·q̄), angle, and reference area (c_S = −C_L/S). Their
// sensitivities are the same c's. Span errors of the load cells summed into
// one force are taken as one relative u of the sum (the largest of the
// cells', the conservative choice when the cells carry loads of one sign).
//
// The corrections applied to the loads before the window
// (Window.Corrections: weight tare, balance matrix) add one line each on
// the normal and the axial force, with c_N and c_A.
//
// # Blockage
//
// With Window.Blockage, q, V, Re, C_L and C_D are corrected last
// (applyBlockage: q·(1 + ε)²), every coefficient line is scaled by
// 1/(1 + ε)², and u(ε) adds its own line.
//
// # Combination
//
// u_c = √(Σ u_i²) over Type A and Type B (they are independent), ν_eff by
// Welch–Satterthwaite, U95 = K95(ν_eff)·u_c. Speed V = √(2q̄/ρ) carries
// u_V = V·u_q/(2q̄) (the density's uncertainty is not propagated).
func Reduce(w *Window) (Point, error) {
	var p Point
	if !(w.AreaM2 > 0) {
		return p, fmt.Errorf("reduce: area %g m²: %w", w.AreaM2, ErrReference)
	}
	n := min(len(w.NormalN), len(w.QPa), len(w.AlphaRad))
	if w.AxialN != nil {
		n = min(n, len(w.AxialN))
	}
	// Compact to the complete sample times.
	nn := make([]float64, 0, n)
	aa := make([]float64, 0, n)
	qq := make([]float64, 0, n)
	al := make([]float64, 0, n)
	for i := range n {
		a := 0.0
		if w.AxialN != nil {
			a = w.AxialN[i]
		}
		if !finite(w.NormalN[i]) || !finite(a) || !finite(w.QPa[i]) || !finite(w.AlphaRad[i]) {
			continue
		}
		nn = append(nn, w.NormalN[i])
		aa = append(aa, a)
		qq = append(qq, w.QPa[i])
		al = append(al, w.AlphaRad[i])
	}
	m := len(nn)
	if m < 2 {
		return p, fmt.Errorf("reduce: %d complete samples of %d: %w", m, n, ErrNoSamples)
	}
	p.N = m
	nBar, aBar, qBar, alBar := mean(nn), mean(aa), mean(qq), mean(al)
	s := w.AreaM2
	lift, drag := WindAxes(nBar, aBar, alBar)
	sinA, cosA := math.Sincos(alBar)

	// Linearised per-sample lift and drag (about the means).
	ls := make([]float64, m)
	ds := make([]float64, m)
	for i := range m {
		da := al[i] - alBar
		ls[i] = nn[i]*cosA - aa[i]*sinA - drag*da
		ds[i] = nn[i]*sinA + aa[i]*cosA + lift*da
	}

	dof := func(d float64) float64 {
		if d == 0 {
			return math.Inf(1)
		}
		return d
	}
	typeB := func(cs []Contribution, name string, u, c, d float64) []Contribution {
		if u == 0 {
			return cs
		}
		return append(cs, Contribution{Input: name, U: u, Sensitivity: c, UY: math.Abs(c) * u, Dof: dof(d)})
	}

	// q
	p.QBudget = []Contribution{typeAContribution("dynamic pressure scatter", TypeAMean(qq))}
	p.QBudget = typeB(p.QBudget, "dynamic pressure calibration", w.QUPa, 1, w.QDof)
	uQSpan, uQCoeff := w.QSpanURel*math.Abs(qBar), w.QCoeffURel*math.Abs(qBar)
	uNSpan, uASpan := w.NormalSpanURel*math.Abs(nBar), w.AxialSpanURel*math.Abs(aBar)
	p.QBudget = typeB(p.QBudget, "dynamic pressure span", uQSpan, 1, 0)
	p.QBudget = typeB(p.QBudget, "pitot coefficient", uQCoeff, 1, 0)
	p.QPa = withX(qBar, Combine(p.QBudget))

	// α
	alBudget := []Contribution{typeAContribution("angle scatter", TypeAMean(al))}
	alBudget = typeB(alBudget, "angle calibration", w.AlphaURad, 1, w.AlphaDof)
	p.AlphaRad = withX(alBar, Combine(alBudget))

	// L and D in newtons.
	forceBudget := func(series []float64, cN, cA, cAl float64, what string) calibrate.Value {
		cs := []Contribution{typeAContribution(what+" scatter", TypeAMean(series))}
		cs = typeB(cs, "normal force calibration", w.NormalUN, cN, w.NormalDof)
		cs = typeB(cs, "axial force calibration", w.AxialUN, cA, w.AxialDof)
		cs = typeB(cs, "normal force span", uNSpan, cN, 0)
		cs = typeB(cs, "axial force span", uASpan, cA, 0)
		cs = typeB(cs, "angle of attack", w.AlphaURad, cAl, w.AlphaDof)
		cs = correctionLines(cs, w.Corrections, cN, cA)
		return Combine(cs)
	}
	p.LiftN = withX(lift, forceBudget(ls, cosA, -sinA, -drag, "lift"))
	p.DragN = withX(drag, forceBudget(ds, sinA, cosA, lift, "drag"))

	// Coefficients.
	nan := calibrate.Value{X: math.NaN(), U: math.NaN(), Dof: math.NaN()}
	p.CL, p.CD, p.NEff = nan, nan, math.NaN()
	if qBar > 0 {
		qs := qBar * s
		cl, cd := lift/qs, drag/qs
		coef := func(lin []float64, c float64, cN, cA, cAl float64, what string) (calibrate.Value, []Contribution, float64) {
			z := make([]float64, m)
			for i := range m {
				z[i] = lin[i]/qs - c*qq[i]/qBar
			}
			a := TypeAMean(z)
			cs := []Contribution{typeAContribution(what+" scatter (loads and q together)", a)}
			cs = typeB(cs, "normal force calibration", w.NormalUN, cN/qs, w.NormalDof)
			cs = typeB(cs, "axial force calibration", w.AxialUN, cA/qs, w.AxialDof)
			cs = typeB(cs, "dynamic pressure calibration", w.QUPa, -c/qBar, w.QDof)
			cs = typeB(cs, "normal force span", uNSpan, cN/qs, 0)
			cs = typeB(cs, "axial force span", uASpan, cA/qs, 0)
			cs = typeB(cs, "dynamic pressure span", uQSpan, -c/qBar, 0)
			cs = typeB(cs, "pitot coefficient", uQCoeff, -c/qBar, 0)
			cs = typeB(cs, "angle of attack", w.AlphaURad, cAl/qs, w.AlphaDof)
			cs = typeB(cs, "reference area", w.AreaUM2, -c/s, 0)
			cs = correctionLines(cs, w.Corrections, cN/qs, cA/qs)
			return withX(c, Combine(cs)), cs, a.NEff
		}
		p.CL, p.CLBudget, p.NEff = coef(ls, cl, cosA, -sinA, -drag, "C_L")
		p.CD, p.CDBudget, _ = coef(ds, cd, sinA, cosA, lift, "C_D")
	}

	// Speed and Reynolds number (blockage corrects them below).
	p.SpeedMPerS = calibrate.Value{X: math.NaN(), U: math.NaN(), Dof: math.NaN()}
	p.Re = math.NaN()
	if rho := w.Fluid.RhoKgPerM3; rho > 0 {
		v := SpeedFromQ(qBar, rho)
		uv := math.NaN()
		if qBar != 0 {
			uv = math.Abs(v / (2 * qBar) * p.QPa.U)
		}
		p.SpeedMPerS = calibrate.Value{X: v, U: uv, Dof: p.QPa.Dof}
		if w.LengthM > 0 && w.Fluid.MuPaS > 0 {
			p.Re = Reynolds(rho, math.Abs(v), w.LengthM, w.Fluid.MuPaS)
		}
	}
	applyBlockage(&p, w.Blockage, s)
	return p, nil
}

// typeAContribution is the budget line of a Type A evaluation (TypeAMean):
// u of the mean with its degrees of freedom.
func typeAContribution(name string, a TypeA) Contribution {
	return Contribution{Input: name + " (type A)", U: a.U, Sensitivity: 1, UY: a.U, Dof: a.Dof, TypeA: true}
}

func withX(x float64, v calibrate.Value) calibrate.Value {
	v.X = x
	return v
}

func mean(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
