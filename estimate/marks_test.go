package estimate_test

import (
	"errors"
	"math"
	"strings"
	"testing"
	"time"

	"liftyard/estimate"
	"liftyard/rig"
)

// Ensure that a mark covering exactly the samples of an automatic segment
// gives the same result to 1e-12: marks and the steady test share Reduce.
func TestMarks_SameSamplesSameResult(t *testing.T) {
	sw := stdSweep
	auto, err := estimate.NewEstimator(testRig(), estimate.Config{})
	if err != nil {
		t.Fatal(err)
	}
	autoSegs := feed(t, auto, sw.blocks(7))
	if len(autoSegs) != len(sw.stepsDeg) {
		t.Fatalf("automatic: %d segments, want %d", len(autoSegs), len(sw.stepsDeg))
	}
	var marks []estimate.Mark
	for _, s := range autoSegs[1:4] {
		marks = append(marks, estimate.Mark{Start: s.TStart, End: s.TEnd, Label: "hold"})
	}
	byHand, err := estimate.NewEstimator(testRig(), estimate.Config{Marks: marks})
	if err != nil {
		t.Fatal(err)
	}
	segs := feed(t, byHand, sw.blocks(7))
	if len(segs) != len(marks) {
		t.Fatalf("%d segments from %d marks", len(segs), len(marks))
	}
	for i, s := range segs {
		a := autoSegs[i+1]
		if s.Index != i {
			t.Errorf("mark %d: Index %d", i, s.Index)
		}
		if s.N != a.N || !s.TStart.Equal(a.TStart) || !s.TEnd.Equal(a.TEnd) {
			t.Errorf("mark %d: N %d %s–%s, automatic N %d %s–%s", i, s.N, s.TStart, s.TEnd, a.N, a.TStart, a.TEnd)
		}
		for _, c := range []struct {
			name string
			got  float64
			want float64
		}{
			{"C_L", s.CL.X, a.CL.X}, {"u(C_L)", s.CL.U, a.CL.U}, {"C_D", s.CD.X, a.CD.X},
			{"alpha", s.AlphaRad.X, a.AlphaRad.X}, {"q", s.QPa.X, a.QPa.X},
		} {
			if math.Abs(c.got-c.want) > 1e-12*math.Max(1, math.Abs(c.want)) {
				t.Errorf("mark %d: %s %.15g, automatic %.15g", i, c.name, c.got, c.want)
			}
		}
	}
	if len(byHand.UnusedMarks()) != 0 {
		t.Errorf("unused marks %v", byHand.UnusedMarks())
	}
	// The live window does not depend on marks.
	la, _ := auto.Live()
	lm, _ := byHand.Live()
	if la.CL.X != lm.CL.X || la.N != lm.N {
		t.Errorf("live differs: automatic C_L %g N %d, marked %g N %d", la.CL.X, la.N, lm.CL.X, lm.N)
	}
}

