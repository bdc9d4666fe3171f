package rig_test

import (
	"errors"
	"math"
	"testing"

	"liftyard/rig"
)

// Ensure that every unit converts to SI by the factor that NIST SP 811
// (2008 edition), Appendix B, prints for it.
//
// "B.9" rows were read in a public copy of SP 811 Appendix B.9 (factors by
// kind of quantity) and "B.8" rows in a public copy of B.8 (alphabetical),
// both found with the search tool. SP 811 rounds inexact factors to 7
// significant digits, so those rows are checked to half a unit in the last
// printed digit; exact factors are checked to 1e-15 relative.
func TestUnitToSI_NISTSP811(t *testing.T) {
	tests := []struct {
		name   string
		q      rig.Quantity
		unit   string
		factor float64 // SI value of 1 unit
		relTol float64
		source string
	}{
		// pressure
		{"pascal", rig.QuantityPressure, "Pa", 1, 0, "SI unit"},
		{"hectopascal", rig.QuantityPressure, "hPa", 100, 1e-15, "SI prefix"},
		{"kilopascal", rig.QuantityPressure, "kPa", 1000, 1e-15, "SI prefix"},
		{"millibar", rig.QuantityPressure, "mbar", 100, 1e-15, "SP 811 B.9: bar 1.0 E+05 Pa (exact), milli prefix"},
		{"bar", rig.QuantityPressure, "bar", 1e5, 1e-15, "SP 811 B.9: bar (bar) 1.0 E+05 Pa, exact"},
		{"inch of water, conventional", rig.QuantityPressure, "inH2O", 249.0889, 0.5e-4 / 249.0889, "SP 811 B.8/B.9: inch of water, conventional (inH2O) 2.490 889 E+02 Pa"},
		{"inch of water 39.2 °F", rig.QuantityPressure, "inH2O_39F", 249.082, 1e-15, "SP 811 B.8/B.9: inch of water (39.2 °F) 2.490 82 E+02 Pa"},
		{"inch of water 60 °F", rig.QuantityPressure, "inH2O_60F", 248.84, 1e-15, "SP 811 B.8/B.9: inch of water (60 °F) 2.4884 E+02 Pa"},
		{"millimetre of water, conventional", rig.QuantityPressure, "mmH2O", 9.80665, 1e-15, "SP 811 B.9: millimeter of water, conventional (mmH2O) 9.806 65 E+00 Pa (exact by convention: 1 mm × 1000 kg/m³ × g_n)"},
		{"psi", rig.QuantityPressure, "psi", 6894.757, 0.5e-3 / 6894.757, "SP 811 B.9: psi (lbf/in²) 6.894 757 E+03 Pa"},
		// force
		{"newton", rig.QuantityForce, "N", 1, 0, "SI unit"},
		{"kilonewton", rig.QuantityForce, "kN", 1000, 1e-15, "SI prefix"},
		{"kilogram-force", rig.QuantityForce, "kgf", 9.80665, 1e-15, "SP 811 B.9: kilogram-force (kgf) 9.806 65 E+00 N, exact by definition of g_n"},
		{"pound-force, exact", rig.QuantityForce, "lbf", 4.4482216152605, 1e-15, "SP 811 footnote 23: pound-force = 4.448 221 615 260 5 N exactly"},
		{"pound-force, printed", rig.QuantityForce, "lbf", 4.448222, 0.5e-6 / 4.448222, "SP 811 B.9: pound-force (lbf) 4.448 222 E+00 N"},
		// moment
		{"newton metre", rig.QuantityMoment, "N*m", 1, 0, "SI unit"},
		{"newton metre, dot", rig.QuantityMoment, "N·m", 1, 0, "SI unit"},
		{"newton metre, short", rig.QuantityMoment, "Nm", 1, 0, "SI unit"},
		{"kilonewton metre", rig.QuantityMoment, "kN*m", 1000, 1e-15, "SI prefix"},
		// lbf·ft: from memory, SP 811 B.8 prints "pound-force foot (lbf·ft) 1.355 818 E+00 N·m";
		// it equals lbf (B.9, confirmed) × foot (B.9: 3.048 E-01 m, exact), which this row checks.
		{"pound-force foot", rig.QuantityMoment, "lbf*ft", 1.355818, 0.5e-6 / 1.355818, "from memory: SP 811 B.8 pound-force foot 1.355 818 E+00; = lbf × ft (both B.9)"},
		// speed
		{"metre per second", rig.QuantitySpeed, "m/s", 1, 0, "SI unit"},
		// km/h: from memory SP 811 B.8 "kilometer per hour 2.777 778 E-01 m/s"; it is 1000 m / 3600 s,
		// with hour = 3.6 E+03 s (B.9, confirmed).
		{"kilometre per hour", rig.QuantitySpeed, "km/h", 0.2777778, 0.5e-7 / 0.2777778, "from memory: SP 811 B.8 2.777 778 E-01; = km / h (B.9 hour 3.6 E+03 s)"},
		{"knot", rig.QuantitySpeed, "kn", 0.5144444, 0.5e-7 / 0.5144444, "SP 811 B.9: knot (nautical mile per hour) 5.144 444 E-01 m/s"},
		// mph: SP 811 B.8 lists mile per hour (mi/h) as 4.4704 E-01 m/s (exact) [from memory];
		// it is mile 1.609 344 E+03 m (B.9, exact, confirmed) / hour 3.6 E+03 s (B.9).
		{"mile per hour", rig.QuantitySpeed, "mph", 0.44704, 1e-15, "SP 811 B.9: mile 1.609 344 E+03 m / hour 3.6 E+03 s"},
		// angle
		{"radian", rig.QuantityAngle, "rad", 1, 0, "SI unit"},
		// degree: from memory SP 811 B.9 "degree (°) 1.745 329 E-02 rad"; exactly π/180 by definition.
		{"degree", rig.QuantityAngle, "deg", 0.01745329, 0.5e-8 / 0.01745329, "from memory: SP 811 B.9 1.745 329 E-02 rad; π/180 by definition"},
		{"degree sign", rig.QuantityAngle, "°", math.Pi / 180, 1e-15, "π/180 by definition"},
		// rotation
		{"radian per second", rig.QuantityRotation, "rad/s", 1, 0, "SI unit"},
		{"revolution per minute", rig.QuantityRotation, "rpm", 6.283185 / 60, 0.5e-6 / 6.283185, "SP 811 B.9: revolution (r) 6.283 185 E+00 rad; minute 6.0 E+01 s"},
		{"revolution per minute r/min", rig.QuantityRotation, "r/min", 6.283185 / 60, 0.5e-6 / 6.283185, "SP 811 B.9, as above"},
		{"revolution per second", rig.QuantityRotation, "rev/s", 6.283185, 0.5e-6 / 6.283185, "SP 811 B.9: revolution 6.283 185 E+00 rad"},
		// "Hz" for revolutions per second is common practice on tachometer
		// displays; strictly Hz is 1/s. We take it to mean rev/s.
		{"hertz as rev/s", rig.QuantityRotation, "Hz", 2 * math.Pi, 1e-15, "common practice: Hz on a tachometer = rev/s"},
		// humidity, voltage
		{"percent", rig.QuantityHumidity, "%", 0.01, 1e-15, "definition"},
		{"fraction", rig.QuantityHumidity, "fraction", 1, 0, "definition"},
		{"volt", rig.QuantityVoltage, "V", 1, 0, "SI unit"},
		{"millivolt", rig.QuantityVoltage, "mV", 1e-3, 1e-15, "SI prefix"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			a, err := rig.UnitToSI(tt.q, tt.unit)
			if err != nil {
				t.Fatalf("UnitToSI(%s, %q): %v", tt.q, tt.unit, err)
			}
			if a.Offset != 0 {
				t.Errorf("offset = %v, want 0 for a ratio unit", a.Offset)
			}
			if got := a.Apply(1); math.Abs(got-tt.factor) > tt.relTol*tt.factor {
				t.Errorf("1 %s = %.10g SI, want %.10g (%s)", tt.unit, got, tt.factor, tt.source)
			}
		})
	}
}

