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
	TStart     time.Time // first sample used, UTC wall time (device clock mapped by acquire.Aligner)
	TEnd       time.Time // last sample used, UTC wall time
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
	SpinRatio  float64 // ωR/V for rotors; 0 otherwise
	// SpinRatioU is the standard uncertainty of SpinRatio (tachometer,
	// radius, speed; Estimator docs) and SpinRatioDof its degrees of
	// freedom; both 0 for other kinds and in rows stored before issue 12.
	SpinRatioU, SpinRatioDof float64
	DesignCL                 calibrate.Value // zero Value when no design curve applies
	En                       float64         // normalised error vs design; NaN when no design value
	CLBudget                 []Contribution
	CDBudget                 []Contribution

	// Roof rigs: one Segment is one zone (or one tap) in one block of time
	// (docs/design.md §4, docs/roof.md). Every coefficient is the block's
	// pressure over the block's mean q at the height QHeightM (p(t)/q̄).
	// Zone is empty for force-balance rigs.
	Zone                string
	Tap                 string          // per-tap rows: the tap's name (Zone is its zone); "" on zone rows
	Block               int             // roof rows: block number within the run, from 0
	CpMean              calibrate.Value // area-weighted net pressure coefficient p̄/q̄, mean over the block (negative = uplift)
	CpRMS               float64         // standard deviation of the net pressure over the block, / q̄
	CpMin               float64         // most negative net pressure sample of the block, / q̄
	CpMax               float64         // most positive net pressure sample of the block, / q̄
	CpPeak              float64         // block peak suction: the 78 % fractile of the block's minimum net Cp (docs/roof.md §5); NaN when it cannot be fitted
	CpPeakU             float64         // standard uncertainty of CpPeak (fit and q̄)
	CpPeakMax           float64         // block peak positive net Cp, the 78 % fractile of the block's maximum
	CpPeakMaxU          float64         // standard uncertainty of CpPeakMax
	CpInt               calibrate.Value // internal pressure coefficient over the block (fixed [internal] cp, or the channel's p̄/q̄)
	UpliftN             calibrate.Value // mean net force on the zone, N (negative = upward); UpliftN/(QPa·area) = CpMean
	DesignCp            calibrate.Value // the zone's design net Cp expressed on q̄ (U from its expanded design_u); zero Value when none
	DesignVs            string          // which result DesignCp is compared with: "cp_mean", "cp_peak" or "cp_peak_max"; "" without a design value
	QHeightM            float64         // height QPa refers to, m; 0 when the rig declares no heights
	QAt                 string          // where QPa is: "mast" or "reference height (log law)" / "(power law)"
	TurbulenceIntensity float64         // σ_V/V̄ at the mast over the block (V = √(2q/ρ))
	DirectionRad        float64         // circular mean wind direction over the block, rad from north in [0, 2π); NaN without a vane
	DirectionSpreadRad  float64         // circular standard deviation √(−2 ln R̄) of the direction, rad; NaN without a vane
	SectorRad           float64         // centre of the direction sector of the block, rad; NaN without a vane
	SectorOutFrac       float64         // fraction of the block's samples whose direction lies outside its sector; NaN without a vane
	SamplesUnblocked    int             // whole-roof rows: samples since the previous block that fell in no block (short or unusable stretches)
}

// SpinRatioValue returns the spin ratio with its standard uncertainty
// (a zero U when none was computed).
func (s *Segment) SpinRatioValue() calibrate.Value {
	return calibrate.Value{X: s.SpinRatio, U: s.SpinRatioU, Dof: s.SpinRatioDof}
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
	// SpinRatio is a rotor's spin ratio ωR/V over the window with its
	// standard uncertainty, and OmegaRadPerS its mean spin; both zero for
	// other kinds (and when no spin sample is in the window).
	SpinRatio    calibrate.Value
	OmegaRadPerS float64
	Steady       bool // the window lies inside a steady segment
	Segments     int  // segments completed so far in this run
	Warnings     []string
	Zones        []ZoneLive // roof rigs: each zone's net Cp over the window
	// Roof rigs with a vane: the window's circular mean direction and
	// spread, rad (NaN without a vane or a sample).
	DirectionRad, DirectionSpreadRad float64
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
	CpMin    float64         // most negative net Cp sample in the window, on the window's q̄
	DesignCp calibrate.Value
	En       float64 // NaN without a design value
}

// IdleWarningPrefix starts the live warning a stage gives when no block has
// reached it for a while. A consumer with a data-age clock per source (the
// recorder) says more — which source, since when — and drops this one.
const IdleWarningPrefix = "no new blocks for "
