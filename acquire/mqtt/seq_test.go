package mqtt

import (
	"math/rand/v2"
	"testing"

	"liftyard/acquire"
)

// Ensure that the seq window classifies arrivals as documented on Source.
func TestSeqTracker(t *testing.T) {
	type step struct {
		seq     uint64
		t0      int64
		want    seqVerdict
		missing uint64
		blockUs int64 // 0: unknown (no device-time check)
	}
	t0 := func(seq uint64) int64 { return int64(seq) * 1000 }
	s := func(seq uint64, want seqVerdict, missing uint64) step { return step{seq, t0(seq), want, missing, 0} }
	// c is a block of 1 ms whose device time follows its seq, so the
	// device clock confirms jumps; bogus is a jump the clock does not.
	c := func(seq uint64, want seqVerdict, missing uint64) step { return step{seq, t0(seq), want, missing, 1000} }
	bogus := func(seq uint64, t0 int64) step { return step{seq, t0, seqRestart, 0, 1000} }
	tests := []struct {
		name  string
		steps []step
	}{
		{"in order", []step{s(7, seqNext, 0), s(8, seqNext, 0), s(9, seqNext, 0)}},
		{"duplicate and reorder", []step{
			s(0, seqNext, 0), s(1, seqNext, 0), s(2, seqNext, 0), s(2, seqDuplicate, 0),
			s(4, seqJump, 1), s(3, seqLate, 0), s(5, seqNext, 0), s(5, seqDuplicate, 0), s(3, seqDuplicate, 0),
		}},
		{"big jump", []step{s(10, seqNext, 0), s(10+SeqWindow+5, seqJump, SeqWindow+4), s(11, seqRestart, 0)}},
		{"late at the window edge", []step{
			s(100, seqNext, 0), s(100+SeqWindow-1, seqJump, SeqWindow-2), s(101, seqLate, 0), s(101, seqDuplicate, 0),
		}},
		// After the restart the sender counts up again: its new block 5000
		// (another device time) is a jump in the new epoch, while a copy of
		// the old block 5000 is a duplicate of the epoch before (issue 15).
		{"far below restarts", []step{s(5000, seqNext, 0), s(0, seqRestart, 0), s(1, seqNext, 0),
			{5000, t0(5000) + 1, seqJump, 4998, 0}, s(5000, seqDuplicate, 0)}},
		{"same seq other time is a restart", []step{
			s(0, seqNext, 0), s(1, seqNext, 0), s(2, seqNext, 0), {0, 99, seqRestart, 0, 0}, {1, 100, seqNext, 0, 0}, {1, 100, seqDuplicate, 0, 0},
		}},
		{"below the first seq is early, not late", []step{s(10, seqNext, 0), s(12, seqJump, 1), s(8, seqEarly, 0), s(8, seqDuplicate, 0), s(11, seqLate, 0)}},
		// issue 16: a jump from ~100 to 999009 recorded "998902 blocks missing".
		{"jump the device clock confirms", []step{c(100, seqNext, 0), c(101, seqNext, 0), c(5101, seqJump, 4999)}},
		{"jump the device clock denies is a restart", []step{
			c(100, seqNext, 0), c(101, seqNext, 0), bogus(999009, t0(102)), {999010, t0(103), seqNext, 0, 1000},
		}},
		{"jump with the device clock standing still", []step{c(100, seqNext, 0), bogus(150, t0(100))}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var w seqTracker
			for i, st := range tt.steps {
				v, missing := w.observe(st.seq, st.t0, 0, st.blockUs)
				if v != st.want || missing != st.missing {
					t.Fatalf("step %d (seq %d): got verdict %d missing %d, want %d missing %d", i, st.seq, v, missing, st.want, st.missing)
				}
			}
		})
	}
}

// Ensure that whatever the order and repetition of arrivals within the
// window, each seq is accepted exactly once and the gaps counted minus the
// late arrivals equal the seqs never seen.
func TestSeqTracker_ShuffledWithRepeats(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := range 50 {
		const n = 500
		var arrivals []uint64
		for seq := range uint64(n) {
			if rng.IntN(10) == 0 {
				continue // lost
			}
			for range 1 + rng.IntN(3) { // up to 3 copies
				arrivals = append(arrivals, seq)
			}
		}
		// Local disorder: swap neighbours within 40 places.
		for i := range arrivals {
			j := i + rng.IntN(40)
			if j < len(arrivals) {
				arrivals[i], arrivals[j] = arrivals[j], arrivals[i]
			}
		}
		var w seqTracker
		accepted := map[uint64]int{}
		var gaps, late uint64
		hi := arrivals[0]
		for _, seq := range arrivals {
			v, missing := w.observe(seq, int64(seq), 0, 0)
			switch v {
			case seqDuplicate:
				continue
			case seqRestart:
				t.Fatalf("trial %d: restart at seq %d inside the window", trial, seq)
			case seqJump:
				gaps += missing
			case seqLate:
				late++
			}
			accepted[seq]++
			hi = max(hi, seq)
		}
		for seq, k := range accepted {
			if k != 1 {
				t.Fatalf("trial %d: seq %d accepted %d times", trial, seq, k)
			}
		}
		// Never seen between the first arrival and the highest seq.
		var never uint64
		for seq := arrivals[0]; seq <= hi; seq++ {
			if accepted[seq] == 0 {
				never++
			}
		}
		if gaps-late != never {
			t.Fatalf("trial %d: gaps %d − late %d = %d, want %d never seen", trial, gaps, late, gaps-late, never)
		}
	}
}

