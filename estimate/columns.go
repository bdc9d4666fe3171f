package estimate

import (
	"math"
	"time"

	"liftyard/calibrate"
	"liftyard/rig"
)

// ColumnType is how the values of a Column are written.
type ColumnType int

// Column types. The Go type that Column.Read returns is given for each.
const (
	TypeInt   ColumnType = iota // int64: a count or an index
	TypeFloat                   // float64: a finite number (NaN and ±Inf are never present)
	TypeText                    // string
	TypeTime                    // time.Time, written as RFC 3339 in UTC (TimeLayout)
	TypeBool                    // bool
)

// Column is one field of a result row: one line of the result schema that
// the segment exports (CSV and JSON), the HTTP API, the MQTT segment
// message and the report all render from. Adding a field to every output
// means adding one Column to the table in columns.go.
type Column struct {
	// Name is the JSON key and the CSV header: snake_case with the unit as
	// suffix (DEVELOPERS.md "Units in names": q_pa, q_u95_pa, alpha_deg). "_u95" marks an expanded
	// uncertainty U = k·u at 95 % coverage (calibrate.Value.U95).
	Name string
	// Unit is the unit of the values, for headers and docs; "" for a
	// dimensionless number, a count, a text or a time.
	Unit string
	Type ColumnType
	// Kinds lists the rig kinds whose rows carry the column. On a row of
	// any other kind the column is absent (JSON) or empty (CSV), never 0.
	Kinds []rig.Kind
	// Doc says in one line what the value is (docs/columns.md).
	Doc string
	// Read returns the column's value for segment s of run, of the Go type
	// that Type names, and whether s has one: false when the quantity was
	// not measured (the zero calibrate.Value), could not be computed (NaN)
	// or was not compared (no design value). Read is only called on rows
	// of one of Kinds.
	Read func(run uint64, s *Segment) (v any, ok bool)
}

// AppliesTo reports whether rows of rig kind k carry the column.
func (c *Column) AppliesTo(k rig.Kind) bool {
	for _, kk := range c.Kinds {
		if kk == k {
			return true
		}
	}
	return false
}

// TimeLayout is the one time format of result rows in exports, the API and
// MQTT: RFC 3339 in UTC, with as many fractional digits as the time needs
// (none on a whole second).
const TimeLayout = time.RFC3339Nano

// Kind sets of the result table.
var (
	kindsAll     = []rig.Kind{rig.KindFoil, rig.KindBody, rig.KindRotor, rig.KindRoof}
	kindsBalance = []rig.Kind{rig.KindFoil, rig.KindBody, rig.KindRotor} // force-balance rigs: polar points
	kindsRotor   = []rig.Kind{rig.KindRotor}
	kindsRoof    = []rig.Kind{rig.KindRoof} // one row is one zone in one block of time
)

