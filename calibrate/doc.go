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
// in the channel's unit (value = c0 + c1·r + c2·r² + …, ascending powers),
// followed by the unit's conversion to SI. It comes inline from the rig file
// or from a stored Record named by id (NewCalibratorFrom with a Lookup). Its
// standard uncertainty u travels with every calibrated Series as a Type B
// input: it is systematic within a run, so averaging many samples does not
// reduce it. A Calibrator turns an acquire.Block into a calibrated Block,
// keeping its timebase (AlignedT0Us included).
//
// # Fits
//
// FitPoly fits a calibration polynomial (order 1–3) from Points, each a
// reference value applied to the channel and the mean raw reading it gave;
// ReadPoints and WritePoints read and write them as CSV. FitPoly solves
// least squares by Householder QR on the centred and scaled reading, never
// by the normal equations, and maps the coefficients and their covariance
// back to powers of the raw reading exactly, so 24-bit counts in the
// millions keep their digits (tested on NIST StRD Norris and Pontius). The
// Fit carries the covariance, the residual SD, non-linearity and hysteresis
// in % of the loading reading span (docs/calibration.md), and warnings,
// among them an extra-sum-of-squares F-test on the highest-order term.
// Fit.ValueU and Record.Apply give the standard uncertainty of a calibrated
// value: the fitted curve's, combined with the reference standard's; the
// scatter of new readings is left to the run's own Type A evaluation.
//
// FitBalance fits the interaction matrix of a multi-component balance from
// combined loadings (linear, optionally with second-order products).
//
// # During a run
//
// ZeroWatch collects the flow-off stretches before and after a run:
// CaptureZero makes a zero of each, Drift corrects calibrated blocks for the
// zero and its linear drift between them. FitTare fits the weight tare of a
// model that pitches. LoadMonitor watches each rated channel against its
// capacity (warning at 80 %, alarm at 100 %).
//
// Bad points, loads or sweeps give an error wrapping ErrPoints that says
// what to change; a bad points file gives a *rig.Error (line and column)
// wrapping ErrPointsFile. No input panics.
//
// # Concurrency
//
// A Calibrator is immutable after it is built and may be shared. ZeroWatch
// and LoadMonitor are not safe for concurrent use; the recorder owns them.
//
// # References
//
// JCGM 100:2008, Evaluation of measurement data — Guide to the expression of
// uncertainty in measurement (GUM), Annex G. NIST/ITL Statistical Reference
// Datasets, linear least squares: Norris and Pontius, certified values.
package calibrate