// Ensure that temperatures convert by the SP 811 B.9 formulas
// T/K = t/°C + 273.15 and T/K = (t/°F + 459.67)/1.8, and that °C, K and °F
// agree with each other at the fixed points.
func TestParseQuantity_Temperature(t *testing.T) {
	tests := []struct {
		in    string
		wantK float64
	}{
		{"59 °F", 288.15},   // ISA sea level, 15 °C (ISO 2533) = 59 °F
		{"59 degF", 288.15}, // spelled out
		{"59F", 288.15},     // no space
		{"32 °F", 273.15},   // ice point
		{"212 °F", 373.15},  // steam point at 1 atm
		{"-40 °F", 233.15},  // −40 °F = −40 °C
		{"-40 °C", 233.15},
		{"15 °C", 288.15},
		{"15 degC", 288.15},
		{"15 C", 288.15},
		{"288.15 K", 288.15},
		{"-459.67 °F", 0}, // absolute zero, SP 811 B.9 (T/K = (t/°F + 459.67)/1.8)
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			v, q, err := rig.ParseQuantity(tt.in)
			if err != nil {
				t.Fatal(err)
			}
			if q != rig.QuantityTemperature {
				t.Errorf("quantity = %s, want temperature", q)
			}
			if math.Abs(v-tt.wantK) > 1e-12 {
				t.Errorf("%s = %.15g K, want %.15g K", tt.in, v, tt.wantK)
			}
		})
	}
}

