package estimate_test

import (
	"bytes"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

var update = flag.Bool("update", false, "rewrite docs/columns.md from the column table")

func val(x, u float64) calibrate.Value { return calibrate.Value{X: x, U: u, Dof: math.Inf(1)} }

// Invented rows of scenarios of our own: a fin on a tow rig with a design
// value, a spinning cylinder without an angle channel, a roof zone with a
// design value and one without.
func foilSeg() estimate.Segment {
	t0 := time.Date(2025, 6, 14, 9, 31, 0, 250_000_000, time.FixedZone("CEST", 2*3600))
	return estimate.Segment{
		Kind: rig.KindFoil, Index: 2, TStart: t0, TEnd: t0.Add(12 * time.Second), N: 12000, NEff: 240,
		AlphaRad: val(rig.Rad(4), rig.Rad(0.05)), QPa: val(612.5, 1.5), SpeedMPerS: val(1.107, 0.0014),
		RhoKgPerM3: 999.1, MuPaS: 1.138e-3, Re: 2.9e5, Fn: 0.71,
		LiftN: val(31.6, 0.4), DragN: val(3.1, 0.2), CL: val(0.43, 0.012), CD: val(0.042, 0.003),
		DesignCL: val(0.44, 0.01), En: -0.4,
	}
}

func rotorSeg() estimate.Segment {
	s := foilSeg()
	s.Kind, s.AlphaRad, s.Fn, s.SpinRatio, s.DesignCL, s.En = rig.KindRotor, calibrate.Value{}, 0, 1.5, calibrate.Value{}, math.NaN()
	s.SpinRatioU, s.SpinRatioDof = 0.01, 50
	return s
}

func roofSeg(design bool) estimate.Segment {
	t0 := time.Date(2025, 9, 2, 11, 0, 0, 0, time.UTC)
	s := estimate.Segment{
		Kind: rig.KindRoof, Index: 0, TStart: t0, TEnd: t0.Add(10 * time.Minute), N: 60000, NEff: math.NaN(),
		QPa: val(96.4, 0.9), SpeedMPerS: val(12.5, 0.06), RhoKgPerM3: 1.232, MuPaS: 1.8e-5, En: math.NaN(),
		Zone: "corner", CpMean: val(-1.31, 0.045), CpRMS: 0.28, CpPeak: -2.74, UpliftN: val(-252.6, 9.3),
		Block: 0, CpMin: -3.1, CpMax: -0.2, CpPeakU: 0.1, CpPeakMax: -0.1, CpPeakMaxU: 0.05,
		CpInt: calibrate.Value{X: 0.2, Dof: math.Inf(1)}, QAt: "mast", TurbulenceIntensity: 0.14,
		DirectionRad: math.NaN(), DirectionSpreadRad: math.NaN(), SectorRad: math.NaN(), SectorOutFrac: math.NaN(),
	}
	if design {
		s.DesignCp, s.En, s.DesignVs = val(-2.2, 0.125), 6.1, "cp_mean"
		s.Zone, s.Tap, s.QHeightM, s.SamplesUnblocked = estimate.RoofZoneWhole, "", 6, 3
		s.DirectionRad, s.DirectionSpreadRad, s.SectorRad, s.SectorOutFrac = rig.Rad(250), rig.Rad(12), rig.Rad(240), 0.3
	} else {
		s.Tap = "t01"
	}
	return s
}

// Ensure that every column of the table names itself by DEVELOPERS.md "Units in names", applies
// to the kinds it should, and is present or absent on foil, rotor and roof
// rows exactly as the schema says: absent where the kind does not carry it
// (never 0), absent where the row has no value.
func TestColumns_Table(t *testing.T) {
	balance := []rig.Kind{rig.KindFoil, rig.KindBody, rig.KindRotor}
	all := append(slices.Clone(balance), rig.KindRoof)
	roof := []rig.Kind{rig.KindRoof}
	// name, kinds, present on the foil row, on the rotor row, on the roof
	// row with a design value, on the roof row without one.
	tests := []struct {
		name                        string
		kinds                       []rig.Kind
		foil, rotor, roofD, roofNoD bool
	}{
		{"run", all, true, true, true, true},
		{"segment", all, true, true, true, true},
		{"kind", all, true, true, true, true},
		{"t_start", all, true, true, true, true},
		{"t_end", all, true, true, true, true},
		{"n", all, true, true, true, true},
		{"n_eff", all, true, true, false, false}, // NaN on the roof rows
		{"n_eff_low", all, true, true, false, false},
		{"zone", roof, false, false, true, true},
		{"tap", roof, false, false, false, true},
		{"block", roof, false, false, true, true},
		{"alpha_deg", balance, true, false, false, false}, // no angle channel on the rotor
		{"alpha_u95_deg", balance, true, false, false, false},
		{"q_pa", all, true, true, true, true},
		{"q_u95_pa", all, true, true, true, true},
		{"speed_m_s", all, true, true, true, true},
		{"speed_u95_m_s", all, true, true, true, true},
		{"rho_kg_m3", all, true, true, true, true},
		{"mu_pa_s", all, true, true, true, true},
		{"re", balance, true, true, false, false},
		{"fn", balance, true, false, false, false}, // 0 (air) on the rotor row
		{"lift_n", balance, true, true, false, false},
		{"lift_u95_n", balance, true, true, false, false},
		{"drag_n", balance, true, true, false, false},
		{"drag_u95_n", balance, true, true, false, false},
		{"cl", balance, true, true, false, false},
		{"cl_u95", balance, true, true, false, false},
		{"cd", balance, true, true, false, false},
		{"cd_u95", balance, true, true, false, false},
		{"spin_ratio", []rig.Kind{rig.KindRotor}, false, true, false, false},
		{"spin_ratio_u95", []rig.Kind{rig.KindRotor}, false, true, false, false},
		{"design_cl", balance, true, false, false, false},
		{"design_cl_u95", balance, true, false, false, false},
		{"cp_mean", roof, false, false, true, true},
		{"cp_u95", roof, false, false, true, true},
		{"cp_rms", roof, false, false, true, true},
		{"cp_min", roof, false, false, true, true},
		{"cp_max", roof, false, false, true, true},
		{"cp_peak", roof, false, false, true, true},
		{"cp_peak_u95", roof, false, false, true, true},
		{"cp_peak_max", roof, false, false, true, true},
		{"cp_peak_max_u95", roof, false, false, true, true},
		{"cp_int", roof, false, false, true, true},
		{"cp_int_u95", roof, false, false, true, true},
		{"uplift_n", roof, false, false, true, true},
		{"uplift_u95_n", roof, false, false, true, true},
		{"q_at", roof, false, false, true, true},
		{"q_height_m", roof, false, false, true, false},
		{"turbulence_intensity", roof, false, false, true, true},
		{"direction_deg", roof, false, false, true, false},
		{"direction_spread_deg", roof, false, false, true, false},
		{"sector_deg", roof, false, false, true, false},
		{"sector_left", roof, false, false, true, false},
		{"samples_unblocked", roof, false, false, true, false},
		{"design_cp", roof, false, false, true, false},
		{"design_cp_u95", roof, false, false, true, false},
		{"design_vs", roof, false, false, true, false},
		{"design_side", roof, false, false, true, false},
		{"en", all, true, false, true, false},
		{"agrees", all, true, false, true, false},
	}
	cols := estimate.Columns()
	if len(cols) != len(tests) {
		t.Errorf("%d columns in the table, %d in this test: add the new column here", len(cols), len(tests))
	}
	f, r, rd, rn := foilSeg(), rotorSeg(), roofSeg(true), roofSeg(false)
	rows := []estimate.Row{estimate.NewRow(3, "", &f), estimate.NewRow(4, "", &r), estimate.NewRow(5, "", &rd), estimate.NewRow(5, "", &rn)}
	snake := regexp.MustCompile(`^[a-z][a-z0-9]*(_[a-z0-9]+)*$`)
	for i, tt := range tests {
		if i >= len(cols) {
			break
		}
		c := cols[i]
		if c.Name != tt.name {
			t.Errorf("column %d is %q, want %q (order is part of the schema)", i, c.Name, tt.name)
			continue
		}
		if !snake.MatchString(c.Name) || c.Doc == "" || c.Read == nil {
			t.Errorf("%s: name not snake_case, or no doc or reader", c.Name)
		}
		if !slices.Equal(c.Kinds, tt.kinds) {
			t.Errorf("%s kinds %v, want %v", c.Name, c.Kinds, tt.kinds)
		}
		for k, want := range []bool{tt.foil, tt.rotor, tt.roofD, tt.roofNoD} {
			v, ok := rows[k].Value(c.Name)
			if ok != want {
				t.Errorf("%s on row %d (%s): present %v, want %v (value %v)", c.Name, k, rows[k].Kind(), ok, want, v)
			}
			if f, isF := v.(float64); ok && isF && (math.IsNaN(f) || math.IsInf(f, 0)) {
				t.Errorf("%s on row %d is %v: a non-finite value must be absent", c.Name, k, f)
			}
		}
	}
}

// Ensure that a unit suffix and the Unit field agree (DEVELOPERS.md "Units in names": one unit
// per name), so a header built from Unit says what the name says.
func TestColumns_UnitMatchesName(t *testing.T) {
	suffix := map[string]string{"_pa": "Pa", "_deg": "°", "_m_s": "m/s", "_kg_m3": "kg/m³", "_pa_s": "Pa·s", "_n": "N", "_m": "m"}
	for _, c := range estimate.Columns() {
		want := ""
		longest := 0
		for s, u := range suffix {
			if strings.HasSuffix(c.Name, s) && len(s) > longest {
				want, longest = u, len(s)
			}
		}
		if c.Name == "n" || c.Name == "run" || c.Name == "segment" {
			want = ""
		}
		if c.Unit != want {
			t.Errorf("%s: unit %q, want %q from its name", c.Name, c.Unit, want)
		}
	}
}

// Ensure that a row renders its values as the exports and the API need
// them: degrees from radians, U95 = k·u (k = 1.96 at ν = ∞, GUM G.3), times
// in RFC 3339 UTC with the fractional digits needed, and that JSON round
// trips.
func TestRow_Values(t *testing.T) {
	f := foilSeg()
	row := estimate.NewRow(3, "", &f)
	if d := row.Float("alpha_deg"); math.Abs(d-4) > 1e-12 {
		t.Errorf("alpha_deg %v, want 4", d)
	}
	// k = 1.959964 for ν = ∞ (JCGM 100:2008, Table G.2: 1.960).
	if u := row.Float("cl_u95"); math.Abs(u-0.012*1.959964) > 1e-6 {
		t.Errorf("cl_u95 %v", u)
	}
	var ts string
	for _, fl := range row.Fields() {
		if fl.Column.Name == "t_start" {
			ts = fl.Text()
		}
	}
	if ts != "2025-06-14T07:31:00.25Z" {
		t.Errorf("t_start %q, want 2025-06-14T07:31:00.25Z", ts)
	}
	b, err := json.Marshal(row)
	if err != nil {
		t.Fatal(err)
	}
	var back estimate.Row
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatalf("%s: %v", b, err)
	}
	b2, _ := json.Marshal(back)
	if !bytes.Equal(b, b2) {
		t.Errorf("round trip:\n%s\n%s", b, b2)
	}
	if a, _ := row.Value("agrees"); a != true {
		t.Errorf("agrees %v for En = -0.4", a)
	}
}

