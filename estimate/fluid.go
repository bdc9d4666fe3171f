package estimate

import (
	"errors"
	"fmt"
	"math"

	"liftyard/rig"
)

// Fluid holds the properties of the fluid around the body at the test
// conditions, in SI units.
type Fluid struct {
	RhoKgPerM3 float64 // density ρ, kg/m³
	MuPaS      float64 // dynamic viscosity μ, Pa·s
	NuM2PerS   float64 // kinematic viscosity ν = μ/ρ, m²/s
}

// ErrConditions is returned by Properties when the conditions lie outside the
// range that the property formulas or tables cover.
var ErrConditions = errors.New("conditions outside the range of the property formulas")

// ErrFluid is returned by Properties for a fluid it has no formulas for.
var ErrFluid = errors.New("unknown fluid")

// Properties returns density and viscosity of fluid f at conditions c.
//
//   - air: density by CIPM-2007 (AirDensityCIPM2007, x_CO2 = 0.0004) from
//     c.TempK, c.PressurePa and c.RelHumidity; viscosity by Sutherland's law
//     (humidity is neglected for μ). Accepted: 200–340 K, 30–120 kPa,
//     humidity 0–1; CIPM-2007 is stated for 15–27 °C and 600–1100 hPa, values
//     outside that band are extrapolations.
//   - fresh_water: FreshWaterDensity and FreshWaterMuPaS (0–40 °C, 1 atm).
//   - sea_water: SeaWaterDensity and SeaWaterMuPaS at c.SalinityKgPerKg
//     (0 means standard seawater, 0.035 165 04 kg/kg).
//
// Water properties are at 0.101 325 MPa; c.PressurePa is not used for them.
func Properties(f rig.Fluid, c rig.Conditions) (Fluid, error) {
	var out Fluid
	switch f {
	case rig.FluidAir:
		if !(c.TempK >= 200 && c.TempK <= 340) {
			return out, fmt.Errorf("air temperature %.2f K (need 200–340 K): %w", c.TempK, ErrConditions)
		}
		if !(c.PressurePa >= 30e3 && c.PressurePa <= 120e3) {
			return out, fmt.Errorf("air pressure %.0f Pa (need 30–120 kPa): %w", c.PressurePa, ErrConditions)
		}
		if !(c.RelHumidity >= 0 && c.RelHumidity <= 1) {
			return out, fmt.Errorf("relative humidity %g (need a fraction 0–1): %w", c.RelHumidity, ErrConditions)
		}
		out.RhoKgPerM3 = AirDensityCIPM2007(c.TempK, c.PressurePa, c.RelHumidity, 0.0004)
		out.MuPaS = SutherlandMuPaS(c.TempK)
	case rig.FluidFreshWater, rig.FluidSeaWater:
		tC := c.TempK - 273.15
		if !(tC >= waterMinC && tC <= waterMaxC) {
			return out, fmt.Errorf("water temperature %.2f °C (need 0–40 °C): %w", tC, ErrConditions)
		}
		if f == rig.FluidFreshWater {
			out.RhoKgPerM3 = FreshWaterDensity(c.TempK)
			out.MuPaS = FreshWaterMuPaS(c.TempK)
			break
		}
		s := c.SalinityKgPerKg
		if s == 0 {
			s = StandardSalinityKgPerKg
		}
		if !(s > 0 && s <= 0.045) {
			return out, fmt.Errorf("salinity %g kg/kg (need 0–0.045): %w", s, ErrConditions)
		}
		out.RhoKgPerM3 = SeaWaterDensity(c.TempK, s)
		out.MuPaS = SeaWaterMuPaS(c.TempK, s)
	default:
		return out, fmt.Errorf("%q (want air, fresh_water or sea_water): %w", f, ErrFluid)
	}
	out.NuM2PerS = out.MuPaS / out.RhoKgPerM3
	return out, nil
}

// CIPM-2007 constants (Picard et al., Metrologia 45 (2008) 149, Appendix A1).
const (
	cipmR  = 8.314472     // molar gas constant, J/(mol·K)
	cipmMv = 18.01528e-3  // molar mass of water, kg/mol
	cipmA  = 1.2378847e-5 // saturation vapour pressure, K⁻²
	cipmB  = -1.9121316e-2
	cipmC  = 33.93711047
	cipmD  = -6.3431645e3
	cipmAl = 1.00062 // enhancement factor α
	cipmBe = 3.14e-8 // β, Pa⁻¹
	cipmGa = 5.6e-7  // γ, K⁻²
	cipmA0 = 1.58123e-6
	cipmA1 = -2.9331e-8
	cipmA2 = 1.1043e-10
	cipmB0 = 5.707e-6
	cipmB1 = -2.051e-8
	cipmC0 = 1.9898e-4
	cipmC1 = -2.376e-6
	cipmDd = 1.83e-11
	cipmEe = -0.765e-8
)

