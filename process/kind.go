package process

import (
	"fmt"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// Stage is the estimation stage of one rig kind: the force-balance
// estimate.Estimator or the roof's estimate.RoofEstimator. The Pipeline
// owns it; it is not safe for concurrent use.
type Stage interface {
	// Add takes one calibrated block and returns the segments it completed
	// (a steady stretch; for a roof, one row per zone per block).
	Add(b *calibrate.Block) []estimate.Segment
	// Live is the moving-window estimate; false until there is one.
	Live() (estimate.Live, bool)
	// Flush closes the open segment at the end of the data.
	Flush() []estimate.Segment
}

// kind is what the pipeline does differently for one rig kind. kinds is
// the one place that maps a rig kind to its processing; the dashboard and
// the report pick their views in their own one place.
type kind struct {
	// stage builds the estimation stage.
	stage func(r *rig.Rig, opt Options) (Stage, error)
	// flowOffZero: the flow-off zeros before and after a run are taken and
	// applied (calibrate.ZeroWatch) — balance channels and the pitot.
	flowOffZero bool
	// marks: user marks can set the steady segments.
	marks bool
}

var kinds = map[rig.Kind]kind{
	rig.KindFoil:  {stage: balanceStage, flowOffZero: true, marks: true},
	rig.KindRotor: {stage: balanceStage, flowOffZero: true, marks: true},
	rig.KindBody:  {stage: balanceStage, flowOffZero: true, marks: true},
	// A roof's segments are fixed blocks of time, not steady stretches.
	// The zero watch zeroes the balance channels and the pitot; on a roof
	// it would zero the pitot alone while the taps kept their offsets, so
	// roof runs are recorded without it (docs/roof.md).
	rig.KindRoof: {stage: roofStage},
}

// kindOf returns the processing of r's kind; a rig file with no kind is a
// force-balance body (rig.Parse's default).
func kindOf(r *rig.Rig) (kind, error) {
	if r.Kind == "" {
		return kinds[rig.KindBody], nil
	}
	k, ok := kinds[r.Kind]
	if !ok {
		return kind{}, fmt.Errorf("rig %q: kind %q has no processing stage", r.Name, r.Kind)
	}
	return k, nil
}

// NewStage builds the estimation stage for r's kind with opt.
func NewStage(r *rig.Rig, opt Options) (Stage, error) {
	k, err := kindOf(r)
	if err != nil {
		return nil, err
	}
	if len(opt.Marks) > 0 && !k.marks {
		return nil, fmt.Errorf("user marks set the steady segments of a force-balance rig; a %s rig's segments are its fixed-length blocks", r.Kind)
	}
	return k.stage(r, opt)
}

// MarksApply reports whether user marks can set the segments of r's kind.
func MarksApply(r *rig.Rig) bool {
	k, err := kindOf(r)
	return err == nil && k.marks
}

func balanceStage(r *rig.Rig, opt Options) (Stage, error) {
	cfg := estimate.Config{Marks: opt.Marks, Now: opt.Now, Corrections: correctionInputs(r)}
	var err error
	if r.Kind == rig.KindRotor {
		cfg.SpinDesign, err = LoadSpinDesign(r)
	} else {
		cfg.Design, err = LoadDesign(r)
	}
	if err != nil {
		return nil, err
	}
	return estimate.NewEstimator(r, cfg)
}

func roofStage(r *rig.Rig, opt Options) (Stage, error) {
	cfg := opt.Roof
	if cfg.Now == nil {
		cfg.Now = opt.Now
	}
	return estimate.NewRoofEstimator(r, cfg)
}

// InputError is a problem with a file the user gave (a design curve named
// by the rig file): the command line exits 2 for it.
type InputError struct{ Err error }

func (e *InputError) Error() string { return e.Err.Error() }
func (e *InputError) Unwrap() error { return e.Err }

// LoadDesign returns the design lift curve the rig asks for in [lift]
// design: "thin-airfoil" (2π/rad with the span correction on the rig's
// aspect ratio, α_L0 from [lift] design_alpha_zero_deg, default 0), a design-curve CSV (rig.Parse has resolved a
// relative path against the rig file's folder), or nil for none. A missing
// or malformed CSV gives an *InputError.
func LoadDesign(r *rig.Rig) (estimate.Design, error) {
	switch d := r.Lift.Design; d {
	case "":
		return nil, nil
	case rig.DesignThinAirfoil:
		return estimate.ThinAirfoil{AspectRatio: r.Reference.AspectRatio(), AlphaZeroRad: r.Lift.DesignAlphaZeroRad}, nil
	default:
		f, err := r.Lift.OpenDesign()
		if err != nil {
			return nil, &InputError{fmt.Errorf("[lift] design: %w", err)}
		}
		defer f.Close()
		c, err := estimate.ParseDesignCurve(f, d)
		if err != nil {
			return nil, &InputError{fmt.Errorf("[lift] design: %w", err)}
		}
		return c, nil
	}
}

// LoadSpinDesign returns a rotor's design lift curve against the spin
// ratio from the CSV that [lift] design names (spin_ratio,cl[,cl_u95]), or
// nil for none. "thin-airfoil", a missing file or a file against α gives
// an *InputError: a rotor is never compared at its angle (issue 12).
func LoadSpinDesign(r *rig.Rig) (*estimate.SpinDesignCurve, error) {
	switch d := r.Lift.Design; d {
	case "":
		return nil, nil
	case rig.DesignThinAirfoil:
		return nil, &InputError{fmt.Errorf("[lift] design: %q is a foil's design; a rotor's design is a CSV against the spin ratio (spin_ratio,cl[,cl_u95])", d)}
	default:
		f, err := r.Lift.OpenDesign()
		if err != nil {
			return nil, &InputError{fmt.Errorf("[lift] design: %w", err)}
		}
		defer f.Close()
		c, err := estimate.ParseSpinDesignCurve(f, d)
		if err != nil {
			return nil, &InputError{fmt.Errorf("[lift] design: %w", err)}
		}
		return c, nil
	}
}

// CheckDesign loads the design file r names for its kind — a CSV against
// the spin ratio for a rotor, against α (or "thin-airfoil") for a foil or
// body — so `check` finds a missing file or a header of the wrong kind
// before a run. A roof's design values are its zones' design_cp: a [lift]
// design on a roof rig is an error.
func CheckDesign(r *rig.Rig) error {
	switch {
	case r.Lift.Design == "":
		return nil
	case r.Kind == rig.KindRoof:
		return &InputError{fmt.Errorf("[lift] design: a roof's design values are its zones' design_cp, not a design curve")}
	case r.Kind == rig.KindRotor:
		_, err := LoadSpinDesign(r)
		return err
	default:
		_, err := LoadDesign(r)
		return err
	}
}

// HasKind reports whether rig kind k has a processing stage.
func HasKind(k rig.Kind) bool {
	_, ok := kinds[k]
	return ok
}
