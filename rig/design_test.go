package rig_test

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"liftyard/rig"
)

// Ensure that [lift] design takes a CSV path in the rig file's folder or
// below it (resolved against the folder) or "thin-airfoil" (kept as is),
// and that anything else — a path leaving the folder (issue 16:
// "../secrets.csv" made the report print another file's first line) — is
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
		{"absolute csv outside", "/data/fin.CSV", "", `lift: design must name a CSV file in the rig file's folder or below it (a relative path without ..), not "/data/fin.CSV"`},
		{"parent folder", "../secrets.csv", "", `not "../secrets.csv"`},
		{"down and out", "design/../../x.csv", "", `not "design/../../x.csv"`},
		{"down and back", "design/../fin.csv", filepath.Join("some", "dir", "fin.csv"), ""},
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

// Ensure that [lift] design_alpha_zero_deg is optional (0 when absent, so
// every rig file of today reads the same), gives the thin-airfoil design's
// zero-lift angle in rad, survives Format → Parse, and is refused at its line
// with a design CSV (which states its own) or outside ±30°.
func TestParse_DesignAlphaZero(t *testing.T) {
	base, err := os.ReadFile(filepath.Join(rigsDir, "foil-towtank.toml"))
	if err != nil {
		t.Fatal(err)
	}
	if r, err := rig.Parse("rig.toml", base); err != nil || r.Lift.DesignAlphaZeroRad != 0 {
		t.Fatalf("without the key: α_L0 %v, err %v; want 0", r.Lift.DesignAlphaZeroRad, err)
	}
	for _, c := range []struct {
		name, lines string
		wantDeg     float64
		errText     string
	}{
		{"thin airfoil, cambered", "design = \"thin-airfoil\"\ndesign_alpha_zero_deg = -2.077\n", -2.077, ""},
		{"with a csv", "design = \"fin.csv\"\ndesign_alpha_zero_deg = -2\n", 0, `design_alpha_zero_deg applies to design = "thin-airfoil" only`},
		{"too large", "design = \"thin-airfoil\"\ndesign_alpha_zero_deg = 45\n", 0, "within -30 to 30 degrees"},
	} {
		t.Run(c.name, func(t *testing.T) {
			text := string(base) + c.lines
			line := strings.Count(text, "\n")
			r, err := rig.Parse("rig.toml", []byte(text))
			if c.errText == "" {
				if err != nil {
					t.Fatal(err)
				}
				near(t, "α_L0 (deg)", rig.Deg(r.Lift.DesignAlphaZeroRad), c.wantDeg, 1e-12)
				r2, err := rig.Parse("rig.toml", rig.Format(r))
				if err != nil {
					t.Fatal(err)
				}
				if r2.Lift.DesignAlphaZeroRad != r.Lift.DesignAlphaZeroRad {
					t.Errorf("round trip: %g, want %g", r2.Lift.DesignAlphaZeroRad, r.Lift.DesignAlphaZeroRad)
				}
				return
			}
			var errs rig.Errors
			if !errors.As(err, &errs) || len(errs) != 1 {
				t.Fatalf("err = %v, want one problem", err)
			}
			e := errs[0]
			if !strings.Contains(e.Error(), c.errText) || !errors.Is(e, rig.ErrValue) || e.Line != line || e.Key != "lift.design_alpha_zero_deg" {
				t.Errorf("got %v (line %d key %q), want %q at line %d", e, e.Line, e.Key, c.errText, line)
			}
		})
	}
}

// Ensure that the design CSV is opened inside the rig file's folder only:
// a file there opens, a symbolic link in the folder that points out of it
// is refused (os.Root), and the refusal quotes the name, never the content.
func TestOpenDesign_Confined(t *testing.T) {
	base, err := os.ReadFile(filepath.Join(rigsDir, "foil-towtank.toml"))
	if err != nil {
		t.Fatal(err)
	}
	outside := t.TempDir()
	secret := filepath.Join(outside, "secrets.csv")
	if err := os.WriteFile(secret, []byte("alpha_deg,cl\nTOP-SECRET,1\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "fin.csv"), []byte("alpha_deg,cl\n0,0\n4,0.4\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(secret, filepath.Join(dir, "linked.csv")); err != nil {
		t.Fatal(err)
	}
	open := func(design string) error {
		t.Helper()
		text := string(base) + "design           = \"" + design + "\"\n"
		r, err := rig.Parse(filepath.Join(dir, "rig.toml"), []byte(text))
		if err != nil {
			t.Fatal(err)
		}
		f, err := r.Lift.OpenDesign()
		if err == nil {
			f.Close()
		}
		return err
	}
	if err := open("fin.csv"); err != nil {
		t.Errorf("a design in the rig's folder: %v", err)
	}
	err = open("linked.csv")
	if err == nil {
		t.Fatal("a symbolic link out of the rig's folder was followed")
	}
	if strings.Contains(err.Error(), "TOP-SECRET") || !strings.Contains(err.Error(), "linked.csv") {
		t.Errorf("refusal: %v", err)
	}
	// A rig read from a run (no file name): the name is looked up inside
	// the given folder only.
	if f, err := rig.OpenInDir(dir, "../"+filepath.Base(outside)+"/secrets.csv"); err == nil {
		f.Close()
		t.Error("OpenInDir left its folder")
	}
}