// Ensure the duplicate rule on the exact stale replay of issue 15: a
// logger whose seq and clock count from power-up sent blocks 0..10 that
// the broker queued for a persistent session; it rebooted and sends blocks
// 0..29 again, with the same seqs and device times but other readings.
// After a broker restart the session gets the 11 stale blocks, then the
// fresh ones, with QoS 1 copies of both mixed in. Every fresh block must be
// delivered, and only the copies counted as duplicates (the old rule, seq
// and device time, dropped the 11 fresh blocks 0..10 as duplicates).
func TestSeqTracker_StaleSessionReplay(t *testing.T) {
	type arrival struct {
		seq   uint64
		stale bool // from before the reboot
		copy  bool // a QoS 1 copy of one already delivered
	}
	var arrivals []arrival
	for seq := range uint64(11) {
		arrivals = append(arrivals, arrival{seq, true, false})
	}
	arrivals = append(arrivals, arrival{9, true, true}, arrival{10, true, true}) // in flight at the restart: redelivered
	for seq := range uint64(30) {
		arrivals = append(arrivals, arrival{seq, false, false})
		if seq == 5 {
			arrivals = append(arrivals, arrival{3, true, true}) // a late stale copy
		}
		if seq == 20 {
			arrivals = append(arrivals, arrival{20, false, true}, arrival{19, false, true})
		}
	}
	const blockUs = 100_000
	sumOf := func(a arrival) uint64 {
		readings := float64(a.seq)
		if !a.stale {
			readings += 1000 // the fresh run reads other values
		}
		b := acquire.Block{DtUs: 5000, Series: []acquire.Series{{Channel: "pitot", Raw: []float64{readings, readings + 1}}}}
		return blockSum(&b)
	}
	var w seqTracker
	fresh := map[uint64]int{}
	var dups, restarts uint64
	for _, a := range arrivals {
		v, _ := w.observe(a.seq, int64(a.seq)*blockUs, sumOf(a), blockUs)
		switch v {
		case seqDuplicate:
			dups++
			if !a.copy {
				t.Errorf("seq %d (stale %v) dropped as a duplicate, but it is a block of its own", a.seq, a.stale)
			}
			continue
		case seqRestart:
			restarts++
		}
		if a.copy {
			t.Errorf("copy of seq %d (stale %v) delivered again: verdict %d", a.seq, a.stale, v)
		}
		if !a.stale {
			fresh[a.seq]++
		}
	}
	for seq := range uint64(30) {
		if fresh[seq] != 1 {
			t.Errorf("fresh seq %d delivered %d times, want once", seq, fresh[seq])
		}
	}
	if dups != 5 {
		t.Errorf("%d duplicates, want 5 (the QoS 1 copies)", dups)
	}
	if restarts != 1 {
		t.Errorf("%d restarts, want 1 (the reboot, seen at fresh seq 0)", restarts)
	}
}

// Ensure that blockSum tells blocks apart by readings, channel and
// spacing, and gives a copy the same sum.
func TestBlockSum(t *testing.T) {
	b := acquire.Block{Seq: 3, T0Us: 7, DtUs: 5000, Series: []acquire.Series{{Channel: "a", Raw: []float64{1, 2}}}}
	same := b
	same.Series = []acquire.Series{{Channel: "a", Raw: []float64{1, 2}}}
	other := []acquire.Block{
		{DtUs: 5000, Series: []acquire.Series{{Channel: "a", Raw: []float64{1, 2.0000000001}}}},
		{DtUs: 5000, Series: []acquire.Series{{Channel: "b", Raw: []float64{1, 2}}}},
		{DtUs: 4000, Series: []acquire.Series{{Channel: "a", Raw: []float64{1, 2}}}},
		{DtUs: 5000, Series: []acquire.Series{{Channel: "a", Raw: []float64{2, 1}}}},
	}
	if blockSum(&b) != blockSum(&same) {
		t.Error("a copy has another sum")
	}
	for i := range other {
		if blockSum(&b) == blockSum(&other[i]) {
			t.Errorf("block %d has the same sum", i)
		}
	}
}
