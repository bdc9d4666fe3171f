package rig

import (
	"fmt"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"
)

// Unit factors. The exact ones follow from definitions; the others are
// rounded as NIST SP 811 (2008), Appendix B, prints them, and the tests check
// every entry against that table.
const (
	standardGravity = 9.80665    // m/s², exact (3rd CGPM 1901; SP 811 B.9 "kilogram-force 9.806 65 E+00")
	poundKg         = 0.45359237 // kg, exact (SP 811 footnote 22)
	inchM           = 0.0254     // m, exact
	footM           = 0.3048     // m, exact
	mileM           = 1609.344   // m, exact
	nauticalMileM   = 1852       // m, exact
	poundForceN     = poundKg * standardGravity
	// Conventional mmH2O: 1 mm of water of density 1000 kg/m³ under standard
	// gravity, exactly 9.806 65 Pa (SP 811 B.8/B.9).
	mmWaterConvPa = 1e-3 * 1000 * standardGravity
)

// unitDef is one accepted unit symbol.
type unitDef struct {
	symbol string
	q      Quantity
	toSI   Affine
	name   string // what it is, for docs and error hints
}

// units lists every symbol the rig file accepts, grouped by quantity. The
// first symbol of each quantity is its SI unit. Symbols are case sensitive
// (kN is a force, kn a speed), as SI symbols are.
var units = []unitDef{
	// pressure → Pa
	{"Pa", QuantityPressure, Affine{1, 0}, "pascal"},
	{"hPa", QuantityPressure, Affine{100, 0}, "hectopascal"},
	{"kPa", QuantityPressure, Affine{1000, 0}, "kilopascal"},
	{"mbar", QuantityPressure, Affine{100, 0}, "millibar"},
	{"bar", QuantityPressure, Affine{1e5, 0}, "bar"},
	// inH2O is the conventional inch of water (25.4 mm × 9.806 65 Pa/mm):
	// it depends on no water temperature, which is what a transducer rated
	// in "inH2O" without a temperature most often means. The 39.2 °F and
	// 60 °F inches have their own symbols for certificates that name them.
	{"inH2O", QuantityPressure, Affine{25.4 * mmWaterConvPa, 0}, "inch of water, conventional"},
	{"inH2O_39F", QuantityPressure, Affine{249.082, 0}, "inch of water at 39.2 °F"},
	{"inH2O_60F", QuantityPressure, Affine{248.84, 0}, "inch of water at 60 °F"},
	{"mmH2O", QuantityPressure, Affine{mmWaterConvPa, 0}, "millimetre of water, conventional"},
	{"psi", QuantityPressure, Affine{poundForceN / (inchM * inchM), 0}, "pound-force per square inch"},

	// force → N
	{"N", QuantityForce, Affine{1, 0}, "newton"},
	{"kN", QuantityForce, Affine{1000, 0}, "kilonewton"},
	{"kgf", QuantityForce, Affine{standardGravity, 0}, "kilogram-force"},
	{"lbf", QuantityForce, Affine{poundForceN, 0}, "pound-force"},

	// moment → N·m
	{"N*m", QuantityMoment, Affine{1, 0}, "newton metre"},
	{"N·m", QuantityMoment, Affine{1, 0}, "newton metre"},
	{"Nm", QuantityMoment, Affine{1, 0}, "newton metre"},
	{"kN*m", QuantityMoment, Affine{1000, 0}, "kilonewton metre"},
	{"kN·m", QuantityMoment, Affine{1000, 0}, "kilonewton metre"},
	{"lbf*ft", QuantityMoment, Affine{poundForceN * footM, 0}, "pound-force foot"},
	{"lbf·ft", QuantityMoment, Affine{poundForceN * footM, 0}, "pound-force foot"},

	// speed → m/s
	{"m/s", QuantitySpeed, Affine{1, 0}, "metre per second"},
	{"km/h", QuantitySpeed, Affine{1000.0 / 3600, 0}, "kilometre per hour"},
	{"kn", QuantitySpeed, Affine{nauticalMileM / 3600.0, 0}, "knot"},
	{"mph", QuantitySpeed, Affine{mileM / 3600, 0}, "mile per hour"},

	// temperature → K (affine)
	{"K", QuantityTemperature, Affine{1, 0}, "kelvin"},
	{"°C", QuantityTemperature, Affine{1, 273.15}, "degree Celsius"},
	{"degC", QuantityTemperature, Affine{1, 273.15}, "degree Celsius"},
	{"C", QuantityTemperature, Affine{1, 273.15}, "degree Celsius"},
	{"°F", QuantityTemperature, Affine{1 / 1.8, 459.67 / 1.8}, "degree Fahrenheit"},
	{"degF", QuantityTemperature, Affine{1 / 1.8, 459.67 / 1.8}, "degree Fahrenheit"},
	{"F", QuantityTemperature, Affine{1 / 1.8, 459.67 / 1.8}, "degree Fahrenheit"},

	// angle → rad
	{"rad", QuantityAngle, Affine{1, 0}, "radian"},
	{"deg", QuantityAngle, Affine{math.Pi / 180, 0}, "degree"},
	{"°", QuantityAngle, Affine{math.Pi / 180, 0}, "degree"},

	// rotation → rad/s
	{"rad/s", QuantityRotation, Affine{1, 0}, "radian per second"},
	{"rpm", QuantityRotation, Affine{2 * math.Pi / 60, 0}, "revolution per minute"},
	{"r/min", QuantityRotation, Affine{2 * math.Pi / 60, 0}, "revolution per minute"},
	{"Hz", QuantityRotation, Affine{2 * math.Pi, 0}, "revolution per second"},
	{"rev/s", QuantityRotation, Affine{2 * math.Pi, 0}, "revolution per second"},

	// humidity → fraction
	{"fraction", QuantityHumidity, Affine{1, 0}, "fraction 0..1"},
	{"%", QuantityHumidity, Affine{0.01, 0}, "percent"},

	// voltage → V
	{"V", QuantityVoltage, Affine{1, 0}, "volt"},
	{"mV", QuantityVoltage, Affine{1e-3, 0}, "millivolt"},
}

