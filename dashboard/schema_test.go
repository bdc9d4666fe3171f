package dashboard_test

import (
	"bytes"
	"encoding/json"
	"maps"
	"math"
	"net/http"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"liftyard/calibrate"
	"liftyard/dashboard"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// fieldSets returns the keys of each JSON object in rows, sorted.
func fieldSets(rows []map[string]json.RawMessage) [][]string {
	out := make([][]string, len(rows))
	for i, r := range rows {
		out[i] = slices.Sorted(maps.Keys(r))
	}
	return out
}

// Ensure that, for the same run, the segment export (export --format json),
// the API's segment rows and the MQTT segment message carry the same set of
// field names, row by row, for a foil run and a roof run (issue 9), and that
// the roof rows carry no force-balance field and the foil rows no roof or
// rotor field.
func TestSegmentFields_ExportAPIAndMQTTAgree(t *testing.T) {
	foilRun := storage.Run{Rig: "strut-b", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.12, AreaKind: "planform", Started: epoch}
	foil := []estimate.Segment{segment(0, 0, 0.02), segment(1, 4, 0.43), segment(2, 8, 0.81)}
	foil[1].DesignCL, foil[1].En = v(0.44, 0.01), -0.4
	foil[2].NEff = math.NaN()
	roofRunRec, roof := roofRun()
	roofRunRec.ID = 0
	for i := range foil {
		foil[i].Kind = rig.KindFoil // as the estimator sets it; the store does not keep it
	}
	for i := range roof {
		roof[i].Kind = rig.KindRoof
		roof[i].MuPaS = 1.8e-5
	}
	st, err := storage.Open(filepath.Join(t.TempDir(), "liftyard.db"), storage.Options{Now: fixedNow})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	s, _ := newServer(t, dashboard.Config{Runs: st})

	for _, c := range []struct {
		name      string
		run       storage.Run
		segs      []estimate.Segment
		forbidden []string
		required  []string
	}{
		{"foil", foilRun, foil, []string{"zone", "cp_mean", "uplift_n", "design_cp", "spin_ratio", "fn"},
			[]string{"run", "segment", "kind", "t_start", "alpha_deg", "re", "cl", "cl_u95"}},
		{"roof", roofRunRec, roof, []string{"alpha_deg", "alpha_u95_deg", "re", "fn", "lift_n", "cl", "cd", "spin_ratio", "design_cl"},
			[]string{"run", "segment", "kind", "t_start", "zone", "cp_mean", "cp_u95", "cp_peak", "q_pa"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			id, err := st.CreateRun(c.run)
			if err != nil {
				t.Fatal(err)
			}
			if err := st.CorrectRun(id, c.segs, "test rows", nil); err != nil {
				t.Fatal(err)
			}
			run, err := st.Run(id)
			if err != nil {
				t.Fatal(err)
			}
			stored, err := st.Segments(id)
			if err != nil {
				t.Fatal(err)
			}

			var exp bytes.Buffer
			if err := storage.ExportSegments(&exp, run, stored, "json"); err != nil {
				t.Fatal(err)
			}
			var expRows []map[string]json.RawMessage
			if err := json.Unmarshal(exp.Bytes(), &expRows); err != nil {
				t.Fatalf("export: %v\n%s", err, exp.Bytes())
			}

			rec := get(t, s.Handler(), "GET", "/api/v1/runs/"+itoa(id)+"/segments", nil)
			if rec.Code != http.StatusOK {
				t.Fatalf("GET segments: %d %s", rec.Code, rec.Body)
			}
			var apiRows []map[string]json.RawMessage
			if err := json.Unmarshal(rec.Body.Bytes(), &apiRows); err != nil {
				t.Fatalf("API: %v\n%s", err, rec.Body)
			}

			var mqttRows []map[string]json.RawMessage
			for _, sg := range c.segs { // as the recorder publishes them, before storage
				var m map[string]json.RawMessage
				if err := json.Unmarshal(dashboard.EncodeSegment(id, sg), &m); err != nil {
					t.Fatal(err)
				}
				mqttRows = append(mqttRows, m)
			}

			e, a, m := fieldSets(expRows), fieldSets(apiRows), fieldSets(mqttRows)
			if len(e) != len(c.segs) || len(a) != len(c.segs) || len(m) != len(c.segs) {
				t.Fatalf("rows: export %d, API %d, MQTT %d, want %d", len(e), len(a), len(m), len(c.segs))
			}
			for i := range e {
				if !slices.Equal(e[i], a[i]) || !slices.Equal(e[i], m[i]) {
					t.Errorf("row %d fields differ:\nexport %v\nAPI    %v\nMQTT   %v", i, e[i], a[i], m[i])
				}
				for _, k := range c.forbidden {
					if slices.Contains(e[i], k) {
						t.Errorf("row %d has %s on a %s row", i, k, c.name)
					}
				}
				for _, k := range c.required {
					if !slices.Contains(e[i], k) {
						t.Errorf("row %d lacks %s", i, k)
					}
				}
				// Same values too, not only the same names (times in one format).
				for _, k := range []string{"t_start", "t_end", "q_pa", "kind"} {
					if string(expRows[i][k]) != string(apiRows[i][k]) || string(expRows[i][k]) != string(mqttRows[i][k]) {
						t.Errorf("row %d %s: export %s, API %s, MQTT %s", i, k, expRows[i][k], apiRows[i][k], mqttRows[i][k])
					}
				}
			}
		})
	}
}

func itoa(id uint64) string { return strconv.FormatUint(id, 10) }

// Ensure that while a roof run records, its run page, its API record and
// its segment rows answer 200 with the published rows (issue 9: the kept
// roof rows could not be decoded, "json: cannot set embedded pointer to
// unexported struct", and every one answered 500).
func TestRecordingRoofRun_PagesAnswer(t *testing.T) {
	s, logs := newServer(t, dashboard.Config{Runs: testRuns(), Live: true})
	run, segs := roofRun()
	run.ID, run.Status, run.Ended = 9, storage.StatusRecording, time.Time{}
	s.SetRun(run) // not in the store: served from memory
	for _, sg := range segs[:3] {
		sg.Kind = rig.KindRoof
		s.PublishSegment(sg)
	}
	for _, path := range []string{"/runs/9", "/api/v1/runs/9", "/api/v1/runs/9/segments", "/runs/9/zones.svg"} {
		rec := get(t, s.Handler(), "GET", path, nil)
		if rec.Code != http.StatusOK {
			t.Errorf("GET %s: %d %s\nlog: %s", path, rec.Code, rec.Body, logs)
		}
	}
	rec := get(t, s.Handler(), "GET", "/api/v1/runs/9/segments", nil)
	var rows []map[string]any
	if err := json.Unmarshal(rec.Body.Bytes(), &rows); err != nil {
		t.Fatal(err)
	}
	if len(rows) != 3 || rows[0]["zone"] != "corner" || rows[0]["agrees"] != false || rows[1]["zone"] != "edge" {
		t.Fatalf("rows %v", rows)
	}
	if _, ok := rows[1]["agrees"]; ok {
		t.Errorf("edge has no design value, yet agrees = %v", rows[1]["agrees"])
	}
	page := get(t, s.Handler(), "GET", "/runs/9", nil).Body.String()
	// corner: net Cp −0.9 with U95 = 1.96·0.05 = 0.098, two significant digits.
	for _, want := range []string{"corner", "edge", "field", "−0.900 ± 0.098"} {
		if !strings.Contains(page, want) {
			t.Errorf("run page lacks %q", want)
		}
	}
}

// Ensure that a roof row survives encode → decode (the live hub's kept
// rows) with its values, and that a row with an unknown field is refused.
func TestSegmentRow_RoofRoundTrip(t *testing.T) {
	_, segs := roofRun()
	sg := segs[0]
	sg.DesignCp = calibrate.Value{X: -2.2, U: 0.125, Dof: math.Inf(1)}
	b := dashboard.EncodeSegment(5, sg)
	var r estimate.Row
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatalf("decode %s: %v", b, err)
	}
	again, err := json.Marshal(r)
	if err != nil || !bytes.Equal(again, b) {
		t.Errorf("round trip:\n%s\n%s (%v)", b, again, err)
	}
	if z, _ := r.Value("zone"); z != "corner" || r.Float("cp_mean") != -0.9 || r.Kind() != rig.KindRoof {
		t.Errorf("decoded zone %v cp_mean %v kind %v", z, r.Float("cp_mean"), r.Kind())
	}
	if err := json.Unmarshal([]byte(`{"run":1,"alpha_rad":0.1}`), &r); err == nil || !strings.Contains(err.Error(), `"alpha_rad"`) {
		t.Errorf("unknown column: %v", err)
	}
}
