package storage_test

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/storage"
)

// roofSegment is one zone in one 10-minute block of an invented roof
// mock-up (values made up for the test; a design value on "corner" only).
func roofSegment(i int, zone string) estimate.Segment {
	t0 := time.Date(2025, 9, 2, 11, 0, 0, 0, time.UTC).Add(time.Duration(i/3) * 10 * time.Minute)
	sg := estimate.Segment{
		Index: i, TStart: t0, TEnd: t0.Add(10*time.Minute - time.Millisecond), N: 60000, NEff: 850,
		QPa:        calibrate.Value{X: 96.4, U: 0.9, Dof: 300},
		SpeedMPerS: calibrate.Value{X: 12.5, U: 0.06, Dof: 300},
		RhoKgPerM3: 1.232, MuPaS: 1.77e-5,
		En:      math.NaN(),
		Zone:    zone,
		CpMean:  calibrate.Value{X: -1.31 - 0.01*float64(i), U: 0.045, Dof: 210},
		CpRMS:   0.28,
		CpPeak:  -2.74,
		UpliftN: calibrate.Value{X: -252.6, U: 9.3, Dof: 210},
		Block:   i / 3, CpMin: -3.05, CpMax: -0.35, CpPeakU: 0.11, CpPeakMax: -0.31, CpPeakMaxU: 0.04,
		CpInt: calibrate.Value{X: 0.2, Dof: math.Inf(1)}, QAt: "mast", TurbulenceIntensity: 0.16,
		DirectionRad: 4.36, DirectionSpreadRad: 0.21, SectorRad: 4.19, SectorOutFrac: 0.02,
	}
	if zone == "corner" {
		sg.DesignCp = calibrate.Value{X: -2.2, U: 0.125, Dof: math.Inf(1)}
		sg.En = 6.1
	}
	return sg
}

func roofSegments() (storage.Run, []estimate.Segment) {
	return storage.Run{ID: 7, Rig: "roof-yard", Kind: "roof"},
		[]estimate.Segment{roofSegment(0, "corner"), roofSegment(1, "edge"), roofSegment(2, "field")}
}

// Ensure that the roof fields of a segment survive the store, +Inf
// degrees of freedom and NaN En included, and that a force-balance segment
// comes back without them.
func TestSegments_RoofRoundTrip(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	_, segs := roofSegments()
	foil := testSegment(3)
	writeItems(t, s, id, storage.Item{Segment: &segs[0]}, storage.Item{Segment: &segs[1]},
		storage.Item{Segment: &segs[2]}, storage.Item{Segment: &foil})
	got, err := s.Segments(id)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 4 {
		t.Fatalf("%d segments", len(got))
	}
	for i, want := range append(segs, foil) {
		g := got[i]
		if math.IsNaN(want.En) != math.IsNaN(g.En) || !math.IsNaN(want.En) && g.En != want.En {
			t.Errorf("segment %d En = %v, want %v", i, g.En, want.En)
		}
		g.En, want.En = 0, 0
		if !g.TStart.Equal(want.TStart) || !g.TEnd.Equal(want.TEnd) {
			t.Errorf("segment %d times %v–%v, want %v–%v", i, g.TStart, g.TEnd, want.TStart, want.TEnd)
		}
		g.TStart, want.TStart, g.TEnd, want.TEnd = time.Time{}, time.Time{}, time.Time{}, time.Time{}
		if !reflect.DeepEqual(g, want) {
			t.Errorf("segment %d:\n got %+v\nwant %+v", i, g, want)
		}
	}
	if !math.IsInf(got[0].DesignCp.Dof, 1) || got[1].DesignCp != (calibrate.Value{}) {
		t.Errorf("design_cp: corner %+v, edge %+v", got[0].DesignCp, got[1].DesignCp)
	}
}

// Ensure that a roof export matches its golden files in both formats.
func TestExportSegments_RoofGolden(t *testing.T) {
	run, segs := roofSegments()
	for _, format := range []string{"json", "csv"} {
		var buf bytes.Buffer
		if err := storage.ExportSegments(&buf, run, segs, format); err != nil {
			t.Fatal(err)
		}
		golden(t, "roof-segments."+format, buf.Bytes())
	}
}

