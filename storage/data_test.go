package storage_test

import (
	"context"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/storage"
)

// writeBlocks stores blocks for run id through a Writer and waits for it.
func writeBlocks(tb testing.TB, s *storage.Store, id uint64, blocks ...*acquire.Block) *storage.Writer {
	tb.Helper()
	items := make([]storage.Item, len(blocks))
	for i, b := range blocks {
		items[i] = storage.Item{Block: b}
	}
	return writeItems(tb, s, id, items...)
}

func writeItems(tb testing.TB, s *storage.Store, id uint64, items ...storage.Item) *storage.Writer {
	tb.Helper()
	w := s.NewWriter(id, storage.WriterConfig{})
	in := make(chan storage.Item, len(items))
	for _, it := range items {
		in <- it
	}
	close(in)
	if err := w.Run(context.Background(), in); err != nil {
		tb.Fatal(err)
	}
	return w
}

func readBlocks(tb testing.TB, s *storage.Store, id uint64) []acquire.Block {
	tb.Helper()
	var got []acquire.Block
	if err := s.RawBlocks(id, func(b acquire.Block) error { got = append(got, b); return nil }); err != nil {
		tb.Fatal(err)
	}
	return got
}

// sameBlock compares two blocks bit for bit (NaN equal to NaN).
func sameBlock(a, b acquire.Block) bool {
	if a.Source != b.Source || a.Seq != b.Seq || a.T0Us != b.T0Us || a.DtUs != b.DtUs ||
		!a.Received.Equal(b.Received) || len(a.Series) != len(b.Series) {
		return false
	}
	for i := range a.Series {
		if a.Series[i].Channel != b.Series[i].Channel || len(a.Series[i].Raw) != len(b.Series[i].Raw) {
			return false
		}
		for j, v := range a.Series[i].Raw {
			if math.Float64bits(v) != math.Float64bits(b.Series[i].Raw[j]) {
				return false
			}
		}
	}
	return true
}

// Ensure that blocks come back bit for bit, NaN ("no sample") included,
// per source in device time order, across more blocks than one read chunk.
func TestRawBlocks_RoundTrip(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	var want []*acquire.Block
	// Written out of time order and interleaved, as two sources would.
	for i := 149; i >= 0; i-- {
		want = append(want, testBlock("pitot", uint64(i), 5, "dp"))
	}
	for i := range 100 {
		b := testBlock("balance", uint64(i), 20, "n_fore", "n_aft", "axial")
		b.Series[1].Raw[3] = math.NaN()
		b.Series[2].Raw[0] = math.Inf(-1)
		want = append(want, b)
	}
	want[7].Received = time.Time{} // zero host time survives as zero
	w := writeBlocks(t, s, id, want...)
	if blocks, samples := w.Committed(); blocks != 250 || samples != 150*5+100*20 {
		t.Errorf("Committed = %d blocks, %d samples", blocks, samples)
	}
	got := readBlocks(t, s, id)
	if len(got) != 250 {
		t.Fatalf("read %d blocks, want 250", len(got))
	}
	// Sources in name order: balance, then pitot; each in seq (= time) order.
	for i := range 100 {
		if !sameBlock(got[i], *want[150+i]) {
			t.Fatalf("balance block %d = %+v, want %+v", i, got[i], *want[150+i])
		}
	}
	for i := range 150 {
		if !sameBlock(got[100+i], *want[149-i]) {
			t.Fatalf("pitot block %d = %+v, want %+v", i, got[100+i], *want[149-i])
		}
	}
	if !math.IsNaN(got[0].Raw("n_aft")[3]) {
		t.Error("NaN reading lost")
	}
	r, _ := s.Run(id)
	if r.Samples != 150*5+100*20 {
		t.Errorf("run samples = %d", r.Samples)
	}
	srcs, err := s.RawSources(id)
	if err != nil || !reflect.DeepEqual(srcs, []string{"balance", "pitot"}) {
		t.Errorf("RawSources = %v, %v", srcs, err)
	}
}

