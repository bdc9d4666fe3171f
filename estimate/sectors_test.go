package estimate_test

import (
	"math"
	"testing"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// Ensure that RoofSectors groups zone rows by sector and zone, keeps
// blocks that left their sector out of the values but counts them, skips
// per-tap rows, and puts rows without a vane last.
func TestRoofSectors(t *testing.T) {
	row := func(sectorDeg float64, zone string, cp, peak, peakMax, out float64) estimate.Segment {
		return estimate.Segment{Zone: zone, SectorRad: rig.Rad(sectorDeg), SectorOutFrac: out,
			CpMean: calibrate.Value{X: cp}, CpPeak: peak, CpPeakMax: peakMax}
	}
	segs := []estimate.Segment{
		row(270, "F", -1.0, -2.0, 0.1, 0),
		row(270, "G", -0.5, -1.2, 0.2, 0),
		row(240, "F", -0.8, -1.8, 0.0, 0.05),
		row(270, "F", -1.2, -2.6, 0.3, 0),
		row(270, "F", -3.0, -5.0, 0.9, 0.4), // wandered: counted, not used
		{Zone: "F", Tap: "p1", SectorRad: rig.Rad(270), CpMean: calibrate.Value{X: -9}},
		row(math.NaN(), "F", -0.7, math.NaN(), math.NaN(), math.NaN()),
	}
	got := estimate.RoofSectors(segs)
	if len(got) != 4 {
		t.Fatalf("%d groups, want 4: %+v", len(got), got)
	}
	want := []struct {
		deg              float64
		zone             string
		blocks, left     int
		lo, mean, hi, pk float64
	}{
		{240, "F", 1, 0, -0.8, -0.8, -0.8, -1.8},
		{270, "F", 2, 1, -1.2, -1.1, -1.0, -2.6},
		{270, "G", 1, 0, -0.5, -0.5, -0.5, -1.2},
		{math.NaN(), "F", 1, 0, -0.7, -0.7, -0.7, math.NaN()},
	}
	for i, w := range want {
		g := got[i]
		sameDeg := math.Abs(rig.Deg(g.SectorRad)-w.deg) < 1e-9 || math.IsNaN(w.deg) && math.IsNaN(g.SectorRad)
		samePk := math.Abs(g.CpPeak-w.pk) < 1e-12 || math.IsNaN(w.pk) && math.IsNaN(g.CpPeak)
		if !sameDeg || g.Zone != w.zone || g.Blocks != w.blocks || g.Left != w.left ||
			math.Abs(g.CpMeanLo-w.lo) > 1e-12 || math.Abs(g.CpMean-w.mean) > 1e-12 || math.Abs(g.CpMeanHi-w.hi) > 1e-12 || !samePk {
			t.Errorf("group %d: %+v, want %+v", i, g, w)
		}
	}
	if got[1].CpPeakMax != 0.3 {
		t.Errorf("most positive peak %g, want 0.3 (the wandering block's 0.9 is left out)", got[1].CpPeakMax)
	}
}