// Ensure that a mark across an angle step (the rig moving) gives one
// segment whose scatter is visibly larger than a mark inside a hold, and
// that a short mark the steady test would drop (under MinDuration) still
// gives its segment: the user's marks override.
func TestMarks_AcrossMove(t *testing.T) {
	sw := stdSweep
	t0 := time.UnixMicro(sw.blocks(1)[0].T0Us)
	at := func(s float64) time.Time { return t0.Add(time.Duration(s * float64(time.Second))) }
	marks := []estimate.Mark{
		{Start: at(1.0), End: at(3.9), Label: "inside the -4° hold"},
		{Start: at(6.0), End: at(10.0), Label: "across the -2° to 0° step"},
		{Start: at(13.0), End: at(13.5), Label: "short, 0.5 s"},
	}
	e, err := estimate.NewEstimator(testRig(), estimate.Config{Marks: marks})
	if err != nil {
		t.Fatal(err)
	}
	segs := feed(t, e, sw.blocks(3))
	if len(segs) != 3 {
		t.Fatalf("%d segments from 3 marks", len(segs))
	}
	hold, across, short := segs[0], segs[1], segs[2]
	if want, _ := sw.truth(rig.Rad(-4)); math.Abs(hold.CL.X-want) > hold.CL.U95() {
		t.Errorf("hold: C_L %.4f ± %.4f misses the truth %.4f", hold.CL.X, hold.CL.U95(), want)
	}
	t.Logf("u(C_L): hold %.5f, across the step %.5f", hold.CL.U, across.CL.U)
	// The step moves C_L by 4.6·2° = 0.16: the Type A scatter over the
	// mark must dwarf that of a hold.
	if across.CL.U < 5*hold.CL.U {
		t.Errorf("across a move: u(C_L) %.5f, inside a hold %.5f: want at least 5× larger", across.CL.U, hold.CL.U)
	}
	// 200 Hz: a 4 s mark holds 801 samples, both ends included.
	if across.N != 801 || short.N != 101 {
		t.Errorf("samples: across %d (want 801), short %d (want 101)", across.N, short.N)
	}
	if !across.TStart.Equal(at(6)) || !across.TEnd.Equal(at(10)) {
		t.Errorf("across: %s–%s, want the mark's ends", across.TStart, across.TEnd)
	}
}

// Ensure that bad marks are refused with an error that names the mark and
// the fault, and that a mark outside the run gives no segment and is listed.
func TestMarks_Rejected(t *testing.T) {
	t0 := time.Date(2026, 5, 1, 9, 0, 0, 0, time.UTC)
	at := func(s float64) time.Time { return t0.Add(time.Duration(s * float64(time.Second))) }
	for _, tc := range []struct {
		name  string
		marks []estimate.Mark
		want  string
	}{
		{"reversed", []estimate.Mark{{Start: at(5), End: at(4)}}, "mark 1 ends"},
		{"empty", []estimate.Mark{{Start: at(5), End: at(5)}}, "mark 1 ends"},
		{"no end", []estimate.Mark{{Start: at(5)}}, "mark 1 has no start or no end"},
		{"overlap", []estimate.Mark{{Start: at(1), End: at(4)}, {Start: at(3), End: at(6)}}, "mark 2 (from"},
		{"touching", []estimate.Mark{{Start: at(1), End: at(4)}, {Start: at(4), End: at(6)}}, "overlaps mark 1"},
		{"out of order", []estimate.Mark{{Start: at(10), End: at(12)}, {Start: at(1), End: at(4)}}, "mark 2 starts before mark 1"},
		{"too long", []estimate.Mark{{Start: at(0), End: at(3600)}}, "longer than the 10m0s"},
		{"label", []estimate.Mark{{Start: at(1), End: at(2), Label: "a\nb"}}, "control character"},
		{"long label", []estimate.Mark{{Start: at(1), End: at(2), Label: strings.Repeat("x", 201)}}, "at most 200"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := estimate.NewEstimator(testRig(), estimate.Config{Marks: tc.marks})
			if !errors.Is(err, estimate.ErrMarks) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want ErrMarks naming %q", err, tc.want)
			}
		})
	}
	outside := []estimate.Mark{{Start: at(-100), End: at(-90), Label: "before the run"}}
	e, err := estimate.NewEstimator(testRig(), estimate.Config{Marks: outside})
	if err != nil {
		t.Fatal(err)
	}
	if segs := feed(t, e, stdSweep.blocks(1)); len(segs) != 0 {
		t.Errorf("%d segments from a mark outside the run", len(segs))
	}
	if u := e.UnusedMarks(); len(u) != 1 || u[0].Label != "before the run" {
		t.Errorf("unused marks %v", u)
	}
}

func TestMarkSeconds(t *testing.T) {
	t0 := time.Date(2026, 5, 1, 9, 0, 0, 0, time.UTC)
	m := estimate.Mark{Start: t0.Add(12 * time.Second), End: t0.Add(15500 * time.Millisecond)}
	if got := estimate.MarkSeconds(m, t0); got != "12.000–15.500 s" {
		t.Errorf("got %q", got)
	}
}
