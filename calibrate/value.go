package calibrate

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Value is a measured value with its standard uncertainty (JCGM 100 §2.3.1)
// and the degrees of freedom of that uncertainty. X and U are in the same SI
// unit, which the field holding the Value names (QPa, LiftN, ...).
// Dof is +Inf for an uncertainty known exactly (a Type B input with no doubt
// about its size); a zero Value has Dof 0 and means "not measured".
type Value struct {
	X   float64 // best estimate
	U   float64 // standard uncertainty u(x), same unit as X
	Dof float64 // degrees of freedom ν of u(x); +Inf when exact
}

// K95 returns the coverage factor for a 95 % coverage interval, the two-sided
// Student t quantile t_0.975(ν) (JCGM 100 Annex G.3). ν is used as given,
// without truncation; ν < 1 is treated as 1 and ν = +Inf gives 1.95996.
func K95(dof float64) float64 {
	if math.IsInf(dof, 1) || dof > 1e7 {
		return distuv.UnitNormal.Quantile(0.975)
	}
	if !(dof >= 1) {
		dof = 1
	}
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: dof}.Quantile(0.975)
}

// U95 returns the expanded uncertainty U = k·u at 95 % coverage.
func (v Value) U95() float64 { return K95(v.Dof) * v.U }