// columns is the result schema, in output order. Names and units follow
// DEVELOPERS.md "Units in names"; the docs list it in docs/columns.md (a test keeps them equal).
var columns = []Column{
	{Name: "run", Type: TypeInt, Kinds: kindsAll, Doc: "run id in the store",
		Read: func(run uint64, _ *Segment) (any, bool) { return int64(run), true }},
	{Name: "segment", Type: TypeInt, Kinds: kindsAll, Doc: "row number within the run, from 0 (roofs: one zone in one block)",
		Read: func(_ uint64, s *Segment) (any, bool) { return int64(s.Index), true }},
	{Name: "kind", Type: TypeText, Kinds: kindsAll, Doc: "rig kind of the row (foil, body, rotor, roof): it decides which columns are present",
		Read: func(_ uint64, s *Segment) (any, bool) { return string(s.Kind), s.Kind != "" }},
	{Name: "t_start", Type: TypeTime, Kinds: kindsAll, Doc: "first sample used (device clock), RFC 3339 UTC",
		Read: timeOf(func(s *Segment) time.Time { return s.TStart })},
	{Name: "t_end", Type: TypeTime, Kinds: kindsAll, Doc: "last sample used (device clock), RFC 3339 UTC",
		Read: timeOf(func(s *Segment) time.Time { return s.TEnd })},
	{Name: "n", Type: TypeInt, Kinds: kindsAll, Doc: "samples used",
		Read: func(_ uint64, s *Segment) (any, bool) { return int64(s.N), true }},
	{Name: "n_eff", Type: TypeFloat, Kinds: kindsAll, Doc: "effective number of independent samples (autocorrelation); absent when it could not be estimated",
		Read: number(func(s *Segment) float64 { return s.NEff })},
	{Name: "n_eff_low", Type: TypeBool, Kinds: kindsAll, Doc: "n_eff below 12 (MinNEff): the segment is too short for its own correlation time, and its U95 rests on few degrees of freedom; hold the step longer",
		Read: func(_ uint64, s *Segment) (any, bool) { return s.FewIndependent(), !math.IsNaN(s.NEff) }},
	{Name: "zone", Type: TypeText, Kinds: kindsRoof, Doc: "roof zone of the row (a tap row: the tap's zone)",
		Read: func(_ uint64, s *Segment) (any, bool) { return s.Zone, s.Zone != "" }},
	{Name: "tap", Type: TypeText, Kinds: kindsRoof, Doc: "per-tap rows: the tap's name; absent on zone rows",
		Read: func(_ uint64, s *Segment) (any, bool) { return s.Tap, s.Tap != "" }},
	{Name: "block", Type: TypeInt, Kinds: kindsRoof, Doc: "block of time the row belongs to, from 0; absent on rows stored before blocks were numbered",
		Read: func(_ uint64, s *Segment) (any, bool) { return int64(s.Block), s.Block >= 0 }},
	{Name: "alpha_deg", Unit: "°", Type: TypeFloat, Kinds: kindsBalance, Doc: "angle of attack, mean over the segment",
		Read: valueX(func(s *Segment) calibrate.Value { return s.AlphaRad }, rig.Deg)},
	{Name: "alpha_u95_deg", Unit: "°", Type: TypeFloat, Kinds: kindsBalance, Doc: "expanded uncertainty of alpha_deg",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.AlphaRad }, rig.Deg)},
	{Name: "q_pa", Unit: "Pa", Type: TypeFloat, Kinds: kindsAll, Doc: "dynamic pressure ½ρV², mean",
		Read: valueX(func(s *Segment) calibrate.Value { return s.QPa }, nil)},
	{Name: "q_u95_pa", Unit: "Pa", Type: TypeFloat, Kinds: kindsAll, Doc: "expanded uncertainty of q_pa",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.QPa }, nil)},
	{Name: "speed_m_s", Unit: "m/s", Type: TypeFloat, Kinds: kindsAll, Doc: "flow speed, mean",
		Read: valueX(func(s *Segment) calibrate.Value { return s.SpeedMPerS }, nil)},
	{Name: "speed_u95_m_s", Unit: "m/s", Type: TypeFloat, Kinds: kindsAll, Doc: "expanded uncertainty of speed_m_s",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.SpeedMPerS }, nil)},
	{Name: "rho_kg_m3", Unit: "kg/m³", Type: TypeFloat, Kinds: kindsAll, Doc: "fluid density used",
		Read: positive(func(s *Segment) float64 { return s.RhoKgPerM3 })},
	{Name: "mu_pa_s", Unit: "Pa·s", Type: TypeFloat, Kinds: kindsAll, Doc: "dynamic viscosity used",
		Read: positive(func(s *Segment) float64 { return s.MuPaS })},
	{Name: "re", Type: TypeFloat, Kinds: kindsBalance, Doc: "Reynolds number on the reference length",
		Read: nonzero(func(s *Segment) float64 { return s.Re })},
	{Name: "fn", Type: TypeFloat, Kinds: kindsBalance, Doc: "Froude number V/√(g·L) on the reference length; water rigs only",
		Read: nonzero(func(s *Segment) float64 { return s.Fn })},
	{Name: "lift_n", Unit: "N", Type: TypeFloat, Kinds: kindsBalance, Doc: "lift (wind axes), mean",
		Read: valueX(func(s *Segment) calibrate.Value { return s.LiftN }, nil)},
	{Name: "lift_u95_n", Unit: "N", Type: TypeFloat, Kinds: kindsBalance, Doc: "expanded uncertainty of lift_n",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.LiftN }, nil)},
	{Name: "drag_n", Unit: "N", Type: TypeFloat, Kinds: kindsBalance, Doc: "drag (wind axes), mean",
		Read: valueX(func(s *Segment) calibrate.Value { return s.DragN }, nil)},
	{Name: "drag_u95_n", Unit: "N", Type: TypeFloat, Kinds: kindsBalance, Doc: "expanded uncertainty of drag_n",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.DragN }, nil)},
	{Name: "cl", Type: TypeFloat, Kinds: kindsBalance, Doc: "lift coefficient C_L = L/(q·S)",
		Read: valueX(func(s *Segment) calibrate.Value { return s.CL }, nil)},
	{Name: "cl_u95", Type: TypeFloat, Kinds: kindsBalance, Doc: "expanded uncertainty of cl",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.CL }, nil)},
	{Name: "cd", Type: TypeFloat, Kinds: kindsBalance, Doc: "drag coefficient C_D = D/(q·S)",
		Read: valueX(func(s *Segment) calibrate.Value { return s.CD }, nil)},
	{Name: "cd_u95", Type: TypeFloat, Kinds: kindsBalance, Doc: "expanded uncertainty of cd",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.CD }, nil)},
	{Name: "spin_ratio", Type: TypeFloat, Kinds: kindsRotor, Doc: "spin ratio S = ωR/V",
		Read: number(func(s *Segment) float64 { return s.SpinRatio })},
	{Name: "spin_ratio_u95", Type: TypeFloat, Kinds: kindsRotor, Doc: "expanded uncertainty of spin_ratio (tachometer, radius, speed); absent in rows stored before it was computed",
		Read: func(_ uint64, s *Segment) (any, bool) {
			if !(s.SpinRatioU > 0) {
				return nil, false
			}
			return finiteOK(s.SpinRatioValue().U95())
		}},
	{Name: "design_cl", Type: TypeFloat, Kinds: kindsBalance, Doc: "design C_L at the segment's angle; absent without a design value",
		Read: valueX(func(s *Segment) calibrate.Value { return s.DesignCL }, nil)},
	{Name: "design_cl_u95", Type: TypeFloat, Kinds: kindsBalance, Doc: "expanded uncertainty of design_cl",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.DesignCL }, nil)},
	{Name: "cp_mean", Type: TypeFloat, Kinds: kindsRoof, Doc: "area-weighted net pressure coefficient p̄/q̄ of the zone (or tap) over the block (negative = uplift)",
		Read: valueX(func(s *Segment) calibrate.Value { return s.CpMean }, nil)},
	{Name: "cp_u95", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty of cp_mean",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.CpMean }, nil)},
	{Name: "cp_rms", Type: TypeFloat, Kinds: kindsRoof, Doc: "standard deviation of the net pressure over the block, over q̄",
		Read: number(func(s *Segment) float64 { return s.CpRMS })},
	{Name: "cp_min", Type: TypeFloat, Kinds: kindsRoof, Doc: "most negative net pressure sample of the block, over q̄",
		Read: number(func(s *Segment) float64 { return s.CpMin })},
	{Name: "cp_max", Type: TypeFloat, Kinds: kindsRoof, Doc: "most positive net pressure sample of the block, over q̄",
		Read: number(func(s *Segment) float64 { return s.CpMax })},
	{Name: "cp_peak", Type: TypeFloat, Kinds: kindsRoof, Doc: "block peak suction: the value the block's most negative net Cp stays above with probability 0.78 (Hermite-translated Gaussian peak calibrated on epoch minima, docs/roof.md §5)",
		Read: number(func(s *Segment) float64 { return s.CpPeak })},
	{Name: "cp_peak_u95", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty (k = 2) of cp_peak: the fit's sampling error and q̄",
		Read: number(func(s *Segment) float64 { return u95Of(s.CpPeak, s.CpPeakU) })},
	{Name: "cp_peak_max", Type: TypeFloat, Kinds: kindsRoof, Doc: "block peak positive net Cp, the same method on the block's maxima",
		Read: number(func(s *Segment) float64 { return s.CpPeakMax })},
	{Name: "cp_peak_max_u95", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty (k = 2) of cp_peak_max",
		Read: number(func(s *Segment) float64 { return u95Of(s.CpPeakMax, s.CpPeakMaxU) })},
	{Name: "cp_int", Type: TypeFloat, Kinds: kindsRoof, Doc: "internal pressure coefficient over the block (the rig's fixed cp, or the internal channel's p̄/q̄)",
		Read: valueX(func(s *Segment) calibrate.Value { return s.CpInt }, nil)},
	{Name: "cp_int_u95", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty of cp_int (0 for a fixed cp)",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.CpInt }, nil)},
	{Name: "uplift_n", Unit: "N", Type: TypeFloat, Kinds: kindsRoof, Doc: "mean net force on the zone (negative = upward); uplift_n/(q_pa·area) = cp_mean",
		Read: valueX(func(s *Segment) calibrate.Value { return s.UpliftN }, nil)},
	{Name: "uplift_u95_n", Unit: "N", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty of uplift_n",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.UpliftN }, nil)},
	{Name: "q_at", Type: TypeText, Kinds: kindsRoof, Doc: "where q_pa is: \"mast\" (no reference height declared) or \"reference height (log law)\" / \"(power law)\"",
		Read: func(_ uint64, s *Segment) (any, bool) { return s.QAt, s.QAt != "" }},
	{Name: "q_height_m", Unit: "m", Type: TypeFloat, Kinds: kindsRoof, Doc: "height q_pa refers to; absent when the rig declares no heights",
		Read: positive(func(s *Segment) float64 { return s.QHeightM })},
	{Name: "turbulence_intensity", Type: TypeFloat, Kinds: kindsRoof, Doc: "σ_V/V̄ of the mast's speed over the block",
		Read: number(func(s *Segment) float64 { return s.TurbulenceIntensity })},
	{Name: "direction_deg", Unit: "°", Type: TypeFloat, Kinds: kindsRoof, Doc: "circular mean wind direction over the block, from north; absent without a vane",
		Read: number(func(s *Segment) float64 { return rig.Deg(s.DirectionRad) })},
	{Name: "direction_spread_deg", Unit: "°", Type: TypeFloat, Kinds: kindsRoof, Doc: "circular standard deviation of the direction over the block",
		Read: number(func(s *Segment) float64 { return rig.Deg(s.DirectionSpreadRad) })},
	{Name: "sector_deg", Unit: "°", Type: TypeFloat, Kinds: kindsRoof, Doc: "centre of the block's direction sector ([wind] sector_deg wide)",
		Read: number(func(s *Segment) float64 { return rig.Deg(s.SectorRad) })},
	{Name: "sector_left", Type: TypeBool, Kinds: kindsRoof, Doc: "more than 10 % of the block's samples lie outside its sector: the direction wandered",
		Read: func(_ uint64, s *Segment) (any, bool) { return s.SectorLeft(), finite(s.SectorOutFrac) }},
	{Name: "samples_unblocked", Type: TypeInt, Kinds: kindsRoof, Doc: "whole-roof rows: samples since the previous block that fell in no block (short or unusable stretches)",
		Read: func(_ uint64, s *Segment) (any, bool) {
			return int64(s.SamplesUnblocked), s.Zone == RoofZoneWhole && s.Tap == ""
		}},
	{Name: "design_cp", Type: TypeFloat, Kinds: kindsRoof, Doc: "zone's design net Cp put on q̄ (a value on the peak velocity pressure times 1 + 7·I_v); absent without a design value",
		Read: valueX(func(s *Segment) calibrate.Value { return s.DesignCp }, nil)},
	{Name: "design_cp_u95", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty of design_cp",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.DesignCp }, nil)},
	{Name: "design_vs", Type: TypeText, Kinds: kindsRoof, Doc: "the result design_cp is compared with: cp_mean, cp_peak or cp_peak_max",
		Read: func(_ uint64, s *Segment) (any, bool) { return s.DesignVs, s.DesignVs != "" }},
	{Name: "design_side", Type: TypeText, Kinds: kindsRoof, Doc: "\"agrees\", or on which side of the design value the result lies: \"more suction\" or \"less suction\"",
		Read: func(_ uint64, s *Segment) (any, bool) {
			en, ok := comparedEn(s)
			if !ok {
				return nil, false
			}
			return DesignSide(en), true
		}},
	{Name: "en", Type: TypeFloat, Kinds: kindsAll, Doc: "normalised error E_n against the design value (design_cl, or design_cp on roofs)",
		Read: func(_ uint64, s *Segment) (any, bool) {
			en, ok := comparedEn(s)
			return en, ok
		}},
	{Name: "agrees", Type: TypeBool, Kinds: kindsAll, Doc: "|E_n| ≤ 1: the result agrees with its design value (Agrees)",
		Read: func(_ uint64, s *Segment) (any, bool) {
			en, ok := comparedEn(s)
			if !ok {
				return nil, false
			}
			return Agrees(en)
		}},
}

// Columns returns the result schema in output order. The slice is shared:
// callers must not modify it.
func Columns() []Column { return columns }

// ColumnsFor returns the columns that apply to at least one of kinds, in
// output order: the header of an export that holds rows of those kinds.
// With no kinds it returns every column.
func ColumnsFor(kinds ...rig.Kind) []Column {
	if len(kinds) == 0 {
		return columns
	}
	var out []Column
	for _, c := range columns {
		for _, k := range kinds {
			if c.AppliesTo(k) {
				out = append(out, c)
				break
			}
		}
	}
	return out
}

// columnIndex maps a column name to its place in columns.
var columnIndex = func() map[string]int {
	m := make(map[string]int, len(columns))
	for i, c := range columns {
		m[c.Name] = i
	}
	return m
}()

// KindOf returns the rig kind of a result row: s.Kind when the producer
// set it; else (rows stored before Segment.Kind existed) a roof when the
// row has a zone, else runKind (the kind of the run's rig) unless that is a
// roof, else a rotor when it has a spin ratio, else a foil.
func KindOf(s *Segment, runKind rig.Kind) rig.Kind {
	switch {
	case s.Kind != "":
		return s.Kind
	case s.Zone != "":
		return rig.KindRoof
	case runKind != "" && runKind != rig.KindRoof:
		return runKind
	case s.SpinRatio != 0:
		return rig.KindRotor
	}
	return rig.KindFoil
}

// comparedEn returns the row's normalised error when the row has a design
// value to compare with (design_cl, or design_cp on a roof row) and En is
// a number.
func comparedEn(s *Segment) (float64, bool) {
	design := s.DesignCL
	if s.Kind == rig.KindRoof {
		design = s.DesignCp
	}
	if !measured(design) || !finite(s.En) {
		return 0, false
	}
	return s.En, true
}

// measured reports whether v holds a measurement: the zero Value means "not
// measured" and a non-finite X "could not be computed".
func measured(v calibrate.Value) bool {
	return v != (calibrate.Value{}) && finite(v.X)
}

func timeOf(f func(*Segment) time.Time) func(uint64, *Segment) (any, bool) {
	return func(_ uint64, s *Segment) (any, bool) {
		t := f(s)
		return t.UTC(), !t.IsZero()
	}
}

// conv converts a value for display (rig.Deg); nil keeps it.
type conv func(float64) float64

func valueX(f func(*Segment) calibrate.Value, c conv) func(uint64, *Segment) (any, bool) {
	return func(_ uint64, s *Segment) (any, bool) {
		v := f(s)
		if !measured(v) {
			return nil, false
		}
		return finiteOK(apply(c, v.X))
	}
}

func valueU95(f func(*Segment) calibrate.Value, c conv) func(uint64, *Segment) (any, bool) {
	return func(_ uint64, s *Segment) (any, bool) {
		v := f(s)
		if !measured(v) {
			return nil, false
		}
		return finiteOK(apply(c, v.U95()))
	}
}

func apply(c conv, x float64) float64 {
	if c == nil {
		return x
	}
	return c(x)
}

func number(f func(*Segment) float64) func(uint64, *Segment) (any, bool) {
	return func(_ uint64, s *Segment) (any, bool) { return finiteOK(f(s)) }
}

// positive is for a fluid property, which is never 0: 0 means "not set".
func positive(f func(*Segment) float64) func(uint64, *Segment) (any, bool) {
	return func(_ uint64, s *Segment) (any, bool) {
		x := f(s)
		return x, finite(x) && x > 0
	}
}

// nonzero is for a number that estimate leaves at 0 where it does not
// apply (Fn on air rigs, Re without a reference length).
func nonzero(f func(*Segment) float64) func(uint64, *Segment) (any, bool) {
	return func(_ uint64, s *Segment) (any, bool) {
		x := f(s)
		return x, finite(x) && x != 0
	}
}

// u95Of is the expanded uncertainty k·u (k = 2) of a value given by its
// standard uncertainty u; NaN when x is NaN.
func u95Of(x, u float64) float64 {
	if !finite(x) {
		return math.NaN()
	}
	return 2 * u
}

// DesignSide says on which side of its design value a roof result lies:
// "agrees" when |En| ≤ 1, else "more suction" (the result is more
// negative than the design) or "less suction".
func DesignSide(en float64) string {
	switch {
	case math.Abs(en) <= 1:
		return "agrees"
	case en < 0:
		return "more suction"
	}
	return "less suction"
}

func finiteOK(x float64) (any, bool) { return x, !math.IsNaN(x) && !math.IsInf(x, 0) }
