package storage_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/storage"
)

// naiveRollup is the rollup of a run worked out from its raw blocks the
// plain way: every finite reading into the bin of width w holding its
// time.
type naiveBin struct {
	samples        int
	n              map[string]int
	min, max, mean map[string]float64
}

func naiveRollup(t *testing.T, s *storage.Store, id uint64, w time.Duration) map[string]map[int64]*naiveBin {
	t.Helper()
	out := map[string]map[int64]*naiveBin{}
	wu := w.Microseconds()
	err := s.RawBlocks(id, func(b acquire.Block) error {
		if out[b.Source] == nil {
			out[b.Source] = map[int64]*naiveBin{}
		}
		for i := range b.Len() {
			tUs := b.T0Us + int64(i)*b.DtUs
			start := int64(math.Floor(float64(tUs)/float64(wu))) * wu
			nb := out[b.Source][start]
			if nb == nil {
				nb = &naiveBin{n: map[string]int{}, min: map[string]float64{}, max: map[string]float64{}, mean: map[string]float64{}}
				out[b.Source][start] = nb
			}
			nb.samples++
			for _, sr := range b.Series {
				v := sr.Raw[i]
				if math.IsNaN(v) || math.IsInf(v, 0) {
					continue
				}
				if nb.n[sr.Channel] == 0 {
					nb.min[sr.Channel], nb.max[sr.Channel] = v, v
				}
				nb.n[sr.Channel]++
				nb.min[sr.Channel] = math.Min(nb.min[sr.Channel], v)
				nb.max[sr.Channel] = math.Max(nb.max[sr.Channel], v)
				nb.mean[sr.Channel] += v
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	for _, bins := range out {
		for _, nb := range bins {
			for ch, n := range nb.n {
				nb.mean[ch] /= float64(n)
			}
		}
	}
	return out
}

// checkRollups compares every level of run id's rollups with naiveRollup:
// the same bins, sample counts and finite counts, min and max exactly, the
// mean to a few ulps (the stored sums are added bin part by bin part).
func checkRollups(t *testing.T, s *storage.Store, id uint64, wantStored bool) {
	t.Helper()
	for level, w := range storage.RollupWidths {
		got, stored, err := s.RunRollups(id, level)
		if err != nil {
			t.Fatal(err)
		}
		if stored != wantStored {
			t.Errorf("level %d: stored = %v, want %v", level, stored, wantStored)
		}
		want := naiveRollup(t, s, id, w)
		if len(got) != len(want) {
			t.Fatalf("level %d: %d sources, want %d", level, len(got), len(want))
		}
		for src, bins := range got {
			if len(bins) != len(want[src]) {
				t.Fatalf("level %d source %s: %d bins, want %d", level, src, len(bins), len(want[src]))
			}
			for i, b := range bins {
				if i > 0 && b.T0Us <= bins[i-1].T0Us {
					t.Fatalf("level %d source %s: bins out of order", level, src)
				}
				nb := want[src][b.T0Us]
				if nb == nil || nb.samples != b.Samples {
					t.Fatalf("level %d source %s bin %d µs: %d samples, want %+v", level, src, b.T0Us, b.Samples, nb)
				}
				for _, c := range b.Channels {
					if c.N != nb.n[c.Channel] {
						t.Fatalf("level %d %s bin %d: %d finite readings, want %d", level, c.Channel, b.T0Us, c.N, nb.n[c.Channel])
					}
					if c.N == 0 {
						if !math.IsNaN(c.RawMean()) {
							t.Errorf("empty bin has mean %v", c.RawMean())
						}
						continue
					}
					if c.RawMin != nb.min[c.Channel] || c.RawMax != nb.max[c.Channel] {
						t.Errorf("level %d %s bin %d: min/max %v/%v, want %v/%v", level, c.Channel, b.T0Us, c.RawMin, c.RawMax,
							nb.min[c.Channel], nb.max[c.Channel])
					}
					if m, wm := c.RawMean(), nb.mean[c.Channel]; math.Abs(m-wm) > 1e-12*math.Max(1, math.Abs(wm)) {
						t.Errorf("level %d %s bin %d: mean %v, want %v", level, c.Channel, b.T0Us, m, wm)
					}
				}
			}
		}
	}
}

// Ensure that the rollups stored as blocks are committed equal the ones
// worked out from the raw data, at every width: three sources at different
// rates (a 50 Hz one whose fine levels are too sparse to keep, one whose
// rate goes from 100 Hz to 1 kHz, so a level is kept for part of the run;
// both worked out from the raw blocks when asked), blocks that straddle bin edges, NaN gaps, a channel that joins
// late, negative device times, a repeated block (stored once, counted
// once) and many commits.
func TestRollups_MatchRawData(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{MaxBlocks: 7})
	q := w.NewQueue()
	rng := rand.New(rand.NewPCG(8, 9))
	recv := time.Date(2026, 12, 2, 9, 0, 0, 0, time.UTC)
	go func() {
		defer close(q)
		for seq := range uint64(400) {
			// balance: 1 kHz, 73-sample blocks (they straddle the 1 s edges).
			b := &acquire.Block{Source: "balance", Seq: seq, T0Us: -2_000_000 + int64(seq)*73_000, DtUs: 1000,
				Received: recv.Add(time.Duration(seq) * 73 * time.Millisecond)}
			chs := []string{"n_fore", "n_aft"}
			if seq > 150 {
				chs = append(chs, "late")
			}
			for _, ch := range chs {
				raw := make([]float64, 73)
				for i := range raw {
					raw[i] = math.Round(rng.NormFloat64()*300) + 812_000
					if rng.IntN(40) == 0 {
						raw[i] = math.NaN()
					}
				}
				b.Series = append(b.Series, acquire.Series{Channel: ch, Raw: raw})
			}
			q <- storage.Item{Block: b}
			if seq == 200 {
				dup := *b
				q <- storage.Item{Block: &dup}
			}
			if seq%4 == 0 {
				// pitot: 50 Hz, 20-sample blocks (0.4 s), Pa with two decimals.
				p := &acquire.Block{Source: "pitot", Seq: seq / 4, T0Us: int64(seq/4) * 400_000, DtUs: 20_000, Received: recv.Add(time.Duration(seq) * 73 * time.Millisecond)}
				raw := make([]float64, 20)
				for i := range raw {
					raw[i] = math.Round((300+rng.NormFloat64()*20)*100) / 100
				}
				p.Series = []acquire.Series{{Channel: "q", Raw: raw}}
				q <- storage.Item{Block: p}
				// scanner: 100 Hz for the first 200 ms blocks (its 1 s and
				// 10 s bins too sparse to keep), then 1 kHz (kept): a level
				// stored for part of the run only.
				dt, n := int64(10_000), 20
				if seq >= 200 {
					dt, n = 1000, 200
				}
				sc := &acquire.Block{Source: "scanner", Seq: seq / 4, T0Us: int64(seq/4) * 200_000, DtUs: dt, Received: p.Received}
				raw = make([]float64, n)
				for i := range raw {
					raw[i] = math.Round((-400+rng.NormFloat64()*30)*100) / 100
				}
				sc.Series = []acquire.Series{{Channel: "p01", Raw: raw}}
				q <- storage.Item{Block: sc}
			}
		}
	}()
	if err := w.Run(context.Background(), q); err != nil {
		t.Fatal(err)
	}
	if w.Commits() < 20 {
		t.Fatalf("only %d commits: the merge across commits is not exercised", w.Commits())
	}
	checkRollups(t, s, id, true)
}

// Ensure that a run in a store written before rollups existed (the
// checked-in version 1 fixture) still has rollups: computed from its raw
// blocks, equal to the plain computation.
func TestRollups_OldStoreComputedFromRaw(t *testing.T) {
	fx := loadV1Fixture(t)
	s := openFixtureCopy(t, storeV1Path)
	for _, fr := range fx.Runs {
		checkRollups(t, s, fr.ID, false)
	}
	if _, _, err := s.RunRollups(999, 0); err == nil {
		t.Error("rollups of a missing run: no error")
	}
	if _, _, err := s.RunRollups(fx.Runs[0].ID, len(storage.RollupWidths)); err == nil {
		t.Error("rollup level out of range: no error")
	}
}

// Ensure that blocks appended to a run stored before rollups existed do not
// start a rollup of the new blocks only: the run's rollups still come from
// all its blocks, old and new.
func TestRollups_AppendToOldRun(t *testing.T) {
	fx := loadV1Fixture(t)
	s := openFixtureCopy(t, storeV1Path)
	id := fx.Runs[1].ID // the roof run
	w := s.NewWriter(id, storage.WriterConfig{})
	q := w.NewQueue()
	b := &acquire.Block{Source: "scanner", Seq: 99, T0Us: 5_000_000, DtUs: 10_000,
		Series: []acquire.Series{{Channel: "tap_01", Raw: []float64{-120.5, -119.25}}}}
	q <- storage.Item{Block: b}
	close(q)
	if err := w.Run(context.Background(), q); err != nil {
		t.Fatal(err)
	}
	checkRollups(t, s, id, false)
}
