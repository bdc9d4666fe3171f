package estimate_test

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// twoSourceRig is an invented tow rig whose balance logs on one device and
// whose pitot logs on another (a Wi-Fi node on the carriage).
func twoSourceRig() *rig.Rig {
	r := testRig()
	r.Sources = []rig.Source{{Name: "balance", Type: rig.SourceSerial}, {Name: "pitotnode", Type: rig.SourceMQTT}}
	return r
}

// Ensure that channels from two sources whose device clocks are seconds
// apart are joined at the right instant once an Aligner has put them on the
// host timeline: with q swinging ±30 % twice a second and the loads
// following it, C_L comes out right only if each load sample meets the q of
// its own instant (issue 4).
func TestEstimator_JoinsAlignedSources(t *testing.T) {
	const (
		rateHz = 200
		dtUs   = 1e6 / rateHz
		blockN = 20
		clTrue = 0.6
		area   = 0.1
	)
	start := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	offsets := map[string]time.Duration{"balance": 2400 * time.Millisecond, "pitotnode": -1300 * time.Millisecond}
	delays := map[string]time.Duration{"balance": time.Millisecond, "pitotnode": 12 * time.Millisecond}
	qAt := func(t time.Time) float64 {
		s := t.Sub(start).Seconds()
		return 400 * (1 + 0.3*math.Sin(2*math.Pi*2*s))
	}
	run := func(align bool) estimate.Segment {
		t.Helper()
		est, err := estimate.NewEstimator(twoSourceRig(), estimate.Config{})
		if err != nil {
			t.Fatal(err)
		}
		var al acquire.Aligner
		rng := rand.New(rand.NewPCG(9, 9))
		var segs []estimate.Segment
		for k := 0; k < 300; k++ { // 30 s at one fixed angle
			t0 := start.Add(time.Duration(k*blockN) * time.Duration(dtUs) * time.Microsecond)
			for _, src := range []string{"pitotnode", "balance"} {
				b := acquire.Block{Source: src, DtUs: dtUs, T0Us: t0.Add(-offsets[src]).UnixMicro()}
				lift := make([]float64, blockN)
				q := make([]float64, blockN)
				alpha := make([]float64, blockN)
				for i := range blockN {
					ti := t0.Add(time.Duration(i*dtUs) * time.Microsecond)
					q[i] = qAt(ti)
					lift[i] = clTrue * q[i] * area / 2 // two normal cells share it; α = 0
				}
				if src == "balance" {
					b.Series = []acquire.Series{{Channel: "n_fore", Raw: lift}, {Channel: "n_aft", Raw: append([]float64(nil), lift...)},
						{Channel: "axial", Raw: make([]float64, blockN)}, {Channel: "alpha", Raw: alpha}}
				} else {
					b.Series = []acquire.Series{{Channel: "pitot", Raw: q}}
				}
				last := t0.Add(time.Duration((blockN-1)*dtUs) * time.Microsecond)
				b.Received = last.Add(delays[src] + time.Duration(rng.ExpFloat64()*float64(2*time.Millisecond)))
				if align {
					al.Align(&b)
				}
				cb := calibrate.Block{Source: b.Source, T0Us: b.T0Us, DtUs: b.DtUs, AlignedT0Us: b.AlignedT0Us}
				for _, s := range b.Series {
					cb.Series = append(cb.Series, calibrate.Series{Channel: s.Channel, Values: s.Raw, U: 0.01, Dof: math.Inf(1)})
				}
				segs = append(segs, est.Add(&cb)...)
			}
		}
		segs = append(segs, est.Flush()...)
		if len(segs) == 0 {
			t.Fatal("no segment")
		}
		// The first blocks are joined before the clocks have settled; judge the last segment.
		return segs[len(segs)-1]
	}
	seg := run(true)
	if rel := math.Abs(seg.CL.X-clTrue) / clTrue; rel > 0.005 {
		t.Errorf("aligned: C_L = %.4f ± %.4f, want %.4f within 0.5 %%", seg.CL.X, seg.CL.U95(), clTrue)
	}
	if seg.CL.U95() > 0.01 {
		t.Errorf("aligned: U95 %.4f: the join leaves scatter, samples meet the wrong q", seg.CL.U95())
	}
	// Without alignment the device clocks are 3.7 s apart: every load sample
	// meets a q from another instant, and the scatter shows it.
	bad := run(false)
	t.Logf("aligned C_L %.4f ± %.4f (N_eff %.0f); unaligned C_L %.4f ± %.4f", seg.CL.X, seg.CL.U95(), seg.NEff, bad.CL.X, bad.CL.U95())
	if bad.CL.U95() < 5*seg.CL.U95() {
		t.Errorf("unaligned join should be visibly worse: U95 %.4f vs aligned %.4f", bad.CL.U95(), seg.CL.U95())
	}
}
