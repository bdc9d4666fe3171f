// Package sim is a simulated foil tow rig: it produces the raw readings that a
// real rig's amplifiers would send (24-bit ADC counts from load cells, a
// pitot Δp transducer, an angle encoder, a temperature probe) for a foil swept
// through angle of attack in steps.
//
// # Model
//
// The flow has a mean dynamic pressure Config.QPa with turbulence: the speed
// fluctuation u′/U is a first-order autoregressive (AR(1)) process with
// intensity Config.TurbulenceIntensity and integral time scale
// Config.IntegralTimeS, so successive samples are correlated as they are in
// real turbulent flow, not white noise. The foil's true coefficients follow a
// simple invented model (a straight lift curve up to a stall angle, a drop
// after it, a parabolic drag polar); the loads follow the instantaneous q:
// L = C_L·q·S, D = C_D·q·S, resolved into the balance's body axes
// (N = L·cos α + D·sin α, A = D·cos α − L·sin α), split over the normal load
// cells, plus sensor noise and ADC quantisation. Readings are made raw by
// inverting each channel's calibration from the rig file, so the rig's own
// calibration turns them back into SI values.
//
// The model and its numbers are invented for demonstrations and tests; they
// describe no real foil. Truth returns the true coefficients at any angle so
// tests can check the estimates.
//
// # Concurrency
//
// A Rig is not safe for concurrent use. Run drives it in real time from one
// goroutine; Next generates blocks as fast as called, for tests.
package sim
