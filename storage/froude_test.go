package storage_test

import (
	"math"
	"testing"

	"liftyard/estimate"
	"liftyard/storage"
)

// Ensure that a segment's Froude number is stored and read back, and that
// a segment without one (air rigs, older records) reads back as 0.
func TestSegments_FroudeKept(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	writeItems(t, s, id,
		storage.Item{Segment: &estimate.Segment{Index: 0, Fn: 1.649, En: math.NaN()}},
		storage.Item{Segment: &estimate.Segment{Index: 1, En: math.NaN()}})
	segs, err := s.Segments(id)
	if err != nil {
		t.Fatal(err)
	}
	if len(segs) != 2 || segs[0].Fn != 1.649 || segs[1].Fn != 0 {
		t.Fatalf("segments %+v, want Fn 1.649 and 0", segs)
	}
}