// Ensure that negative device times sort before positive ones and that a
// block sent twice is stored once and counted once.
func TestRawBlocks_KeyOrderAndDuplicates(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	mk := func(seq uint64, t0 int64) *acquire.Block {
		return &acquire.Block{Source: "s", Seq: seq, T0Us: t0, DtUs: 10,
			Series: []acquire.Series{{Channel: "c", Raw: []float64{float64(t0)}}}}
	}
	writeBlocks(t, s, id, mk(3, 5), mk(1, -1000), mk(2, -1), mk(4, 1<<40), mk(2, -1))
	got := readBlocks(t, s, id)
	var t0s []int64
	for _, b := range got {
		t0s = append(t0s, b.T0Us)
	}
	if !reflect.DeepEqual(t0s, []int64{-1000, -1, 5, 1 << 40}) {
		t.Errorf("t0 order = %v", t0s)
	}
	if r, _ := s.Run(id); r.Samples != 4 {
		t.Errorf("samples = %d, want 4 (duplicate counted once)", r.Samples)
	}
}

// Ensure that a block that cannot be stored is counted and logged and does
// not cost the rest of its batch.
func TestWriter_RejectsBadBlock(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	bad := testBlock("bal", 1, 10, "a", "b")
	bad.Series[1].Raw = bad.Series[1].Raw[:9]
	noSource := testBlock("", 2, 10, "a")
	w := writeBlocks(t, s, id, testBlock("bal", 0, 10, "a", "b"), bad, noSource, testBlock("bal", 3, 10, "a", "b"))
	if w.Rejected() != 2 {
		t.Errorf("rejected = %d, want 2", w.Rejected())
	}
	if got := readBlocks(t, s, id); len(got) != 2 || got[0].Seq != 0 || got[1].Seq != 3 {
		t.Errorf("stored %d blocks", len(got))
	}
	evs, _ := s.Events(id)
	if len(evs) != 2 || evs[0].Kind != storage.EventRejected || evs[0].Source != "bal" {
		t.Fatalf("events = %+v", evs)
	}
	if want := `channel "b" has 9 samples, channel "a" has 10`; !strings.Contains(evs[0].Message, want) {
		t.Errorf("event message %q lacks %q", evs[0].Message, want)
	}
}

// testSegment is a polar point of an invented tow-rig run.
func testSegment(i int) estimate.Segment {
	t0 := time.Date(2025, 6, 14, 9, 31, 0, 0, time.UTC).Add(time.Duration(i) * 20 * time.Second)
	return estimate.Segment{
		Index: i, TStart: t0, TEnd: t0.Add(15*time.Second + 250*time.Microsecond), N: 15000, NEff: 412.5,
		AlphaRad:   calibrate.Value{X: float64(i) * math.Pi / 90, U: 0.0017, Dof: math.Inf(1)},
		QPa:        calibrate.Value{X: 1250.5, U: 6.1, Dof: 48.2},
		SpeedMPerS: calibrate.Value{X: 1.582, U: 0.004, Dof: 48.2},
		RhoKgPerM3: 999.1, MuPaS: 1.138e-3, Re: 2.08e5,
		LiftN:    calibrate.Value{X: 30.1 * float64(i), U: 0.4, Dof: 120},
		DragN:    calibrate.Value{X: 2.2, U: 0.1, Dof: 120},
		CL:       calibrate.Value{X: 0.2 * float64(i), U: 0.011, Dof: 95.3},
		CD:       calibrate.Value{X: 0.0147, U: 0.0008, Dof: 60},
		En:       math.NaN(),
		CLBudget: []estimate.Contribution{{Input: "normal force (type A)", U: 0.4, Sensitivity: 0.0066, UY: 0.0026, Dof: 412, TypeA: true}},
	}
}

