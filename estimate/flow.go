package estimate

import "math"

// DynamicPressureFromPitot returns the dynamic pressure q in Pa from the
// differential pressure Δp of a pitot-static tube: q = C²·Δp (Bernoulli,
// incompressible: p_t − p_s = ½ρV² for an ideal probe). pitotCoeff is the
// probe's velocity coefficient C (V = C·√(2Δp/ρ), so ½ρV² = C²·Δp; ISO 3966
// writes the calibration coefficient the same way, from memory); C = 1 for a standard
// pitot-static tube (common practice); C = 0 is read as 1 (not calibrated).
// A negative C gives NaN. Compressibility is ignored: above Mach 0.3 the
// result is off by more than about 1 % (V error ≈ M²/8).
func DynamicPressureFromPitot(deltaPPa, pitotCoeff float64) (qPa float64) {
	switch {
	case pitotCoeff == 0:
		return deltaPPa
	case pitotCoeff < 0:
		return math.NaN()
	}
	return deltaPPa * pitotCoeff * pitotCoeff
}

// DynamicPressure returns q = ½·ρ·V² in Pa (definition).
func DynamicPressure(rhoKgPerM3, speedMPerS float64) (qPa float64) {
	return 0.5 * rhoKgPerM3 * speedMPerS * speedMPerS
}

// SpeedFromQ returns the flow speed V = √(2q/ρ) in m/s (Bernoulli,
// incompressible). A negative q (reversed or zero-offset pitot) gives the
// negative of the speed for |q|, so noise about zero flow averages out
// instead of being rectified; ρ ≤ 0 gives NaN.
func SpeedFromQ(qPa, rhoKgPerM3 float64) (speedMPerS float64) {
	if !(rhoKgPerM3 > 0) {
		return math.NaN()
	}
	return math.Copysign(math.Sqrt(2*math.Abs(qPa)/rhoKgPerM3), qPa)
}

// Reynolds returns Re = ρ·V·L/μ (dimensionless) for reference length L.
func Reynolds(rhoKgPerM3, speedMPerS, lengthM, muPaS float64) float64 {
	return rhoKgPerM3 * speedMPerS * lengthM / muPaS
}