// Quantities lists the channel quantities in the order the docs show them.
var Quantities = []Quantity{
	QuantityForce, QuantityMoment, QuantityPressure, QuantitySpeed, QuantityAngle,
	QuantityTemperature, QuantityRotation, QuantityHumidity, QuantityVoltage,
}

// Known reports whether q is one of the quantities liftyard knows.
func (q Quantity) Known() bool { return slices.Contains(Quantities, q) }

// SIUnit returns the symbol of the SI unit that values of q carry inside the
// program ("Pa", "N", "N*m", "m/s", "rad", "K", "rad/s", "fraction", "V"),
// or "" for an unknown quantity.
func (q Quantity) SIUnit() string {
	for _, u := range units {
		if u.q == q {
			return u.symbol
		}
	}
	return ""
}

// Units returns the unit symbols accepted for q, SI unit first.
func Units(q Quantity) []string {
	var out []string
	for _, u := range units {
		if u.q == q {
			out = append(out, u.symbol)
		}
	}
	return out
}

// UnitToSI returns the conversion from unit to the SI unit of q. It fails
// with ErrUnit when the unit is unknown or belongs to another quantity; the
// message lists the units that q accepts.
func UnitToSI(q Quantity, unit string) (Affine, error) {
	if !q.Known() {
		return Affine{}, Problem(ErrValue, "unknown quantity %q (use %s)", q, orList(quantityWords()))
	}
	u, ok := lookupUnit(unit)
	if !ok {
		return Affine{}, Problem(ErrUnit, "unknown unit %q%s (use %s)", unit, caseHint(unit), orList(Units(q)))
	}
	if u.q != q {
		return Affine{}, Problem(ErrUnit, "unit %q is a %s unit, not a %s unit (use %s)", unit, u.q, q, orList(Units(q)))
	}
	return u.toSI, nil
}

// FromSI converts an SI value back to the unit: v = (si − Offset)/Scale.
// It is the inverse of Apply for every Affine with Scale ≠ 0.
func (a Affine) FromSI(si float64) float64 { return (si - a.Offset) / a.Scale }

// quantityRE splits "12.5 mbar", "2kN", "-4 °C", "1e3 Pa".
var quantityRE = regexp.MustCompile(`^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(\S.*?)?\s*$`)

// ParseQuantity parses a number with a unit, such as "2 kN", "500 Pa",
// "12.5 mbar" or "59 °F", and returns the value in SI units and the
// quantity that the unit measures. A bare number is refused (ErrUnit): a
// value without a unit is the mistake this guards against.
func ParseQuantity(s string) (valueSI float64, q Quantity, err error) {
	m := quantityRE.FindStringSubmatch(s)
	if m == nil {
		return 0, "", Problem(ErrValue, "%q is not a number with a unit (write e.g. \"2 kN\" or \"500 Pa\")", s)
	}
	v, perr := strconv.ParseFloat(m[1], 64)
	if perr != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, "", Problem(ErrValue, "%q: number out of range", s)
	}
	if m[2] == "" {
		return 0, "", Problem(ErrUnit, "%q has no unit (write e.g. \"%s N\" or \"%s Pa\")", s, m[1], m[1])
	}
	u, ok := lookupUnit(m[2])
	if !ok {
		return 0, "", Problem(ErrUnit, "unknown unit %q in %q%s", m[2], s, caseHint(m[2]))
	}
	si := u.toSI.Apply(v)
	if math.IsInf(si, 0) {
		return 0, "", Problem(ErrValue, "%q: number out of range", s)
	}
	return si, u.q, nil
}

func lookupUnit(sym string) (unitDef, bool) {
	for _, u := range units {
		if u.symbol == sym {
			return u, true
		}
	}
	return unitDef{}, false
}

// caseHint suggests the symbol the user probably meant when only the case
// is wrong ("kpa" → "kPa"). "kn" is a knot and "kN" a kilonewton, so exact
// matches never reach here.
func caseHint(sym string) string {
	var hits []string
	for _, u := range units {
		if strings.EqualFold(u.symbol, sym) {
			hits = append(hits, fmt.Sprintf("%q", u.symbol))
		}
	}
	if len(hits) == 0 {
		return ""
	}
	return " (did you mean " + strings.Join(hits, " or ") + "? unit symbols are case sensitive)"
}

func quantityWords() []string {
	out := make([]string, len(Quantities))
	for i, q := range Quantities {
		out[i] = string(q)
	}
	return out
}

// orList writes "a, b or c".
func orList(words []string) string {
	switch len(words) {
	case 0:
		return ""
	case 1:
		return words[0]
	}
	return strings.Join(words[:len(words)-1], ", ") + " or " + words[len(words)-1]
}
