package rig_test

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"liftyard/rig"
)

// Ensure that [lift] design takes a CSV path (resolved against the rig
// file's folder) or "thin-airfoil" (kept as is), and that anything else is
// refused at its line.
func TestParse_LiftDesign(t *testing.T) {
	base, err := os.ReadFile(filepath.Join(rigsDir, "foil-towtank.toml"))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name, design, want string
		errText            string
	}{
		{"relative csv", "design/fin.csv", filepath.Join("some", "dir", "design", "fin.csv"), ""},
		{"absolute csv", "/data/fin.CSV", "/data/fin.CSV", ""},
		{"thin airfoil", "thin-airfoil", "thin-airfoil", ""},
		{"unknown", "naca", "", `lift: design "naca": want a design-curve CSV file (columns alpha_deg,cl[,cl_u95]) or "thin-airfoil"`},
	} {
		t.Run(c.name, func(t *testing.T) {
			text := string(base) + "design           = \"" + c.design + "\"\n"
			line := strings.Count(text, "\n")
			r, err := rig.Parse(filepath.Join("some", "dir", "rig.toml"), []byte(text))
			if c.errText == "" {
				if err != nil {
					t.Fatal(err)
				}
				if r.Lift.Design != c.want {
					t.Errorf("design = %q, want %q", r.Lift.Design, c.want)
				}
				return
			}
			var errs rig.Errors
			if !errors.As(err, &errs) || len(errs) != 1 {
				t.Fatalf("err = %v, want one problem", err)
			}
			e := errs[0]
			if !strings.Contains(e.Error(), c.errText) || !errors.Is(e, rig.ErrValue) || e.Line != line || e.Key != "lift.design" {
				t.Errorf("got %v (line %d key %q), want %q at line %d", e, e.Line, e.Key, c.errText, line)
			}
		})
	}
}
