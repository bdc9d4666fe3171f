package estimate

import "math"

// WindAxes resolves body-axis forces into wind axes (a rotation by α; common
// practice, docs/design.md §4):
//
//	L = N·cos α − A·sin α,  D = N·sin α + A·cos α
//
// normalN is the normal force (perpendicular to the chord, positive towards
// the suction side), axialN the axial force (along the chord, positive
// rearwards) and alphaRad the angle of attack. Lift keeps its sign: it may be
// negative. The rotation keeps L² + D² = N² + A².
func WindAxes(normalN, axialN, alphaRad float64) (liftN, dragN float64) {
	s, c := math.Sincos(alphaRad)
	return normalN*c - axialN*s, normalN*s + axialN*c
}
