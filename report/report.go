package report

import (
	"errors"
	"fmt"
	"math"
	"os"
	"sort"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// Options sets Build. A zero Options reads a relative design-curve path
// from the current directory, stamps the report with time.Now and the
// version "dev", and lets FitPolar choose the linear range.
type Options struct {
	// RigDir is the folder that a relative [lift] design path in the stored
	// rig file is read from (the folder of the rig file when the run was
	// recorded). Empty means the current directory.
	RigDir string
	// Now gives the report time printed in the report. Nil means time.Now.
	// Fix it for byte-for-byte reproducible output.
	Now func() time.Time
	// Version is the liftyard version printed with the methods. Empty
	// means "dev".
	Version string
	// Polar sets the lift-curve fit (zero: automatic linear range).
	Polar estimate.PolarOptions
}

// CalibrationUse is one stored calibration record that a run used.
type CalibrationUse struct {
	ID         string
	Channel    string
	Created    time.Time
	ValidUntil time.Time // zero: no end of validity stated
	// Expired is true when the record's validity had ended when the run
	// started.
	Expired bool
	// Missing says why the record could not be read (empty when it was).
	Missing string
}

// Report is everything known about one run, ready to render. It is data:
// WriteHTML renders it, and tests may inspect it.
type Report struct {
	Generated time.Time // when the report was made (Options.Now)
	Version   string    // liftyard version (Options.Version)

	Run      storage.Run
	Duration time.Duration // Ended − Started; zero while recording with no end
	// Rig is the rig file stored with the run, parsed; nil when the run has
	// none or it no longer parses (Notes says so).
	Rig *rig.Rig

	Sources  []acquire.HealthSnapshot
	Channels []acquire.ChannelHealth
	Loads    []calibrate.LoadHealth
	Drift    []calibrate.DriftLine

	Calibrations []CalibrationUse
	Events       []storage.Event

	Segments []estimate.Segment

	// Polar is the lift-curve fit; nil when it could not be made
	// (PolarProblem says why) or does not apply to the rig kind (a rotor's
	// C_L(S), a roof's zones).
	Polar        *estimate.Polar
	PolarProblem string

	// Design is the design curve the run is compared with; nil when the rig
	// names none or it could not be read (DesignProblem says why).
	Design        estimate.Design
	DesignProblem string
	// Comparison of the points with Design; nil without a design.
	Comparison *estimate.Comparison

	// SpinDesign is a rotor's design against the spin ratio (its rows
	// carry design_cl and En at their S); nil for other kinds or none.
	SpinDesign *estimate.SpinDesignCurve
	// SpinCurve is a rotor's fitted C_L(S); nil for other kinds or when it
	// could not be made (SpinCurveProblem says why).
	SpinCurve        *estimate.SpinCurve
	SpinCurveProblem string

	// Notes are what the report could not do, in plain words.
	Notes []string
}

// Build gathers the report of run runID. It fails when the run cannot be
// read (an error wrapping storage.ErrNotFound for an unknown run); a
// missing part (design file, polar fit, stored rig) becomes a note in the
// report instead.
func Build(store *storage.Store, runID uint64, opts Options) (*Report, error) {
	if store == nil {
		return nil, errors.New("report: no store")
	}
	now := time.Now
	if opts.Now != nil {
		now = opts.Now
	}
	r := &Report{Generated: now(), Version: opts.Version}
	if r.Version == "" {
		r.Version = "dev"
	}
	run, err := store.Run(runID)
	if err != nil {
		return nil, fmt.Errorf("report of run %d: %w", runID, err)
	}
	r.Run = run
	if !run.Ended.IsZero() && run.Ended.After(run.Started) {
		r.Duration = run.Ended.Sub(run.Started)
	}
	r.Sources, r.Channels, r.Loads, r.Drift = run.Sources, run.Channels, run.Loads, run.Drift

	if r.Segments, err = store.Segments(runID); err != nil {
		return nil, fmt.Errorf("report of run %d: %w", runID, err)
	}
	if r.Events, err = store.Events(runID); err != nil {
		return nil, fmt.Errorf("report of run %d: %w", runID, err)
	}
	if err := r.readCalibrations(store); err != nil {
		return nil, fmt.Errorf("report of run %d: %w", runID, err)
	}

	switch {
	case run.RigTOML == "":
		r.Notes = append(r.Notes, "the run has no stored rig file: reference length, span, conditions and the design curve are not known to this report")
	default:
		rg, err := rig.Parse("", []byte(run.RigTOML))
		if err != nil {
			r.Notes = append(r.Notes, "the rig file stored with the run does not parse with this liftyard version: "+err.Error())
		} else {
			r.Rig = rg
		}
	}

	r.fitPolar(opts.Polar)
	r.fitSpin()
	r.compare(opts.RigDir)
	return r, nil
}

// readCalibrations resolves the stored calibration ids the run used.
func (r *Report) readCalibrations(store *storage.Store) error {
	ids, err := store.RunCalibrations(r.Run.ID)
	if err != nil {
		return err
	}
	for _, id := range ids {
		u := CalibrationUse{ID: id}
		rec, err := store.Calibration(id)
		if err != nil {
			u.Missing = "not found in this store"
			if !errors.Is(err, storage.ErrNotFound) {
				u.Missing = "cannot be read: " + err.Error()
			}
			r.Calibrations = append(r.Calibrations, u)
			continue
		}
		u.Channel, u.Created, u.ValidUntil = rec.Channel, rec.Created, rec.ValidUntil
		u.Expired = rec.Expired(r.Run.Started)
		r.Calibrations = append(r.Calibrations, u)
	}
	sort.SliceStable(r.Calibrations, func(i, j int) bool {
		a, b := r.Calibrations[i], r.Calibrations[j]
		if a.Channel != b.Channel {
			return a.Channel < b.Channel
		}
		return a.ID < b.ID
	})
	return nil
}

func (r *Report) fitPolar(po estimate.PolarOptions) {
	if !r.section().liftCurve {
		return // the kind's rows are not C_L(α) (kinds.go)
	}
	if len(r.Segments) == 0 {
		r.PolarProblem = "no steady segments: no lift curve"
		return
	}
	p, err := estimate.FitPolar(r.Segments, po)
	if err != nil {
		r.PolarProblem = "no lift-curve fit: " + err.Error()
		return
	}
	r.Polar = &p
}

// loadDesign builds the design the stored rig names: the thin-airfoil
// theory curve on the rig's aspect ratio, or a design-curve CSV read
// relative to rigDir.
func (r *Report) loadDesign(rigDir string) {
	if r.Rig == nil || r.Rig.Lift.Design == "" {
		return
	}
	d := r.Rig.Lift.Design
	if r.section().spin {
		r.loadSpinDesign(rigDir)
		return
	}
	if d == rig.DesignThinAirfoil {
		r.Design = estimate.ThinAirfoil{AspectRatio: r.Rig.Reference.AspectRatio(), AlphaZeroRad: r.Rig.Lift.DesignAlphaZeroRad}
		return
	}
	f, err := rig.OpenInDir(rigDir, d)
	if err != nil {
		r.DesignProblem = fmt.Sprintf("the design curve %q named in the rig file cannot be read (%v); give the rig file's folder with --rig-dir", d, unwrapPath(err))
		return
	}
	defer f.Close()
	c, err := estimate.ParseDesignCurve(f, d)
	if err != nil {
		r.DesignProblem = "the design curve cannot be used: " + err.Error()
		return
	}
	r.Design = c
}

// unwrapPath drops the absolute path from an *os.PathError, so the report
// does not depend on where it was made.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

func (r *Report) compare(rigDir string) {
	r.loadDesign(rigDir)
	if r.DesignProblem != "" {
		r.Notes = append(r.Notes, r.DesignProblem)
	}
	if r.Design == nil || !r.section().design {
		return
	}
	c := estimate.Compare(r.Segments, r.Design, r.Polar)
	r.Comparison = &c
}

// DriftUnit returns the SI unit of a channel's drift, from the stored rig
// ("" when the rig or channel is not known).
func (r *Report) DriftUnit(channel string) string {
	if r.Rig == nil {
		return ""
	}
	if ch, ok := r.Rig.Channel(channel); ok {
		return ch.Quantity.SIUnit()
	}
	return ""
}

// AlphaRangeDeg returns the smallest and largest angle of the segments
// with a finite C_L, in degrees (NaN when there are none).
func (r *Report) AlphaRangeDeg() (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, s := range r.Segments {
		if finite(s.CL.X) && finite(s.AlphaRad.X) {
			lo, hi = math.Min(lo, s.AlphaRad.X), math.Max(hi, s.AlphaRad.X)
		}
	}
	if lo > hi {
		return math.NaN(), math.NaN()
	}
	return rig.Deg(lo), rig.Deg(hi)
}

func finite(f float64) bool { return !math.IsNaN(f) && !math.IsInf(f, 0) }
