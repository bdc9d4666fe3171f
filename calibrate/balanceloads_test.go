package calibrate_test

import (
	"errors"
	"strings"
	"testing"

	"liftyard/calibrate"
	"liftyard/rig"
)

// Ensure that a balance loadings file is read by column name, the no-load
// rows are subtracted, and each bad file is refused at its line.
func TestReadBalanceLoads(t *testing.T) {
	outs, comps := []string{"n_fore", "n_aft"}, []string{"normal"}
	good := "# bench loadings (invented)\nn_aft,applied_normal,n_fore\n0.5,0,1\n50.5,100,51\n0.5,0,1\n"
	loads, zero, err := calibrate.ReadBalanceLoads(strings.NewReader(good), outs, comps)
	if err != nil {
		t.Fatal(err)
	}
	if len(loads) != 3 || zero[0] != 1 || zero[1] != 0.5 || loads[1].Outputs[0] != 50 || loads[1].Outputs[1] != 50 || loads[1].Applied[0] != 100 {
		t.Errorf("loads %+v, zero %v", loads, zero)
	}
	for _, tc := range []struct {
		name, text, want string
		line             int
	}{
		{"unknown column", "n_fore,n_aft,applied_normal,extra\n", `column 4 "extra"`, 1},
		{"missing applied", "n_fore,n_aft\n1,2\n", "no column applied_normal", 1},
		{"missing output", "n_fore,applied_normal\n1,2\n", "no column n_aft", 1},
		{"short row", "n_fore,n_aft,applied_normal\n1,2\n", "2 fields, the header has 3", 2},
		{"not a number", "n_fore,n_aft,applied_normal\n1,2,x\n", `field 3 "x" is not a finite number`, 2},
		{"infinite", "n_fore,n_aft,applied_normal\n1,Inf,0\n", "not a finite number", 2},
		{"empty", "# nothing\n", "no loadings", 0},
		{"header only", "n_fore,n_aft,applied_normal\n", "no loadings", 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, _, err := calibrate.ReadBalanceLoads(strings.NewReader(tc.text), outs, comps)
			var re *rig.Error
			if !errors.As(err, &re) || !errors.Is(err, calibrate.ErrBalanceFile) {
				t.Fatalf("error %v: want a *rig.Error wrapping ErrBalanceFile", err)
			}
			if re.Line != tc.line || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %q at line %d, want %q at line %d", err, re.Line, tc.want, tc.line)
			}
		})
	}
}

// FuzzReadBalanceLoads ensures that no loadings file panics the reader and
// that what it accepts is finite.
func FuzzReadBalanceLoads(f *testing.F) {
	f.Add("n_fore,n_aft,applied_normal\n1,2,0\n51,52,100\n")
	f.Add("applied_normal,n_aft,n_fore\n\"0\",1,2\n")
	f.Fuzz(func(t *testing.T, text string) {
		loads, _, err := calibrate.ReadBalanceLoads(strings.NewReader(text), []string{"n_fore", "n_aft"}, []string{"normal"})
		if err != nil {
			return
		}
		for _, l := range loads {
			for _, v := range append(l.Applied, l.Outputs...) {
				if v != v || v > 1e308 || v < -1e308 {
					t.Fatalf("accepted a value that is not finite: %v", l)
				}
			}
		}
	})
}
