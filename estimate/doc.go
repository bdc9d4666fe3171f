// Package estimate turns calibrated samples into physics: fluid properties,
// dynamic pressure, wind-axis forces, lift and drag coefficients with a GUM
// uncertainty, steady segments (one polar point each) and, for roofs, zone
// pressure coefficients with their peaks.
//
// # Model
//
// Foils, rotors and other bodies on a force balance (Estimator): the balance
// gives body-axis normal and axial forces N and A; a pitot-static tube gives
// q = C²·Δp (or a speed channel gives q = ½ρV²); an angle channel or a fixed
// setting gives α. Forces are turned to wind axes, L = N·cos α − A·sin α and
// D = N·sin α + A·cos α, and divided by q·S on the rig's reference area;
// a rotor's segments also carry the spin ratio S = ωR/V. Reduce does this
// for one window of samples and is the only place coefficients are
// computed; Estimator feeds it the live window and each steady segment,
// found by the steady test (SteadyConfig) or set by hand (Config.Marks).
//
// Roofs (RoofEstimator): tap pressures become net pressure coefficients per
// zone per block of time, area-weighted, with the RMS, the expected peak
// suction (a translated-Gaussian block peak at the Cook & Mayne probability) and the net
// uplift force; roof.go states the method.
//
// # Uncertainty
//
// Type A from the samples by the delta method (the loads and q are
// propagated together, so their gust-driven correlation is kept), with the
// uncertainty of each mean from its autocorrelation (TypeAMean: automatic
// window, bias-corrected, flagged below MinNEff); Type B from the calibrations (calibrate.Series.U, systematic),
// angle and reference area; combined in quadrature, Welch–Satterthwaite
// degrees of freedom, U95 = t_0.975(ν_eff)·u_c. MonteCarlo (JCGM 101) checks
// the linear propagation in the tests.
//
// # In and out
//
// In: *calibrate.Block values in SI units, the *rig.Rig. Out: Segment and
// Live (result.go), plus plain functions for fluids (Properties), flow
// (DynamicPressureFromPitot, Reynolds, Froude), polars (FitPolar) and the
// design comparison (Design, ParseDesignCurve, ThinAirfoil, En, Compare).
// The package does no I/O; Estimator and RoofEstimator are owned by one
// goroutine (Add, Live, Flush) and take the host clock from Config.Now; the
// functions are pure and safe for concurrent use.
//
// # Caveats
//
//   - Channels from several sources are joined on the aligned host timeline
//     (Block.AlignedT0Us, set by acquire.Aligner): read by linear
//     interpolation at each sample of the source carrying the normal force
//     (a roof: a tap), waiting up to JoinWait for late sources (join.go, one
//     joiner for every stage). The alignment is only as good as the
//     sources' smallest transport delay (acquire's Clock).
//   - q from a pitot is incompressible; Live warns above Mach 0.3.
//   - Water properties are at 1 atm and 0–40 °C; seawater at non-standard
//     salinity is scaled by the EOS-80 shape (≤ 0.035 kg/m³ off ITTC Table 4).
//   - Air density by CIPM-2007 is stated for 15–27 °C and 600–1100 hPa; it is
//     extrapolated outside.
//   - Results are test data, not a design approval: loads on rigs and
//     structures are for licensed engineers to judge under the local codes,
//     and rigs are loaded only within their rated capacities.
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
//   - EN 1991-1-4:2005 §5.2, §7.2.9 (net pressure); Cook & Mayne, J. Wind
//     Eng. Ind. Aerodyn. 4 (1979) 149 (Gumbel design value U + 1.4/a; from
//     memory, see gumbel.go).
package estimate
