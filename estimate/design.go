package estimate

import (
	"math"

	"liftyard/calibrate"
)

// ThinAirfoilSlopePerRad is the section lift-curve slope of thin-airfoil
// theory, dc_l/dα = 2π per radian (Glauert; Abbott & von Doenhoff, Theory of
// Wing Sections, Dover 1959, ch. 4).
const ThinAirfoilSlopePerRad = 2 * math.Pi

// LiftingLineSlope returns the lift-curve slope of a finite wing with
// elliptic loading by Prandtl's lifting-line theory,
//
//	a = a0/(1 + a0/(π·AR))
//
// with a0 the section slope per radian and AR the aspect ratio b²/S. The
// result is per radian. AR ≤ 0 gives NaN.
func LiftingLineSlope(a0PerRad, aspectRatio float64) float64 {
	if !(aspectRatio > 0) {
		return math.NaN()
	}
	return a0PerRad / (1 + a0PerRad/(math.Pi*aspectRatio))
}

// HelmboldSlope returns the lift-curve slope of a straight wing of low aspect
// ratio by Helmbold's formula (1942),
//
//	a = a0/[√(1 + (a0/(π·AR))²) + a0/(π·AR)]
//
// per radian. It tends to the lifting-line value at large AR and to π·AR/2
// (slender-wing theory) as AR → 0. AR ≤ 0 gives NaN.
func HelmboldSlope(a0PerRad, aspectRatio float64) float64 {
	if !(aspectRatio > 0) {
		return math.NaN()
	}
	k := a0PerRad / (math.Pi * aspectRatio)
	return a0PerRad / (math.Sqrt(1+k*k) + k)
}

// En returns the normalised error of a measurement against a design or
// reference value, as used in proficiency testing and interlaboratory
// comparisons (ISO/IEC 17043:2010 Annex B, from memory; docs/design.md §4):
//
//	En = (x_m − x_d)/√(U_m² + U_d²)
//
// with U the expanded (95 %) uncertainties, U = K95(ν)·u. |En| ≤ 1 means the
// two agree. When both uncertainties are zero the result is ±Inf (or NaN for
// equal values).
func En(measured, design calibrate.Value) float64 {
	um, ud := measured.U95(), design.U95()
	return (measured.X - design.X) / math.Sqrt(um*um+ud*ud)
}
