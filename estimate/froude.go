package estimate

import "math"

// StandardGravityMPerS2 is the standard acceleration of gravity, 9.806 65
// m/s² (a defined value: 3rd CGPM 1901; also g0 of ISO 2533). The Froude
// number uses it, as ITTC practice does for model tests (common practice).
const StandardGravityMPerS2 = 9.80665

// Froude returns the Froude number on length L,
//
//	Fn = V/√(g·L)
//
// the ratio of flow speed to the speed of a gravity wave of length of order
// L. For a body towed near a free surface it says how much the body makes
// waves (wave drag, a lift that depends on depth): tests at equal Fn are
// comparable. L is the reference length (the chord of a foil, the length
// of a hull). L ≤ 0 gives NaN. The sign of V is kept.
func Froude(speedMPerS, lengthM float64) float64 {
	if !(lengthM > 0) {
		return math.NaN()
	}
	return speedMPerS / math.Sqrt(StandardGravityMPerS2*lengthM)
}