// AirDensityCIPM2007 returns the density of moist air in kg/m³ by the
// CIPM-2007 equation (Picard, Davis, Gläser, Fujii, Metrologia 45 (2008)
// 149–155, Appendix A1):
//
//	ρ = p·M_a/(Z·R·T) · [1 − x_v(1 − M_v/M_a)]
//	M_a = [28.965 46 + 12.011(x_CO2 − 0.0004)]·10⁻³ kg/mol
//	x_v = h·f(p,t)·p_sv(T)/p,  f = α + βp + γt²,  p_sv = exp(AT² + BT + C + D/T) Pa
//	Z = 1 − (p/T)[a0 + a1t + a2t² + (b0 + b1t)x_v + (c0 + c1t)x_v²] + (p/T)²(d + e·x_v²)
//
// tempK is the air temperature (ITS-90), pressurePa the absolute pressure,
// relHumidity the relative humidity h as a fraction 0–1 and xCO2 the CO₂
// mole fraction (0.0004 is the paper's reference). Stated validity:
// 600–1100 hPa, 15–27 °C; relative uncertainty of the equation about 2·10⁻⁵.
func AirDensityCIPM2007(tempK, pressurePa, relHumidity, xCO2 float64) float64 {
	t := tempK - 273.15
	p := pressurePa
	psv := math.Exp(cipmA*tempK*tempK + cipmB*tempK + cipmC + cipmD/tempK)
	f := cipmAl + cipmBe*p + cipmGa*t*t
	xv := relHumidity * f * psv / p
	z := 1 - p/tempK*(cipmA0+cipmA1*t+cipmA2*t*t+(cipmB0+cipmB1*t)*xv+(cipmC0+cipmC1*t)*xv*xv) +
		p*p/(tempK*tempK)*(cipmDd+cipmEe*xv*xv)
	ma := (28.96546 + 12.011*(xCO2-0.0004)) * 1e-3
	return p * ma / (z * cipmR * tempK) * (1 - xv*(1-cipmMv/ma))
}

// US Standard Atmosphere 1976 / ISO 2533 constants.
const (
	isaT0K     = 288.15
	isaP0Pa    = 101325
	isaG0      = 9.80665          // m/s²
	isaRStar   = 8.31432          // J/(mol·K), US76 value
	isaM0      = 28.9644e-3       // kg/mol
	isaRAir    = isaRStar / isaM0 // 287.053 J/(kg·K)
	isaLapseKM = -0.0065          // K/m, 0–11 km geopotential
	gammaAir   = 1.4
)

// ISA returns temperature, pressure and density of the International Standard
// Atmosphere (ISO 2533:1975, identical to US Standard Atmosphere 1976 below
// 32 km) at geopotential altitude H in metres, troposphere only:
//
//	T = T0 + L·H,  p = p0·(T/T0)^(−g0/(R·L)),  ρ = p/(R·T)
//
// with T0 = 288.15 K, p0 = 101 325 Pa, L = −0.0065 K/m, g0 = 9.806 65 m/s²,
// R = R*/M0 = 8.314 32/0.028 964 4 = 287.053 J/(kg·K). H is geopotential, not
// geometric height (H = r0·Z/(r0 + Z), r0 = 6 356 766 m). Outside −2 000 …
// 11 000 m all three results are NaN.
func ISA(geopotentialAltitudeM float64) (tempK, pressurePa, rhoKgPerM3 float64) {
	h := geopotentialAltitudeM
	if !(h >= -2000 && h <= 11000) {
		return math.NaN(), math.NaN(), math.NaN()
	}
	tempK = isaT0K + isaLapseKM*h
	pressurePa = isaP0Pa * math.Pow(tempK/isaT0K, -isaG0/(isaRAir*isaLapseKM))
	rhoKgPerM3 = pressurePa / (isaRAir * tempK)
	return tempK, pressurePa, rhoKgPerM3
}

// SutherlandMuPaS returns the dynamic viscosity of air in Pa·s by Sutherland's
// law as used in the US Standard Atmosphere 1976 (eq. 51):
//
//	μ = β·T^{3/2}/(T + S),  β = 1.458·10⁻⁶ kg/(m·s·K^{1/2}),  S = 110.4 K
//
// Valid for dry air from about 100 K to 1900 K; humidity changes μ by less
// than 1 % at usual field conditions and is neglected.
func SutherlandMuPaS(tempK float64) float64 {
	const beta, s = 1.458e-6, 110.4
	return beta * math.Pow(tempK, 1.5) / (tempK + s)
}

// SpeedOfSoundMPerS returns the speed of sound in air a = √(γ·R·T) with
// γ = 1.4 and R = 287.053 J/(kg·K) (US76). It is used for the Mach warning,
// not for corrections.
func SpeedOfSoundMPerS(tempK float64) float64 {
	return math.Sqrt(gammaAir * isaRAir * tempK)
}
