package rig_test

import (
	"errors"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"

	"liftyard/rig"
)

// Ensure that [wind] is optional (the example roof rig, written before it,
// parses to the defaults), that its keys parse to SI, and that a bad value
// or a missing companion key is an error naming its line.
func TestParse_Wind(t *testing.T) {
	base, err := os.ReadFile("../testdata/rigs/roof-yard.toml")
	if err != nil {
		t.Fatal(err)
	}
	r, err := rig.Parse("roof-yard.toml", base)
	if err != nil {
		t.Fatal(err)
	}
	if r.Wind.Block != 0 || r.Wind.Converts() || r.Wind.SectorRad != rig.DefaultSectorRad || r.Zones[0].DesignValue != rig.DesignMean || r.Zones[0].DesignQ != rig.DesignMean {
		t.Errorf("defaults: %+v, zone %+v", r.Wind, r.Zones[0])
	}
	lines := strings.Count(string(base), "\n")
	for _, tc := range []struct {
		name, add string
		err       error
		want      string
	}{
		{"ok log", "[wind]\nblock = \"5m\"\nmast_height_m = 3\nreference_height_m = 10\nprofile = \"log\"\nroughness_m = 0.05\nsector_deg = 45\n", nil, ""},
		{"ok power", "[wind]\nmast_height_m = 3\nreference_height_m = 6\nprofile = \"power\"\nexponent = 0.2\nprofile_u_pct = 4\n", nil, ""},
		{"bad block", "[wind]\nblock = \"ten\"\n", rig.ErrValue, `roof-yard.toml:%d:1: wind: block "ten" must be a positive duration`},
		{"no mast", "[wind]\nreference_height_m = 10\n", rig.ErrMissing, "roof-yard.toml:%d:1: wind: reference_height_m needs mast_height_m"},
		{"no profile", "[wind]\nmast_height_m = 3\nreference_height_m = 10\n", rig.ErrMissing, "needs a profile"},
		{"log no z0", "[wind]\nmast_height_m = 3\nreference_height_m = 10\nprofile = \"log\"\n", rig.ErrMissing, "needs roughness_m"},
		{"exponent range", "[wind]\nexponent = 1.5\n", rig.ErrValue, "exponent 1.5 must lie between 0 and 1"},
		{"profile word", "[wind]\nprofile = \"logg\"\n", rig.ErrValue, "did you mean log?"},
		{"design_value word", "", rig.ErrValue, `design_value "gust" is not known`},
	} {
		data := string(base) + "\n" + tc.add
		if tc.name == "design_value word" {
			data = strings.Replace(string(base), "design_u  = 0.25\n", "design_u  = 0.25\ndesign_value = \"gust\"\n", 1)
		}
		_, err := rig.Parse("roof-yard.toml", []byte(data))
		if tc.err == nil {
			if err != nil {
				t.Errorf("%s: %v", tc.name, err)
			}
			continue
		}
		if !errors.Is(err, tc.err) {
			t.Errorf("%s: err %v, want %v", tc.name, err, tc.err)
			continue
		}
		want := tc.want
		want = strings.Replace(want, "%d", strconv.Itoa(lines+3), 1)
		if !strings.Contains(err.Error(), want) {
			t.Errorf("%s: error %q lacks %q", tc.name, err, want)
		}
	}
	r, err = rig.Parse("roof-yard.toml", []byte(string(base)+"\n[wind]\nblock = \"5m\"\nmast_height_m = 3\nreference_height_m = 10\nprofile = \"log\"\nroughness_m = 0.05\nsector_deg = 45\n"))
	if err != nil {
		t.Fatal(err)
	}
	if r.Wind.Block != 5*time.Minute || r.Wind.MastHeightM != 3 || r.Wind.ReferenceHeightM != 10 || r.Wind.RoughnessM != 0.05 || r.Wind.SectorRad != rig.Rad(45) || !r.Wind.Converts() {
		t.Errorf("wind %+v", r.Wind)
	}
}
