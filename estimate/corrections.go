package estimate

import (
	"fmt"
	"math"

	"liftyard/rig"
)

// CorrectionInput is the Type B input of a correction applied to the
// balance channels before the estimate (the weight tare against the angle,
// the balance interaction matrix; process applies them): the standard
// uncertainty it leaves on the normal and on the axial force. Each gives
// its own line in the budgets. It is systematic within a run.
type CorrectionInput struct {
	Name     string  // budget line, e.g. "weight tare"
	NormalUN float64 // standard uncertainty it adds to the normal force, N
	AxialUN  float64 // standard uncertainty it adds to the axial force, N
	Dof      float64 // degrees of freedom; 0 = +Inf (stated without doubt)
}

// Blockage is the blockage correction of a closed test section or a towing
// tank as Reduce applies it (rig.Blockage states it):
//
//	ε_sb = K·V/C^{3/2}            (solid blockage, Thom's short form)
//	ε_wb = S/(4C)·C_D,u           (wake blockage, from the uncorrected drag)
//	ε = ε_sb + ε_wb,  q_c = q·(1 + ε)²
//
// so C_L,c = C_L,u/(1 + ε)², C_D,c = C_D,u/(1 + ε)², V_c = V·(1 + ε) and Re
// with it (Barlow, Rae & Pope, Low-Speed Wind Tunnel Testing, 3rd ed. 1999,
// ch. 10, closed test section; the equations from memory, docs/references.md
// §16). A free surface (towing tank) only lessens the blockage of a closed
// section, so on a tank's wetted cross-section the correction is an upper
// bound (common practice); the depth Froude number effect that Schuster's
// method treats is not corrected.
//
// Its uncertainty is u(ε) = UFrac·ε (common practice), one budget line.
type Blockage struct {
	SolidEpsFrac  float64 // ε_sb
	Wake          bool    // add ε_wb from the window's own uncorrected C_D
	SectionAreaM2 float64 // C, m²
	UFrac         float64 // u(ε)/ε
}

// BlockageOf returns the correction the rig names, or nil for none.
func BlockageOf(r *rig.Rig) *Blockage {
	if r == nil || r.Blockage == nil {
		return nil
	}
	return &Blockage{SolidEpsFrac: r.Blockage.SolidEpsFrac(), Wake: r.Blockage.Wake,
		SectionAreaM2: r.Blockage.SectionAreaM2, UFrac: r.Blockage.UFrac}
}

// Eps returns ε = ε_sb + ε_wb for the uncorrected drag coefficient cdU on
// the reference area areaM2 (a NaN C_D gives no wake blockage).
func (b *Blockage) Eps(areaM2, cdU float64) float64 {
	eps := b.SolidEpsFrac
	if b.Wake && b.SectionAreaM2 > 0 && finite(cdU) {
		eps += areaM2 / (4 * b.SectionAreaM2) * cdU
	}
	return eps
}

// correctionLines appends the Type B lines of the corrections for a result
// with sensitivities cN to the normal and cA to the axial force.
func correctionLines(cs []Contribution, corr []CorrectionInput, cN, cA float64) []Contribution {
	for _, c := range corr {
		dof := c.Dof
		if dof == 0 {
			dof = math.Inf(1)
		}
		if c.NormalUN > 0 {
			cs = append(cs, Contribution{Input: c.Name + " (normal force)", U: c.NormalUN, Sensitivity: cN, UY: math.Abs(cN) * c.NormalUN, Dof: dof})
		}
		if c.AxialUN > 0 {
			cs = append(cs, Contribution{Input: c.Name + " (axial force)", U: c.AxialUN, Sensitivity: cA, UY: math.Abs(cA) * c.AxialUN, Dof: dof})
		}
	}
	return cs
}

// applyBlockage corrects q, V, Re, C_L and C_D of p for blockage and adds
// its budget line (q, C_L, C_D). Loads are not changed. A point without
// coefficients (no flow) is left alone.
func applyBlockage(p *Point, b *Blockage, areaM2 float64) {
	if b == nil || !finite(p.CL.X) || !finite(p.CD.X) {
		return
	}
	eps := b.Eps(areaM2, p.CD.X)
	if eps == 0 {
		return
	}
	g := 1 + eps
	f := g * g
	uEps := b.UFrac * math.Abs(eps)
	name := fmt.Sprintf("blockage ε = %.4g (u = %.0f %% of it)", eps, 100*b.UFrac)
	scale := func(v float64, cs []Contribution, factor, dVdEps float64) (float64, []Contribution) {
		out := make([]Contribution, 0, len(cs)+1)
		for _, c := range cs {
			c.Sensitivity *= factor
			c.UY *= math.Abs(factor)
			out = append(out, c)
		}
		if uEps > 0 {
			out = append(out, Contribution{Input: name, U: uEps, Sensitivity: dVdEps, UY: math.Abs(dVdEps) * uEps, Dof: math.Inf(1)})
		}
		return v * factor, out
	}
	var x float64
	x, p.QBudget = scale(p.QPa.X, p.QBudget, f, 2*g*p.QPa.X)
	p.QPa = withX(x, Combine(p.QBudget))
	x, p.CLBudget = scale(p.CL.X, p.CLBudget, 1/f, -2*p.CL.X/(f*g))
	p.CL = withX(x, Combine(p.CLBudget))
	x, p.CDBudget = scale(p.CD.X, p.CDBudget, 1/f, -2*p.CD.X/(f*g))
	p.CD = withX(x, Combine(p.CDBudget))
	if finite(p.SpeedMPerS.X) {
		p.SpeedMPerS.X *= g
		p.SpeedMPerS.U = math.Hypot(p.SpeedMPerS.U*g, p.SpeedMPerS.X/g*uEps)
	}
	if finite(p.Re) {
		p.Re *= g
	}
}
