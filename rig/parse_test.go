package rig_test

import (
	"errors"
	"flag"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"liftyard/rig"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/bad")

const rigsDir = "../testdata/rigs"

// Ensure that the foil example parses and every value arrives in SI.
func TestParse_FoilTowtank(t *testing.T) {
	r, err := rig.Load(filepath.Join(rigsDir, "foil-towtank.toml"))
	if err != nil {
		t.Fatal(err)
	}
	if r.Name != "foil-towtank" || r.Kind != rig.KindFoil || r.Fluid != rig.FluidFreshWater {
		t.Errorf("header = %q %q %q", r.Name, r.Kind, r.Fluid)
	}
	near(t, "TempK", r.Conditions.TempK, 288.15, 1e-12)
	near(t, "PressurePa (default, ISO 2533 sea level)", r.Conditions.PressurePa, 101325, 0)
	near(t, "SalinityKgPerKg (fresh water)", r.Conditions.SalinityKgPerKg, 0, 0)
	near(t, "AreaM2", r.Reference.AreaM2, 0.09, 0)
	near(t, "LengthM", r.Reference.LengthM, 0.15, 0)
	near(t, "SpanM", r.Reference.SpanM, 0.60, 0)
	near(t, "AspectRatio", r.Reference.AspectRatio(), 4, 1e-12)
	if len(r.Channels) != 6 || len(r.Sources) != 1 {
		t.Fatalf("%d channels, %d sources", len(r.Channels), len(r.Sources))
	}
	pitot, _ := r.Channel("pitot")
	near(t, `capacity "5 kPa"`, pitot.CapacitySI, 5000, 0)
	fore, _ := r.Channel("n_fore")
	near(t, `capacity "500 N"`, fore.CapacitySI, 500, 0)
	if got := fore.Calibration; len(got.Poly) != 2 || got.Poly[0] != -12.5 || got.Poly[1] != 0.0025 || got.U != 0.15 {
		t.Errorf("n_fore calibration = %+v", got)
	}
	alpha, _ := r.Channel("alpha")
	near(t, "alpha ToSI.Scale (deg → rad)", alpha.ToSI.Scale, math.Pi/180, 1e-15)
	tw, _ := r.Channel("t_water")
	near(t, "t_water: 15 °C in K", tw.ToSI.Apply(15), 288.15, 1e-12)
	l := r.Lift
	if strings.Join(l.Normal, ",") != "n_fore,n_aft" || strings.Join(l.Axial, ",") != "a_main" ||
		l.AngleChannel != "alpha" || l.DynamicPressure != "pitot" || l.Temperature != "t_water" {
		t.Errorf("lift = %+v", l)
	}
	near(t, "AngleURad (0.05°)", l.AngleURad, 0.05*math.Pi/180, 1e-15)
	near(t, "PitotCoeff", l.PitotCoeff, 1, 0)
	s := r.Sources[0]
	if s.Type != rig.SourceMQTT || s.Broker != "tcp://127.0.0.1:1883" || s.Topic != "liftyard/towtank/raw" {
		t.Errorf("source = %+v", s)
	}
}

// Ensure that the roof example parses: taps, zones, internal cp, and a
// channel whose calibration gives mbar.
func TestParse_RoofYard(t *testing.T) {
	r, err := rig.Load(filepath.Join(rigsDir, "roof-yard.toml"))
	if err != nil {
		t.Fatal(err)
	}
	near(t, "TempK (12 °C)", r.Conditions.TempK, 285.15, 1e-12)
	near(t, "PressurePa", r.Conditions.PressurePa, 100900, 0)
	near(t, "RelHumidity (70 %)", r.Conditions.RelHumidity, 0.70, 1e-15)
	if len(r.Taps) != 12 || len(r.Zones) != 3 {
		t.Fatalf("%d taps, %d zones", len(r.Taps), len(r.Zones))
	}
	sum := 0.0
	for _, tp := range r.Taps {
		sum += tp.AreaM2
	}
	near(t, "sum of tap areas = panel area", sum, r.Reference.AreaM2, 1e-12)
	q, _ := r.Channel("q_ref")
	near(t, `q_ref capacity "10 mbar"`, q.CapacitySI, 1000, 1e-12)
	near(t, "q_ref 1 mbar in Pa", q.ToSI.Apply(1), 100, 0)
	if !r.Internal.HasCp || r.Internal.Cp != 0.2 {
		t.Errorf("internal = %+v", r.Internal)
	}
	s := r.Sources[0]
	if s.Type != rig.SourceSerial || s.Baud != 115200 || s.Format != "frame" || len(s.Channels) != 14 {
		t.Errorf("source = %+v", s)
	}
	if r.Zones[0].Name != "corner" || r.Zones[0].DesignCp != -2.2 || r.Zones[0].DesignU != 0.25 {
		t.Errorf("zone 0 = %+v", r.Zones[0])
	}
}

// Ensure that defaults are filled: sea water gets TEOS-10 standard salinity
// (35.165 04 g/kg), a serial source gets 115200 baud and frame format, a
// simulated source 200 Hz, and [conditions] accepts strings with units.
func TestParse_Defaults(t *testing.T) {
	src := `name = "d"
kind = "foil"
fluid = "sea_water"
[conditions]
temperature = "59 °F"
[reference]
area_m2 = 0.1
length_m = 0.1
[[source]]
name = "s"
type = "serial"
port = "/dev/ttyACM0"
channels = ["f"]
[[source]]
name = "sim"
type = "simulated"
[[channel]]
name = "f"
quantity = "force"
unit = "kgf"
capacity = 20
calibration = { id = "cal-7" }
[[channel]]
name = "v"
quantity = "speed"
unit = "kn"
calibration = { poly = [0, 1], u = 0.02 }
[lift]
normal = "f"
speed = "v"
angle = 4
design = "curves/naca.csv"
`
	r, err := rig.Parse("rigs/d.toml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	near(t, "59 °F in K", r.Conditions.TempK, 288.15, 1e-12)
	// TEOS-10 reference composition: S_R = 35.165 04 g/kg for standard seawater
	// (IOC, SCOR and IAPSO 2010, TEOS-10 manual; Millero et al. 2008).
	near(t, "SalinityKgPerKg", r.Conditions.SalinityKgPerKg, 0.03516504, 0)
	if s := r.Sources[0]; s.Baud != 115200 || s.Format != "frame" {
		t.Errorf("serial defaults = %+v", s)
	}
	near(t, "RateHz", r.Sources[1].RateHz, 200, 0)
	f, _ := r.Channel("f")
	near(t, "capacity 20 kgf in N", f.CapacitySI, 20*9.80665, 1e-12)
	if f.Calibration.ID != "cal-7" || f.Calibration.Poly != nil {
		t.Errorf("calibration = %+v", f.Calibration)
	}
	near(t, "fixed angle 4°", r.Lift.AngleRad, 4*math.Pi/180, 1e-15)
	if r.Lift.AngleChannel != "" || len(r.Lift.Normal) != 1 {
		t.Errorf("lift = %+v", r.Lift)
	}
	if want := filepath.Join("rigs", "curves", "naca.csv"); r.Lift.Design != want {
		t.Errorf("design = %q, want %q (relative to the rig file)", r.Lift.Design, want)
	}
}

// Ensure that each problem names its exact line, column, key and sentinel.
func TestParse_ErrorPositions(t *testing.T) {
	type want struct {
		line, col int
		key       string
		err       error
		text      string // substring of the message
	}
	tests := []struct {
		file string
		want []want
	}{
		{"syntax.toml", []want{{3, 13, "", rig.ErrSyntax, "TOML syntax"}}},
		{"unknown-unit.toml", []want{
			{12, 1, "channel[0].unit", rig.ErrUnit, `channel "n_fore": unknown unit "kgs" (use N, kN, kgf or lbf)`},
			{20, 1, "channel[1].capacity", rig.ErrUnit, `capacity "2 m/s" is a speed`},
		}},
		{"unknown-key.toml", []want{
			{4, 1, "colour", rig.ErrUnknownKey, `unknown key "colour" at top level`},
			{9, 1, "reference.chord_m", rig.ErrUnknownKey, `unknown key "chord_m" in [reference]`},
			{11, 1, "channel[0].capacity", rig.ErrMissing, "capacity missing"},
			{15, 1, "channel[0].capcity", rig.ErrUnknownKey, `unknown key "capcity" in [[channel]] (did you mean capacity?)`},
			{16, 41, "channel[0].calibration.uu", rig.ErrUnknownKey, `unknown key "uu" in [[channel]] calibration (known keys: poly, u, id, span_u_pct)`},
			{30, 1, "lifts", rig.ErrUnknownKey, `(did you mean lift?)`},
		}},
		{"references.toml", []want{
			{13, 23, "source[0].channels[1]", rig.ErrReference, `channel "n_aftt", which is not defined (define it under [[channel]]; did you mean "n_aft"?)`},
			{37, 21, "lift.normal[1]", rig.ErrReference, `normal names channel "n_aftt"`},
			{38, 10, "lift.axial[0]", rig.ErrReference, `axial needs a force channel, but "pitot" measures pressure`},
			{39, 1, "lift.dynamic_pressure", rig.ErrReference, `dynamic_pressure needs a pressure channel, but "n_aft" measures force`},
			{40, 1, "lift.angle", rig.ErrReference, `angle names channel "alpha"`},
		}},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			_, err := rig.Load(filepath.Join("testdata", "bad", tt.file))
			var errs rig.Errors
			if !errors.As(err, &errs) {
				t.Fatalf("err = %v (%T), want rig.Errors", err, err)
			}
			for _, w := range tt.want {
				found := false
				for _, e := range errs {
					if e.Key != w.key || !strings.Contains(e.Error(), w.text) {
						continue
					}
					found = true
					if e.Line != w.line || e.Col != w.col {
						t.Errorf("%s: at %d:%d, want %d:%d", w.key, e.Line, e.Col, w.line, w.col)
					}
					if !errors.Is(e, w.err) {
						t.Errorf("%s: %v is not %v", w.key, e, w.err)
					}
					if e.File != filepath.Join("testdata", "bad", tt.file) {
						t.Errorf("%s: file %q", w.key, e.File)
					}
				}
				if !found {
					t.Errorf("no problem with key %q and text %q in\n%v", w.key, w.text, err)
				}
			}
			if !errors.Is(err, tt.want[0].err) {
				t.Errorf("errors.Is(Errors, %v) = false", tt.want[0].err)
			}
		})
	}
}

