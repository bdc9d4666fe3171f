package storage_test

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"flag"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/storage"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

// golden compares got with testdata/export/<name>.golden, or rewrites it
// with -update.
func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", "export", name+".golden")
	if *update {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./storage -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from golden:\n--- got\n%s\n--- want\n%s", name, got, want)
	}
}

// exportSegments is an invented three-step α sweep: no design value, a
// design value with En, and an n_eff that could not be estimated.
func exportSegments() (storage.Run, []estimate.Segment) {
	a, b, c := testSegment(0), testSegment(1), testSegment(2)
	b.DesignCL = calibrate.Value{X: 0.22, U: 0.01, Dof: math.Inf(1)}
	b.En = -0.83
	c.NEff = math.NaN()
	return storage.Run{ID: 3, Rig: "tow-fin-a", Kind: "foil"}, []estimate.Segment{a, b, c}
}

// Ensure that the segment export matches its golden files in both formats.
func TestExportSegments_Golden(t *testing.T) {
	run, segs := exportSegments()
	for _, format := range []string{"json", "csv"} {
		var buf bytes.Buffer
		if err := storage.ExportSegments(&buf, run, segs, format); err != nil {
			t.Fatal(err)
		}
		golden(t, "segments."+format, buf.Bytes())
	}
}

// Ensure that the JSON export is valid JSON with exactly the result
// columns that apply to a foil row and have a value (absent, never null or
// 0, where not), and U95 = k·u.
func TestExportSegments_JSONFields(t *testing.T) {
	run, segs := exportSegments()
	var buf bytes.Buffer
	if err := storage.ExportSegments(&buf, run, segs, "json"); err != nil {
		t.Fatal(err)
	}
	var rows []map[string]any
	if err := json.Unmarshal(buf.Bytes(), &rows); err != nil {
		t.Fatalf("export is not JSON: %v", err)
	}
	if len(rows) != 3 {
		t.Fatalf("%d rows", len(rows))
	}
	always := "run segment kind t_start t_end n alpha_deg alpha_u95_deg q_pa q_u95_pa speed_m_s speed_u95_m_s rho_kg_m3 mu_pa_s re " +
		"lift_n lift_u95_n drag_n drag_u95_n cl cl_u95 cd cd_u95"
	for i, row := range rows {
		want := strings.Fields(always)
		if i != 2 {
			want = append(want, "n_eff", "n_eff_low") // row 2 has a NaN n_eff
		}
		if i == 1 {
			want = append(want, "design_cl", "design_cl_u95", "en", "agrees")
		}
		if len(row) != len(want) {
			t.Errorf("row %d has %d fields, want %d: %v", i, len(row), len(want), row)
		}
		for _, k := range want {
			if _, ok := row[k]; !ok {
				t.Errorf("row %d lacks %q", i, k)
			}
		}
		for _, k := range []string{"zone", "cp_mean", "spin_ratio", "fn"} {
			if v, ok := row[k]; ok {
				t.Errorf("row %d has %s = %v on a foil row (not a roof or rotor; Fn is 0 here)", i, k, v)
			}
		}
	}
	if rows[1]["en"] != -0.83 || rows[1]["design_cl"] != 0.22 || rows[1]["agrees"] != true || rows[1]["kind"] != "foil" {
		t.Errorf("row 1 en %v design_cl %v agrees %v kind %v", rows[1]["en"], rows[1]["design_cl"], rows[1]["agrees"], rows[1]["kind"])
	}
	// α = 1 step of 2° (π/90 rad) is 2°.
	if d := rows[1]["alpha_deg"].(float64); math.Abs(d-2) > 1e-12 {
		t.Errorf("alpha_deg = %v, want 2", d)
	}
	// k for ν = 48.2 lies between t_0.975(40) = 2.021 and t_0.975(50) = 2.009
	// (Student t table, e.g. NIST/SEMATECH e-Handbook §1.3.6.7.2).
	if k := rows[0]["q_u95_pa"].(float64) / 6.1; k < 2.009 || k > 2.021 {
		t.Errorf("q coverage factor %v, want between 2.009 and 2.021", k)
	}
	// RFC 3339 in UTC with the fractional digits the time needs.
	if ts := rows[0]["t_end"].(string); ts != "2025-06-14T09:31:15.00025Z" {
		t.Errorf("t_end = %q", ts)
	}
	if ts := rows[0]["t_start"].(string); ts != "2025-06-14T09:31:00Z" {
		t.Errorf("t_start = %q", ts)
	}
}