// Ensure that rows stored before Segment.Kind existed get their kind from
// the zone, the run and the spin ratio, in that order.
func TestKindOf(t *testing.T) {
	tests := []struct {
		name string
		s    estimate.Segment
		run  rig.Kind
		want rig.Kind
	}{
		{"set by the estimator", estimate.Segment{Kind: rig.KindBody}, rig.KindFoil, rig.KindBody},
		{"zone", estimate.Segment{Zone: "edge"}, "", rig.KindRoof},
		{"run kind", estimate.Segment{}, rig.KindRotor, rig.KindRotor},
		{"balance row in a roof run", estimate.Segment{}, rig.KindRoof, rig.KindFoil},
		{"spin ratio", estimate.Segment{SpinRatio: 2}, "", rig.KindRotor},
		{"nothing known", estimate.Segment{}, "", rig.KindFoil},
	}
	for _, tt := range tests {
		if got := estimate.KindOf(&tt.s, tt.run); got != tt.want {
			t.Errorf("%s: %s, want %s", tt.name, got, tt.want)
		}
	}
}

// Ensure that Agrees is |En| ≤ 1, boundary included (ISO 13528 §9.7), and
// reports no comparison for NaN and ±Inf.
func TestAgrees(t *testing.T) {
	tests := []struct {
		en         float64
		agrees, ok bool
	}{
		{0, true, true}, {1, true, true}, {-1, true, true}, {1.0000001, false, true}, {-6.1, false, true},
		{math.NaN(), false, false}, {math.Inf(1), false, false},
	}
	for _, tt := range tests {
		if a, ok := estimate.Agrees(tt.en); a != tt.agrees || ok != tt.ok {
			t.Errorf("Agrees(%v) = %v, %v; want %v, %v", tt.en, a, ok, tt.agrees, tt.ok)
		}
	}
}

