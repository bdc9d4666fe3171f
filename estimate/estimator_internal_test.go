package estimate

import (
	"math"
	"testing"
	"time"

	"liftyard/calibrate"
	"liftyard/rig"
)

// Ensure that memory stays bounded over a long steady feed: the live ring
// never grows past the window, the open segment never past its cap, and a
// long plateau is split into capped segments.
func TestEstimator_BoundedMemory(t *testing.T) {
	r := &rig.Rig{
		Name: "long run", Kind: rig.KindFoil, Fluid: rig.FluidAir,
		Conditions: rig.Conditions{TempK: 288.15, PressurePa: 101325},
		Reference:  rig.Reference{AreaM2: 0.1, LengthM: 0.2},
		Channels:   []rig.Channel{{Name: "n"}, {Name: "p"}},
		Lift:       rig.Lift{Normal: []string{"n"}, DynamicPressure: "p", AngleRad: 0.05},
	}
	e, err := NewEstimator(r, Config{MaxSegment: 20 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	const dtUs, blockN = 5000, 20 // 200 Hz, 0.1 s blocks
	ringCap, segCap := 0, 0
	segs := 0
	x := 0.0
	for k := range 200 * 10 * 60 / blockN { // 10 minutes
		n, p := make([]float64, blockN), make([]float64, blockN)
		for i := range n {
			x = 0.9*x + 0.1*math.Sin(float64(k*blockN+i)*0.37)
			p[i] = 300 * (1 + 0.02*x)
			n[i] = 0.5 * p[i] * 0.1
		}
		b := &calibrate.Block{Source: "s", T0Us: int64(k) * blockN * dtUs, DtUs: dtUs,
			Series: []calibrate.Series{{Channel: "n", Values: n, U: 0.05}, {Channel: "p", Values: p, U: 1}}}
		segs += len(e.Add(b))
		ringCap = max(ringCap, cap(e.ring.buf))
		segCap = max(segCap, cap(e.seg.normalN))
		if e.seg.len() > e.capN {
			t.Fatalf("open segment holds %d samples, cap %d", e.seg.len(), e.capN)
		}
	}
	if want := 2 * 200; ringCap != want {
		t.Errorf("ring capacity %d, want %d (2 s at 200 Hz)", ringCap, want)
	}
	// append may round capacity up, but never beyond twice the cap.
	if segCap > 2*e.capN {
		t.Errorf("segment storage grew to %d for a cap of %d", segCap, e.capN)
	}
	// 10 min of plateau in segments of at most 20 s: about 30.
	if segs < 28 || segs > 31 {
		t.Errorf("%d segments from a 10 min plateau split at 20 s", segs)
	}
}