// Ensure that ParseQuantity reads the capacity strings of rig files.
func TestParseQuantity(t *testing.T) {
	tests := []struct {
		in   string
		want float64
		q    rig.Quantity
	}{
		{"2 kN", 2000, rig.QuantityForce},
		{"500 Pa", 500, rig.QuantityPressure},
		{"5 kPa", 5000, rig.QuantityPressure},
		{"12.5 mbar", 1250, rig.QuantityPressure},
		{"  1e3 Pa ", 1000, rig.QuantityPressure},
		{"+.5 bar", 50000, rig.QuantityPressure},
		{"10 kn", 10 * 1852.0 / 3600, rig.QuantitySpeed}, // kn is a knot ...
		{"10 kN", 10000, rig.QuantityForce},              // ... kN a kilonewton
		{"3000 rpm", 100 * math.Pi, rig.QuantityRotation},
		{"50 %", 0.5, rig.QuantityHumidity},
		{"250 mV", 0.25, rig.QuantityVoltage},
		{"2.5 N·m", 2.5, rig.QuantityMoment},
		{"90 deg", math.Pi / 2, rig.QuantityAngle},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			v, q, err := rig.ParseQuantity(tt.in)
			if err != nil {
				t.Fatal(err)
			}
			if q != tt.q || math.Abs(v-tt.want) > 1e-12*math.Abs(tt.want) {
				t.Errorf("ParseQuantity(%q) = %v %s, want %v %s", tt.in, v, q, tt.want, tt.q)
			}
		})
	}
}

// Ensure that bad quantity strings fail with the right sentinel and a hint.
func TestParseQuantity_Bad(t *testing.T) {
	tests := []struct {
		in      string
		want    error
		message string
	}{
		{"500", rig.ErrUnit, `"500" has no unit (write e.g. "500 N" or "500 Pa")`},
		{"2 kgs", rig.ErrUnit, `unknown unit "kgs" in "2 kgs"`},
		{"5 kpa", rig.ErrUnit, `unknown unit "kpa" in "5 kpa" (did you mean "kPa"? unit symbols are case sensitive)`},
		{"kN", rig.ErrValue, `"kN" is not a number with a unit (write e.g. "2 kN" or "500 Pa")`},
		{"", rig.ErrValue, `"" is not a number with a unit (write e.g. "2 kN" or "500 Pa")`},
		{"1e999 Pa", rig.ErrValue, `"1e999 Pa": number out of range`},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			_, _, err := rig.ParseQuantity(tt.in)
			if !errors.Is(err, tt.want) {
				t.Fatalf("err = %v, want %v", err, tt.want)
			}
			if err.Error() != tt.message {
				t.Errorf("message\n got %s\nwant %s", err, tt.message)
			}
		})
	}
}

