// Package estimate turns calibrated samples into physics: fluid properties,
// dynamic pressure, wind-axis forces, lift and drag coefficients with a GUM
// uncertainty, and steady segments (one polar point each).
//
// # Model
//
// A force balance gives body-axis normal and axial forces N and A; a
// pitot-static tube gives q = Δp/C² (or a speed channel gives q = ½ρV²); an
// angle channel or a fixed setting gives α. Forces are turned to wind axes,
// L = N·cos α − A·sin α and D = N·sin α + A·cos α, and divided by q·S on the
// rig's reference area. Reduce does this for one window of samples and is the
// only place coefficients are computed; Estimator feeds it the live window
// and each steady segment.
//
// # Uncertainty
//
// Type A from the samples by the delta method (the loads and q are
// propagated together, so their gust-driven correlation is kept), with the
// effective number of independent samples N_eff from the autocorrelation
// (NEff); Type B from the calibrations (calibrate.Series.U, systematic),
// angle and reference area; combined in quadrature, Welch–Satterthwaite
// degrees of freedom, U95 = t_0.975(ν_eff)·u_c. MonteCarlo (JCGM 101) checks
// the linear propagation in the tests.
//
// # In and out
//
// In: *calibrate.Block values in SI units, the *rig.Rig. Out: Segment and
// Live (result.go), Point from Reduce, and the plain functions for fluids
// (Properties, AirDensityCIPM2007, ISA, SutherlandMuPaS, water tables),
// flow (DynamicPressureFromPitot, SpeedFromQ, Reynolds, Froude), polars
// (FitPolar: lift slope, zero-lift angle, stall, C_L,max, drag polar) and
// design comparison (DesignCurve from a CSV the caller opens, ThinAirfoil,
// LiftingLineSlope, HelmboldSlope, DesignAt, En, Compare). The package does
// no I/O: ParseDesignCurve reads from an io.Reader its caller hands it.
//
// # Concurrency
//
// The functions are pure and safe for concurrent use. An Estimator is not:
// one goroutine owns it and serialises Add, Live and Flush.
//
// # Caveats
//
//   - q from a pitot is incompressible; Live warns above Mach 0.3.
//   - Sources other than the one carrying the normal force are joined by
//     holding their latest value (skeleton timebase; no clock alignment).
//   - Water properties are at 1 atm and 0–40 °C; seawater at non-standard
//     salinity is scaled by the EOS-80 shape (≤ 0.035 kg/m³ off ITTC Table 4).
//   - Air density by CIPM-2007 is stated for 15–27 °C and 600–1100 hPa; it is
//     extrapolated outside.
//   - Results are test data, not a design approval (DESIGN §6): loads on
//     rigs and structures are for licensed engineers to judge under the local
//     codes, and rigs are loaded only within their rated capacities.
//
// # References
//
//   - JCGM 100:2008 (GUM), JCGM 101:2008 (GUM Supplement 1).
//   - Picard, Davis, Gläser, Fujii, Metrologia 45 (2008) 149 (CIPM-2007).
//   - ISO 2533:1975 / US Standard Atmosphere 1976 (ISA, Sutherland eq. 51).
//   - ITTC Recommended Procedure 7.5-02-01-03 Rev 02 (2011), Fresh Water and
//     Seawater Properties; IAPWS-95, IAPWS-2008; Sharqawy, Lienhard & Zubair,
//     Desalination and Water Treatment 16 (2010) 354; Millero & Poisson,
//     Deep-Sea Res. 28A (1981) 625.
//   - Bayley & Hammersley, J. R. Stat. Soc. Suppl. 8 (1946) 184 (N_eff).
//   - Prandtl lifting line; Helmbold (1942); thin-airfoil theory (Abbott &
//     von Doenhoff, Theory of Wing Sections, Dover 1959).
package estimate