// Ensure that segments round-trip, NaN En and +Inf degrees of freedom
// included (JSON holds neither), and update the run's segment count.
func TestSegments_RoundTrip(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	a, b, c := testSegment(0), testSegment(1), testSegment(2)
	b.DesignCL = calibrate.Value{X: 0.22, U: 0.01, Dof: math.Inf(1)}
	b.En = -0.83
	c.NEff = math.NaN()
	writeItems(t, s, id, storage.Item{Segment: &c}, storage.Item{Segment: &a}, storage.Item{Segment: &b})
	got, err := s.Segments(id)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 3 {
		t.Fatalf("%d segments", len(got))
	}
	for i, want := range []estimate.Segment{a, b, c} {
		g := got[i]
		if !math.IsNaN(want.En) && g.En != want.En || math.IsNaN(want.En) != math.IsNaN(g.En) {
			t.Errorf("segment %d En = %v, want %v", i, g.En, want.En)
		}
		if math.IsNaN(want.NEff) != math.IsNaN(g.NEff) {
			t.Errorf("segment %d NEff = %v, want %v", i, g.NEff, want.NEff)
		}
		// Compare the rest with NaNs set equal.
		g.En, want.En, g.NEff, want.NEff = 0, 0, 0, 0
		if !g.TStart.Equal(want.TStart) || !g.TEnd.Equal(want.TEnd) {
			t.Errorf("segment %d times %v–%v, want %v–%v", i, g.TStart, g.TEnd, want.TStart, want.TEnd)
		}
		g.TStart, want.TStart, g.TEnd, want.TEnd = time.Time{}, time.Time{}, time.Time{}, time.Time{}
		if !reflect.DeepEqual(g, want) {
			t.Errorf("segment %d:\n got %+v\nwant %+v", i, g, want)
		}
	}
	if !math.IsInf(got[0].AlphaRad.Dof, 1) {
		t.Errorf("+Inf dof came back as %v", got[0].AlphaRad.Dof)
	}
	r, _ := s.Run(id)
	if r.Segments != 3 {
		t.Errorf("run segments = %d, want 3", r.Segments)
	}
	// A re-estimated segment replaces the old row.
	b.CL.X = 0.21
	writeItems(t, s, id, storage.Item{Segment: &b})
	got, _ = s.Segments(id)
	if r, _ := s.Run(id); len(got) != 3 || got[1].CL.X != 0.21 || r.Segments != 3 {
		t.Errorf("after replacing segment 1: %d segments, CL %v, run says %d", len(got), got[1].CL.X, r.Segments)
	}
}

// Ensure that events come back in time order, same-instant events in
// arrival order.
func TestEvents_RoundTrip(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	t0 := time.Date(2025, 6, 14, 9, 30, 0, 0, time.UTC)
	evs := []storage.Event{
		{T: t0.Add(2 * time.Second), Kind: "reconnect", Source: "balance", Message: "serial port back"},
		{T: t0, Kind: "gap", Source: "balance", Message: "seq 17 → 19: 1 block missing"},
		{T: t0, Kind: "drop", Source: "pitot", Message: "12 samples dropped"},
		{T: t0.Add(-time.Hour), Kind: "tare", Message: "flow-off zero"},
	}
	var items []storage.Item
	for i := range evs {
		items = append(items, storage.Item{Event: &evs[i]})
	}
	writeItems(t, s, id, items...)
	got, err := s.Events(id)
	if err != nil {
		t.Fatal(err)
	}
	want := []storage.Event{evs[3], evs[1], evs[2], evs[0]}
	if len(got) != len(want) {
		t.Fatalf("%d events", len(got))
	}
	for i := range want {
		if !got[i].T.Equal(want[i].T) || got[i].Kind != want[i].Kind || got[i].Source != want[i].Source || got[i].Message != want[i].Message {
			t.Errorf("event %d = %+v, want %+v", i, got[i], want[i])
		}
	}
}
