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
	{Name: "zone", Type: TypeText, Kinds: kindsRoof, Doc: "roof zone of the row",
		Read: func(_ uint64, s *Segment) (any, bool) { return s.Zone, s.Zone != "" }},
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
	{Name: "cp_mean", Type: TypeFloat, Kinds: kindsRoof, Doc: "zone's area-weighted net pressure coefficient, mean over the block (negative = uplift)",
		Read: valueX(func(s *Segment) calibrate.Value { return s.CpMean }, nil)},
	{Name: "cp_u95", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty of cp_mean",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.CpMean }, nil)},
	{Name: "cp_rms", Type: TypeFloat, Kinds: kindsRoof, Doc: "standard deviation of the zone's net Cp over the block",
		Read: number(func(s *Segment) float64 { return s.CpRMS })},
	{Name: "cp_peak", Type: TypeFloat, Kinds: kindsRoof, Doc: "expected extreme (most negative) net Cp of the block, from a Gumbel fit of epoch minima",
		Read: number(func(s *Segment) float64 { return s.CpPeak })},
	{Name: "uplift_n", Unit: "N", Type: TypeFloat, Kinds: kindsRoof, Doc: "mean net force on the zone (negative = upward)",
		Read: valueX(func(s *Segment) calibrate.Value { return s.UpliftN }, nil)},
	{Name: "uplift_u95_n", Unit: "N", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty of uplift_n",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.UpliftN }, nil)},
	{Name: "design_cp", Type: TypeFloat, Kinds: kindsRoof, Doc: "zone's design net Cp; absent without a design value",
		Read: valueX(func(s *Segment) calibrate.Value { return s.DesignCp }, nil)},
	{Name: "design_cp_u95", Type: TypeFloat, Kinds: kindsRoof, Doc: "expanded uncertainty of design_cp",
		Read: valueU95(func(s *Segment) calibrate.Value { return s.DesignCp }, nil)},
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

func finiteOK(x float64) (any, bool) { return x, !math.IsNaN(x) && !math.IsInf(x, 0) }