// Ensure that Num writes NaN as null and ±Inf as strings, and reads all
// three back (the stored records rely on it).
func TestNum_JSON(t *testing.T) {
	for _, x := range []float64{0, -1.5, 2.9e5, 1.8e-5, math.NaN(), math.Inf(1), math.Inf(-1)} {
		b, err := json.Marshal(estimate.Num(x))
		if err != nil {
			t.Fatal(err)
		}
		var back estimate.Num
		if err := json.Unmarshal(b, &back); err != nil {
			t.Fatalf("%s: %v", b, err)
		}
		if y := float64(back); y != x && !(math.IsNaN(x) && math.IsNaN(y)) {
			t.Errorf("%v → %s → %v", x, b, y)
		}
	}
	if b, _ := json.Marshal(estimate.Num(math.NaN())); string(b) != "null" {
		t.Errorf("NaN → %s", b)
	}
}

// columnsDoc renders docs/columns.md from the table.
func columnsDoc() []byte {
	var b bytes.Buffer
	b.WriteString(`# Result columns

One result row (a steady segment of a force-balance run, or one zone in one block of a roof
run) has the columns below, in this order. The segment exports (` + "`liftyard export --what segments --format json|csv`" + `),
the HTTP API (` + "`/api/v1/runs/{id}/segments`" + `, the run page), the MQTT segment message and the
report all render them from one table, ` + "`estimate/columns.go`" + `; this file is generated from it
(` + "`go test ./estimate -run TestColumns_Doc -update`" + `).

- A column that does not apply to the row's rig kind, or that the row has no value for (no
  design value, a number that could not be computed), is **absent** from JSON and an **empty
  cell** in CSV — never 0 and never null.
- A CSV export has the columns of the kinds it holds.
- Times are RFC 3339 in UTC, with as many fractional digits as the time needs
  (` + "`2025-06-14T09:31:15.00025Z`" + `).
- ` + "`_u95`" + ` marks an expanded uncertainty U = k·u at 95 % coverage, k from Student's t at the
  Welch–Satterthwaite degrees of freedom.
- Kinds: foil, body and rotor are force-balance rigs; roof is a roof mock-up with pressure taps.

| column | unit | kinds | meaning |
|---|---|---|---|
`)
	for _, c := range estimate.Columns() {
		unit := c.Unit
		if unit == "" {
			unit = "–"
		}
		kinds := make([]string, len(c.Kinds))
		for i, k := range c.Kinds {
			kinds[i] = string(k)
		}
		fmt.Fprintf(&b, "| `%s` | %s | %s | %s |\n", c.Name, unit, strings.Join(kinds, ", "), strings.ReplaceAll(c.Doc, "|", `\|`))
	}
	return b.Bytes()
}

// Ensure that docs/columns.md lists exactly the table's columns, as
// generated (go test ./estimate -run TestColumns_Doc -update rewrites it).
func TestColumns_Doc(t *testing.T) {
	path := filepath.Join("..", "docs", "columns.md")
	want := columnsDoc()
	if *update {
		if err := os.WriteFile(path, want, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./estimate -run TestColumns_Doc -update)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("docs/columns.md is not the column table; run go test ./estimate -run TestColumns_Doc -update")
	}
	names := regexp.MustCompile("(?m)^\\| `([a-z0-9_]+)` \\|").FindAllSubmatch(got, -1)
	if len(names) != len(estimate.Columns()) {
		t.Errorf("docs/columns.md lists %d columns, the table has %d", len(names), len(estimate.Columns()))
	}
}
