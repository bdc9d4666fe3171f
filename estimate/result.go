package estimate

import (
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
)

// Contribution is one line of an uncertainty budget (JCGM 100 §8): how much
// one input adds to the standard uncertainty of a result.
type Contribution struct {
	Input       string  // what the input is, e.g. "normal force (type A)", "reference area"
	U           float64 // standard uncertainty of the input, in the input's SI unit
	Sensitivity float64 // sensitivity coefficient c_i = ∂y/∂x_i
	UY          float64 // |c_i|·u(x_i): contribution in the result's unit
	Dof         float64 // degrees of freedom of u(x_i) (+Inf when exact)
	// TypeA marks an input evaluated from the segment's own samples (JCGM
	// 100 §4.2): independent from one segment to the next. The others
	// (calibrations, reference area) are one error common to a whole run.
	TypeA bool
}

// Segment is one steady segment of a run: one polar point (docs/design.md §3.4).
// Dimensionless coefficients carry no unit suffix; every Value holds its
// standard uncertainty (U95() gives the expanded one).
type Segment struct {
	Index      int       // 0-based segment number within the run
	Kind       rig.Kind  // rig kind that produced the row; "" in rows stored before it was recorded (KindOf)
	TStart     time.Time // first sample used (device clock)
	TEnd       time.Time // last sample used (device clock)
	N          int       // samples used
	NEff       float64   // effective number of independent samples of C_L (autocorrelation)
	AlphaRad   calibrate.Value
	QPa        calibrate.Value
	SpeedMPerS calibrate.Value
	RhoKgPerM3 float64
	MuPaS      float64
	Re         float64 // Reynolds number on Reference.LengthM
	Fn         float64 // Froude number V/√(g·L) on Reference.LengthM, water rigs only; 0 otherwise
	LiftN      calibrate.Value
	DragN      calibrate.Value
	CL         calibrate.Value
	CD         calibrate.Value
	SpinRatio  float64         // ωR/V for rotors; 0 otherwise
	DesignCL   calibrate.Value // zero Value when no design curve applies
	En         float64         // normalised error vs design; NaN when no design value
	CLBudget   []Contribution
	CDBudget   []Contribution

	// Roof rigs: one Segment is one zone in one block of time (docs/design.md §4).
	// Zone is empty for force-balance rigs.
	Zone     string
	CpMean   calibrate.Value // zone's area-weighted net pressure coefficient, mean over the block (negative = uplift)
	CpRMS    float64         // standard deviation of the zone's net Cp over the block
	CpPeak   float64         // expected extreme (most negative) net Cp of the block, from a Gumbel fit of epoch minima
	UpliftN  calibrate.Value // mean net force on the zone, N (negative = upward)
	DesignCp calibrate.Value // the zone's design net Cp (U from its expanded design_u); zero Value when none
}

// FewIndependent reports whether the segment's N_eff is below MinNEff: its
// Type A uncertainty comes from too few independent samples to trust (a
// NaN N_eff is not flagged).
func (s *Segment) FewIndependent() bool { return FewIndependent(s.NEff) }

// Live is the moving-window estimate shown on the dashboard. It is computed
// by the same code as Segment, over the most recent window of samples.
type Live struct {
	T          time.Time // time of the newest sample (device clock)
	Window     time.Duration
	N          int
	AlphaRad   calibrate.Value
	QPa        calibrate.Value
	SpeedMPerS calibrate.Value
	RhoKgPerM3 float64
	Re         float64
	Fn         float64 // Froude number V/√(g·L), water rigs only; 0 otherwise
	LiftN      calibrate.Value
	DragN      calibrate.Value
	CL         calibrate.Value
	CD         calibrate.Value
	Steady     bool // the window lies inside a steady segment
	Segments   int  // segments completed so far in this run
	Warnings   []string
	Zones      []ZoneLive // roof rigs: each zone's net Cp over the window
	// TempK is the fluid temperature behind ρ and Re: the window's mean
	// of the temperature channel when TempMeasured, else the rig's fixed
	// conditions. 0: not given (roof rigs).
	TempK        float64
	TempMeasured bool
	// FlowOff: q is below 5 % of the run's maximum (or not positive).
	FlowOff bool
	// Withheld says why CL and CD are not given (left as the zero Value):
	// the flow is off, or no steady window has been seen yet in this run,
	// so the ratio of a force to a q near zero or in a start-up transient
	// would fill the screen with meaningless numbers. Empty: given.
	Withheld string
	// Sources is each source's data-age clock at Computed, and Stale says
	// that at least one of them is silent past its limit: the values are
	// then frozen at its last block (set by the recorder, not by Live).
	Sources  []acquire.SourceAge
	Stale    bool
	Computed time.Time // host time the estimate was taken; zero: unknown
}

// ZoneLive is one roof zone's moving-window estimate.
type ZoneLive struct {
	Zone     string
	CpMean   calibrate.Value // area-weighted net Cp over the window
	CpMin    float64         // most negative net Cp sample in the window
	DesignCp calibrate.Value
	En       float64 // NaN without a design value
}
