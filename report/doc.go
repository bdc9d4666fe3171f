// Package report gathers everything recorded about one run into a Report
// and renders it as one self-contained, printable HTML file that a test
// engineer can read, check and sign.
//
// # Model
//
// Build reads a run from the store (facts, source and channel health,
// loads, zero drift, calibrations used, events, segment results), parses
// the rig file stored with the run, and for a foil or other body fits the
// polar (estimate.FitPolar) and compares the points with the rig's design
// (a curve or thin-airfoil theory; estimate.Compare). A rotor's points are
// C_L against the spin ratio, with no lift-curve fit; a roof run is reported
// zone by zone and block by block against the zones' design Cp (roof.go).
// The Report it returns is plain data; WriteHTML renders it. Nothing is
// recomputed for display: every number comes from estimate or storage and
// is only rounded here.
//
// A problem that stops one part of the report (no design curve file, too
// few points for a lift-curve fit, a stored rig file that no longer parses)
// is written into the report as a note; Build fails only when the run
// cannot be read at all.
//
// # Output
//
// WriteHTML writes one HTML file with inline CSS and inline SVG plots
// (gonum/plot): no scripts, no external files, no web fonts. Sections break
// onto new pages when printed (A4 or Letter). Every string that came from a
// user (rig name, channel names, notes, event messages) is escaped by
// html/template. For a fixed Options.Now and the same store contents the
// output is byte-for-byte the same.
//
// # Rounding
//
// An expanded uncertainty U95 is shown to two significant digits and its
// value to the same decimal place (JCGM 100:2008 §7.2.6).
//
// # Cautions
//
// The report carries liftyard's cautions: results are test data, not a
// design approval; structural decisions follow the local code and a
// licensed engineer; rigs are loaded only within their rated capacities.
package report
