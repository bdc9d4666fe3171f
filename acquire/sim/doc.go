// Package sim simulates rigs: it produces the raw readings that a real rig's
// amplifiers would send, for demos, dry runs and tests. Rig (New) is a foil
// on a tow rig swept through angle of attack in steps; Roof (NewRoof) is a
// roof mock-up in a test yard with pressure taps. Both are acquire.Sources.
//
// # Model
//
// Foil. The flow has a mean dynamic pressure Config.QPa with turbulence: the
// speed fluctuation u′/U is a first-order autoregressive (AR(1)) process with
// intensity Config.TurbulenceIntensity and integral time scale
// Config.IntegralTimeS, so successive samples are correlated as they are in
// real turbulent flow, not white noise. The foil's true coefficients follow a
// simple invented model (a straight lift curve up to a stall angle, a drop
// after it, a parabolic drag polar); the loads follow the instantaneous q:
// L = C_L·q·S, D = C_D·q·S, resolved into the balance's body axes
// (N = L·cos α + D·sin α, A = D·cos α − L·sin α), split over the normal load
// cells. Optional flow-off stretches before and after the sweeps, and a
// linear zero drift of the load cells, exercise the flow-off zero.
//
// Roof. Each tap follows the reference q quasi-steadily, p_i(t) = Cp_i·q(t),
// plus its own AR(1) turbulence of separated flow; a reference pitot, an
// internal pressure channel when the rig has one and a wind vane complete
// the rig. RoofConfig.CalibrationErrors draws each channel's calibration
// error once per run, so coverage of the Type B budget can be tested.
//
// Both add sensor noise and make readings raw by inverting each channel's
// calibration from the rig file (rounded to whole counts when it is in ADC
// counts), so the rig's own calibration turns them back into SI values.
//
// The models and their numbers are invented for demonstrations and tests;
// they describe no real foil or building. Foil.Truth and Roof.TrueCp return
// the true values so tests can check the estimates.
//
// # Concurrency
//
// A Rig or Roof is not safe for concurrent use. Run drives it in real time
// from one goroutine, never blocking on a full out (the block is dropped and
// counted in Health); Next generates blocks as fast as called, for tests.
package sim