// Ensure that roof rows carry the roof fields (zone, cp_mean, cp_peak,
// cp_u95, ...), leave out the force-balance fields that do not apply (no
// alpha_deg, re, cl or spin_ratio on a roof row: absent, not null or 0),
// compare En with design_cp, and that U95 = k·u with k from Student t.
func TestExportSegments_RoofJSON(t *testing.T) {
	run, segs := roofSegments()
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
	want := "run segment kind t_start t_end n n_eff n_eff_low zone block q_pa q_u95_pa speed_m_s speed_u95_m_s rho_kg_m3 mu_pa_s " +
		"cp_mean cp_u95 cp_rms cp_min cp_max cp_peak cp_peak_u95 cp_peak_max cp_peak_max_u95 cp_int cp_int_u95 uplift_n uplift_u95_n " +
		"q_at turbulence_intensity direction_deg direction_spread_deg sector_deg sector_left"
	for i, row := range rows {
		w := strings.Fields(want)
		if i == 0 {
			w = append(w, "design_cp", "design_cp_u95", "design_side", "en", "agrees")
		}
		if len(row) != len(w) {
			t.Errorf("row %d has %d fields, want %d: %v", i, len(row), len(w), row)
		}
		for _, k := range w {
			if _, ok := row[k]; !ok {
				t.Errorf("row %d lacks %q", i, k)
			}
		}
		for _, k := range []string{"alpha_deg", "re", "fn", "lift_n", "cl", "cl_u95", "cd", "cd_u95", "spin_ratio", "design_cl"} {
			if v, ok := row[k]; ok {
				t.Errorf("row %d has %s = %v on a roof row, want it absent", i, k, v)
			}
		}
	}
	if rows[0]["zone"] != "corner" || rows[0]["design_cp"] != -2.2 || rows[0]["en"] != 6.1 || rows[0]["agrees"] != false {
		t.Errorf("row 0 zone %v design_cp %v en %v agrees %v", rows[0]["zone"], rows[0]["design_cp"], rows[0]["en"], rows[0]["agrees"])
	}
	if rows[2]["cp_mean"] != -1.33 || rows[2]["cp_peak"] != -2.74 || rows[2]["uplift_n"] != -252.6 {
		t.Errorf("row 2 cp_mean %v cp_peak %v uplift_n %v", rows[2]["cp_mean"], rows[2]["cp_peak"], rows[2]["uplift_n"])
	}
	// ν = 210: t_0.975 lies between t(200) = 1.972 and t(100) = 1.984
	// (Student t table, NIST/SEMATECH e-Handbook §1.3.6.7.2).
	if k := rows[0]["cp_u95"].(float64) / 0.045; k < 1.971 || k > 1.973 {
		t.Errorf("cp coverage factor %v, want about 1.971–1.972", k)
	}
	if k := rows[0]["uplift_u95_n"].(float64) / 9.3; k < 1.971 || k > 1.973 {
		t.Errorf("uplift coverage factor %v", k)
	}
}

// Ensure that a CSV with roof rows and a force-balance row has the columns
// of both kinds, each row empty in the other kind's columns, while a
// roof-only CSV has no force-balance columns (the roof golden).
func TestExportSegments_RoofCSV(t *testing.T) {
	run, segs := roofSegments()
	segs = append(segs, testSegment(3))
	var buf bytes.Buffer
	if err := storage.ExportSegments(&buf, run, segs, "csv"); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 5 {
		t.Fatalf("%d records", len(recs))
	}
	col := map[string]int{}
	for j, h := range recs[0] {
		col[h] = j
	}
	roofOnly := []string{"zone", "cp_mean", "cp_u95", "cp_rms", "cp_peak", "uplift_n", "uplift_u95_n", "design_cp", "design_cp_u95"}
	balanceOnly := []string{"alpha_deg", "re", "cl", "cd", "design_cl"}
	for _, h := range append(append([]string(nil), roofOnly...), balanceOnly...) {
		if _, ok := col[h]; !ok {
			t.Fatalf("csv header %q lacks %s", recs[0], h)
		}
	}
	if r := recs[1]; r[col["zone"]] != "corner" || r[col["cp_mean"]] != "-1.31" || r[col["en"]] != "6.1" || r[col["kind"]] != "roof" {
		t.Errorf("roof row %q", r)
	}
	for _, h := range balanceOnly {
		if v := recs[1][col[h]]; v != "" {
			t.Errorf("roof row column %s = %q, want empty", h, v)
		}
	}
	for _, h := range roofOnly {
		if v := recs[4][col[h]]; v != "" {
			t.Errorf("force-balance row column %s = %q, want empty", h, v)
		}
	}
	if recs[4][col["cl"]] == "" || recs[4][col["kind"]] != "foil" {
		t.Errorf("force-balance row %q", recs[4])
	}
}
