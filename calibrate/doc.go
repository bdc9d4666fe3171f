// Package calibrate turns raw readings into values in SI units with their
// standard uncertainty.
//
// # Model
//
// Value{X, U, Dof} is a measured value with its standard uncertainty u and
// the degrees of freedom ν of u (JCGM 100:2008 §2.3, §G.3); U95 expands it
// with k = t_0.975(ν). Every stage downstream uses this one type.
//
// A channel's calibration is a polynomial from the raw reading to the value
// in the channel's unit (value = c0 + c1·r + c2·r² + …, ascending powers, as
// the rig file gives it), followed by the unit's conversion to SI. Its
// standard uncertainty u, from the rig file, travels with every calibrated
// series as a Type B input: it is systematic within a run, so averaging
// many samples does not reduce it.
//
// # Concurrency
//
// A Calibrator is immutable after NewCalibrator and may be shared.
//
// # References
//
// JCGM 100:2008, Evaluation of measurement data — Guide to the expression of
// uncertainty in measurement (GUM), Annex G.
package calibrate