// Ensure that the CSV export has the foil columns, one row per segment and
// empty cells where the JSON leaves a field out.
func TestExportSegments_CSV(t *testing.T) {
	run, segs := exportSegments()
	var buf bytes.Buffer
	if err := storage.ExportSegments(&buf, run, segs, "csv"); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 4 {
		t.Fatalf("%d records", len(recs))
	}
	col := map[string]int{}
	for j, h := range recs[0] {
		col[h] = j
	}
	for _, h := range []string{"zone", "cp_mean", "spin_ratio"} {
		if _, ok := col[h]; ok {
			t.Errorf("foil CSV has column %s", h)
		}
	}
	if recs[1][col["en"]] != "" || recs[2][col["en"]] != "-0.83" || recs[3][col["n_eff"]] != "" || recs[2][col["agrees"]] != "true" {
		t.Errorf("csv = %q", recs)
	}
}

// Ensure that an unknown format is refused with ErrFormat and empty input
// gives an empty array.
func TestExportSegments_Formats(t *testing.T) {
	if err := storage.ExportSegments(&bytes.Buffer{}, storage.Run{}, nil, "xlsx"); !errors.Is(err, storage.ErrFormat) ||
		!strings.Contains(err.Error(), `"xlsx"`) {
		t.Errorf("xlsx: %v", err)
	}
	var buf bytes.Buffer
	if err := storage.ExportSegments(&buf, storage.Run{}, nil, "json"); err != nil || buf.String() != "[]\n" {
		t.Errorf("empty json = %q, %v", buf.String(), err)
	}
}

// Ensure that the raw export of two sources at different rates writes one
// row per sample of the timeline source (balance: the first by name when
// the run has no rig file), each pitot cell the pitot readings either side
// of the row interpolated linearly, as the estimator joins them (a row on
// a pitot sample gets that reading; before the first and after the last,
// the nearest reading within one pitot period, 1.5 ms); columns say their
// source; and matches its golden.
func TestExportRaw_Golden(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	bal := func(seq uint64, t0 int64, v ...float64) *acquire.Block {
		b := &acquire.Block{Source: "balance", Seq: seq, T0Us: t0, DtUs: 1000}
		n := len(v) / 2
		b.Series = []acquire.Series{{Channel: "n_fore", Raw: v[:n]}, {Channel: "axial", Raw: v[n:]}}
		return b
	}
	pit := &acquire.Block{Source: "pitot", Seq: 0, T0Us: 1_000_500, DtUs: 1500,
		Series: []acquire.Series{{Channel: "dp", Raw: []float64{201.4, 201.9, 202.25}}}}
	writeBlocks(t, s, id,
		bal(0, 1_000_000, 812.1, 813, 814.5, -3.25, math.NaN(), -3.5),
		bal(1, 1_003_000, 815, 816, 2.5e-7, -3.75),
		pit)
	var buf bytes.Buffer
	if err := s.ExportRaw(&buf, id); err != nil {
		t.Fatal(err)
	}
	golden(t, "raw.csv", buf.Bytes())
	recs, err := csv.NewReader(bytes.NewReader(buf.Bytes())).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if strings.Join(recs[0], ",") != "t_s,balance/n_fore,balance/axial,pitot/dp" {
		t.Errorf("header %q", recs[0])
	}
	// balance at 1.000000, .001, .002, .003, .004; pitot at .0005, .002, .0035
	lerp := func(v0, v1 float64, f float64) float64 { return v0 + f*(v1-v0) }
	want := []float64{201.4, lerp(201.4, 201.9, 500.0/1500), 201.9, lerp(201.9, 202.25, 1000.0/1500), 202.25}
	if len(recs) != 1+len(want) {
		t.Fatalf("%d rows, want %d", len(recs)-1, len(want))
	}
	for i, w := range want {
		got, err := strconv.ParseFloat(recs[i+1][3], 64)
		if err != nil || got != w {
			t.Errorf("row %d (t %s): dp %q, want %v", i+1, recs[i+1][0], recs[i+1][3], w)
		}
	}
}