// Ensure that every bad file reports all its problems, sorted by line, in
// the text that "liftyard check" prints (testdata/bad/*.golden).
func TestParse_BadGolden(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("testdata", "bad", "*.toml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no bad files: %v", err)
	}
	for _, f := range files {
		name := strings.TrimSuffix(filepath.Base(f), ".toml")
		t.Run(name, func(t *testing.T) {
			data, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			r, err := rig.Parse(name+".toml", data)
			if err == nil || r != nil {
				t.Fatalf("Parse accepted a bad file: %+v", r)
			}
			var errs rig.Errors
			if !errors.As(err, &errs) || len(errs) == 0 {
				t.Fatalf("err = %T %v, want non-empty rig.Errors", err, err)
			}
			var first *rig.Error // what cmd/liftyard tests for its exit status 2
			if !errors.As(err, &first) || first != errs[0] {
				t.Errorf("errors.As(*rig.Error) = %v, want the first problem", first)
			}
			for i := 1; i < len(errs); i++ {
				if errs[i].Line < errs[i-1].Line {
					t.Errorf("not sorted by line: %d after %d", errs[i].Line, errs[i-1].Line)
				}
			}
			for _, e := range errs {
				n := 0
				for _, s := range []error{rig.ErrSyntax, rig.ErrUnknownKey, rig.ErrMissing, rig.ErrUnit, rig.ErrValue, rig.ErrReference, rig.ErrDuplicate} {
					if errors.Is(e, s) {
						n++
					}
				}
				if n != 1 {
					t.Errorf("%v matches %d sentinels, want 1", e, n)
				}
			}
			got := err.Error() + "\n"
			golden := filepath.Join("testdata", "bad", name+".golden")
			if *update {
				if err := os.WriteFile(golden, []byte(got), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			want, err := os.ReadFile(golden)
			if err != nil {
				t.Fatalf("%v (run go test ./rig -update)", err)
			}
			if got != string(want) {
				t.Errorf("check output differs from %s\n--- got\n%s--- want\n%s", golden, got, want)
			}
		})
	}
}

// Ensure that one file with many problems reports each of them.
func TestParse_AllProblemsReported(t *testing.T) {
	_, err := rig.Load(filepath.Join("testdata", "bad", "values.toml"))
	var errs rig.Errors
	if !errors.As(err, &errs) {
		t.Fatal(err)
	}
	for _, key := range []string{
		"conditions.temperature_c", "conditions.humidity_pct", "conditions.salinity_g_per_kg",
		"reference.area_m2", "reference.area_u_m2", "source[0].rate_hz", "source[0].port",
		"source[1].baud", "source[1].format", "channel[0].capacity", "channel[0].calibration.poly",
		"channel[0].calibration.u", "channel[1].quantity", "channel[1].capacity",
		"channel[1].calibration.poly[1]", "channel[2].calibration.id",
		"lift.pitot_coefficient", "lift.angle_u_deg",
	} {
		found := false
		for _, e := range errs {
			found = found || e.Key == key
		}
		if !found {
			t.Errorf("no problem reported for %s", key)
		}
	}
}

// Ensure that Validate checks a Rig built in code, without positions.
func TestValidate_InCode(t *testing.T) {
	r := &rig.Rig{Name: "code", Kind: rig.KindFoil, Fluid: rig.FluidAir,
		Conditions: rig.Conditions{TempK: 288.15, PressurePa: 101325},
		Reference:  rig.Reference{AreaM2: 0.1, LengthM: 0.1},
		Channels: []rig.Channel{{Name: "f", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1},
			CapacitySI: 100, Calibration: rig.Calibration{Poly: []float64{0, 1}, U: 0.1}}},
		Lift: rig.Lift{Normal: []string{"f"}, Speed: "v", PitotCoeff: 1},
	}
	err := r.Validate()
	var errs rig.Errors
	if !errors.As(err, &errs) || len(errs) != 1 || errs[0].Key != "lift.speed" || !errors.Is(errs[0], rig.ErrReference) {
		t.Fatalf("Validate = %v", err)
	}
	if errs[0].Line != 0 || !strings.HasPrefix(errs[0].Error(), "<rig>: lift: speed names channel") {
		t.Errorf("in-code error = %q", errs[0].Error())
	}
	r.Channels = append(r.Channels, rig.Channel{Name: "v", Quantity: rig.QuantitySpeed, Unit: "m/s", ToSI: rig.Affine{Scale: 1},
		Calibration: rig.Calibration{ID: "c"}})
	if err := r.Validate(); err != nil {
		t.Errorf("valid rig: %v", err)
	}
}

// Ensure that Format writes a file that Parse reads back to the same Rig.
func TestFormat_RoundTrip(t *testing.T) {
	for _, name := range []string{"foil-towtank.toml", "roof-yard.toml"} {
		t.Run(name, func(t *testing.T) {
			r1, err := rig.Load(filepath.Join(rigsDir, name))
			if err != nil {
				t.Fatal(err)
			}
			r2, err := rig.Parse(name, rig.Format(r1))
			if err != nil {
				t.Fatalf("re-parse: %v\n%s", err, rig.Format(r1))
			}
			if d := diffRig(r1, r2); d != "" {
				t.Error(d)
			}
		})
	}
}

func near(t *testing.T, what string, got, want, relTol float64) {
	t.Helper()
	if math.Abs(got-want) > relTol*math.Max(1, math.Abs(want)) {
		t.Errorf("%s = %.15g, want %.15g", what, got, want)
	}
}