// Ensure that a unit of one quantity is refused for another, with the list
// of units that would fit.
func TestUnitToSI_WrongQuantity(t *testing.T) {
	_, err := rig.UnitToSI(rig.QuantityForce, "kgs")
	if !errors.Is(err, rig.ErrUnit) || err.Error() != `unknown unit "kgs" (use N, kN, kgf or lbf)` {
		t.Errorf("kgs: %v", err)
	}
	_, err = rig.UnitToSI(rig.QuantitySpeed, "Pa")
	if !errors.Is(err, rig.ErrUnit) || err.Error() != `unit "Pa" is a pressure unit, not a speed unit (use m/s, km/h, kn or mph)` {
		t.Errorf("Pa as speed: %v", err)
	}
	_, err = rig.UnitToSI("torque", "N*m")
	if !errors.Is(err, rig.ErrValue) {
		t.Errorf("unknown quantity: %v", err)
	}
}

// Ensure that converting to SI and back is the identity for every unit, and
// that every symbol names exactly one quantity.
func TestUnits_RoundTrip(t *testing.T) {
	seen := map[string]rig.Quantity{}
	for _, q := range rig.Quantities {
		units := rig.Units(q)
		if len(units) == 0 || units[0] != q.SIUnit() {
			t.Errorf("%s: units %v do not start with the SI unit %q", q, units, q.SIUnit())
		}
		for _, u := range units {
			if other, dup := seen[u]; dup {
				t.Errorf("unit %q belongs to %s and %s", u, other, q)
			}
			seen[u] = q
			a, err := rig.UnitToSI(q, u)
			if err != nil {
				t.Fatal(err)
			}
			for _, v := range []float64{-1234.5, -1, 0, 1e-9, 0.3, 1, 17, 98765.4321} {
				if back := a.FromSI(a.Apply(v)); math.Abs(back-v) > 1e-12*math.Max(1, math.Abs(v)) {
					t.Errorf("%s: %v → %v → %v", u, v, a.Apply(v), back)
				}
			}
		}
	}
}

// Ensure that °C, K and °F are consistent with each other: converting a
// temperature °C → K → °F by the affine maps matches the direct formula
// t_F = 1.8·t_C + 32 (SP 811 B.9).
func TestUnits_TemperatureConsistency(t *testing.T) {
	c, _ := rig.UnitToSI(rig.QuantityTemperature, "°C")
	f, _ := rig.UnitToSI(rig.QuantityTemperature, "°F")
	k, _ := rig.UnitToSI(rig.QuantityTemperature, "K")
	for _, tc := range []float64{-273.15, -40, 0, 15, 37, 100, 1000} {
		tk := c.Apply(tc)
		if got := k.FromSI(tk); math.Abs(got-(tc+273.15)) > 1e-12 {
			t.Errorf("%v °C → %v K", tc, got)
		}
		if got, want := f.FromSI(tk), 1.8*tc+32; math.Abs(got-want) > 1e-11 {
			t.Errorf("%v °C → %v °F, want %v", tc, got, want)
		}
	}
}

// Ensure that Deg and Rad convert by the definition of the degree (π/180
// rad, SI Brochure 9th ed. 2019, Table 8) and undo each other.
func TestDegRad(t *testing.T) {
	for _, c := range []struct {
		name     string
		deg, rad float64
	}{
		{"zero", 0, 0},
		{"half turn", 180, math.Pi},
		{"right angle", 90, math.Pi / 2},
		{"negative", -45, -math.Pi / 4},
		{"one degree", 1, math.Pi / 180},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := rig.Rad(c.deg); math.Abs(got-c.rad) > 1e-15 {
				t.Errorf("Rad(%g) = %.17g, want %.17g", c.deg, got, c.rad)
			}
			if got := rig.Deg(c.rad); math.Abs(got-c.deg) > 1e-12 {
				t.Errorf("Deg(%.17g) = %.17g, want %g", c.rad, got, c.deg)
			}
			if got := rig.Deg(rig.Rad(c.deg)); math.Abs(got-c.deg) > 1e-12 {
				t.Errorf("Deg(Rad(%g)) = %.17g", c.deg, got)
			}
		})
	}
}
