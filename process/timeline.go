package process

import (
	"context"
	"fmt"
	"math"
	"sort"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
	"liftyard/storage"
)

// MaxTimelinePoints bounds the points of a timeline: more than a screen
// is wide gains nothing.
const MaxTimelinePoints = 10000

// flowOffTimelineFrac is the share of the run's largest q below which the
// timeline leaves the coefficients out: with the flow off they divide by
// almost nothing (the estimator's own flow-off test uses the same 5 %).
const flowOffTimelineFrac = 0.05

// Timeline is a stored run's quantities against wall time, downsampled to
// at most a requested number of points: what the run page plots to place
// marks from. Each point is the mean, over one time bin, of the pipeline's
// moving-window estimate after each block, placed at the window's middle.
// A value is NaN where a bin has none (a gap, flow off for a coefficient,
// a quantity the kind does not have).
type Timeline struct {
	Kind  rig.Kind
	Start time.Time     // the run's first sample (RunStart), UTC; marks are seconds from it
	Bin   time.Duration // width of one point's time bin
	T     []time.Time   // each point's time (UTC wall time, middle of its bin)
	// Quantities, one value per point.
	QPa       []float64
	AlphaDeg  []float64 // force-balance kinds
	CL        []float64 // foils and bodies
	SpinRatio []float64 // rotors: ωR/V
}

// RunTimeline returns run's timeline in at most points points (1 …
// MaxTimelinePoints), from the pipeline of the rig stored with it (the
// flow-off zero before the run applied, as live).
//
// When a point spans at least the finest rollup width (storage.RollupWidths,
// 1 s), it replays the run's trend rollups instead of its raw blocks: the
// coarsest rollup whose bins still give the points asked for, each bin's
// channel means as one sample at the bin's middle. A long run then costs a
// few thousand samples, not every reading (docs/performance.md). A run
// stored before rollups existed has them computed from its raw blocks
// (storage.Store.RunRollups). Shorter spans replay every raw block.
// Callers cache the result.
func RunTimeline(ctx context.Context, store *storage.Store, run storage.Run, points int) (Timeline, error) {
	if points < 1 || points > MaxTimelinePoints {
		return Timeline{}, fmt.Errorf("timeline points %d: give 1 to %d", points, MaxTimelinePoints)
	}
	r, err := StoredRig(run)
	if err != nil {
		return Timeline{}, err
	}
	declared := make(map[string]bool, len(r.Channels))
	for _, c := range r.Channels {
		declared[c.Name] = true
	}
	src, widthUs, err := timelineSource(store, run.ID, points, declared)
	if err != nil {
		return Timeline{}, err
	}
	return runTimeline(ctx, store, run, points, src, widthUs)
}

// timelineSource picks what RunTimeline replays: the coarsest rollup level
// whose width times points is at most the run's span (its bins as blocks
// of one sample), or the raw blocks (widthUs 0) when even the finest is too
// coarse.
func timelineSource(store *storage.Store, runID uint64, points int, declared map[string]bool) (acquire.Replayer, int64, error) {
	raw := &acquire.StoredRun{Store: store, RunID: runID}
	for level := len(storage.RollupWidths) - 1; level >= 0; level-- {
		wUs := storage.RollupWidths[level].Microseconds()
		bins, _, err := store.RunRollups(runID, level)
		if err != nil {
			return nil, 0, err
		}
		lo, hi := int64(math.MaxInt64), int64(math.MinInt64)
		for _, bs := range bins {
			if len(bs) > 0 {
				lo, hi = min(lo, bs[0].T0Us), max(hi, bs[len(bs)-1].T0Us+wUs)
			}
		}
		if lo >= hi {
			return raw, 0, nil // no blocks
		}
		if wUs*int64(points) <= hi-lo {
			pointUs := (hi - lo + int64(points) - 1) / int64(points)
			return rollupBlocks(bins, wUs, lo, pointUs, declared), wUs, nil
		}
	}
	return raw, 0, nil
}

// rollupSampleUs is the spacing of the samples a rollup bin is replayed
// as. The estimator judges steadiness and withholds coefficients until its
// moving window (2 s) holds enough samples: one sample per bin would leave
// it waiting, so each bin is replayed as width/500 ms equal samples (its
// channel means), which its window sees as it would a steady hold.
const rollupSampleUs = 500_000

// rollupBlocks turns rollup bins into blocks: each bin is its channel
// means repeated every rollupSampleUs across the bin, and the consecutive
// bins of a source that fall in one point of the timeline (pointUs wide,
// from loUs) make one block, so the pipeline steps and estimates about
// once per point. Only the channels the rig declares are kept (the
// pipeline would drop the others). Blocks are ordered by receive time
// across sources as storage.Store.ReplayBlocks orders raw blocks.
func rollupBlocks(bins map[string][]storage.RollupBin, wUs, loUs, pointUs int64, declared map[string]bool) rollupReplay {
	per := int(max(1, wUs/rollupSampleUs))
	dt := wUs / int64(per)
	sameChannels := func(a, b storage.RollupBin) bool {
		if len(a.Channels) != len(b.Channels) {
			return false
		}
		for i := range a.Channels {
			if a.Channels[i].Channel != b.Channels[i].Channel {
				return false
			}
		}
		return true
	}
	var out rollupReplay
	for src, bs := range bins {
		for i := 0; i < len(bs); {
			j := i + 1
			point := (bs[i].T0Us - loUs) / pointUs
			for j < len(bs) && bs[j].T0Us == bs[j-1].T0Us+wUs && (bs[j].T0Us-loUs)/pointUs == point && sameChannels(bs[i], bs[j]) {
				j++
			}
			group := bs[i:j]
			n := per * len(group)
			blk := acquire.Block{Source: src, Seq: uint64(bs[i].T0Us / wUs), T0Us: bs[i].T0Us + dt/2, DtUs: dt}
			last := group[len(group)-1]
			if last.HasOffset {
				blk.Received = time.UnixMicro(blk.T0Us + int64(n-1)*dt + last.OffsetUs).UTC()
			}
			for c := range bs[i].Channels {
				if !declared[bs[i].Channels[c].Channel] {
					continue
				}
				raw := make([]float64, 0, n)
				for _, b := range group {
					m := b.Channels[c].RawMean()
					for range per {
						raw = append(raw, m)
					}
				}
				blk.Series = append(blk.Series, acquire.Series{Channel: bs[i].Channels[c].Channel, Raw: raw})
			}
			out = append(out, blk)
			i = j
		}
	}
	sort.SliceStable(out, func(i, j int) bool {
		a, b := out[i], out[j]
		if !a.Received.Equal(b.Received) {
			return a.Received.Before(b.Received)
		}
		if a.T0Us != b.T0Us {
			return a.T0Us < b.T0Us
		}
		return a.Source < b.Source
	})
	return out
}

// rollupReplay replays blocks made for one replay only: unlike
// acquire.Blocks it hands them over without copying their readings.
type rollupReplay []acquire.Block

// Replay implements acquire.Replayer.
func (bs rollupReplay) Replay(ctx context.Context, fn func(acquire.Block) error) error {
	for _, b := range bs {
		if err := ctx.Err(); err != nil {
			return err
		}
		if err := fn(b); err != nil {
			return err
		}
	}
	return nil
}

// runTimeline replays src (raw blocks, or rollup bins of widthUs) through
// the run's pipeline and bins the live estimates into points.
func runTimeline(ctx context.Context, store *storage.Store, run storage.Run, points int, src acquire.Replayer, widthUs int64) (Timeline, error) {
	r, err := StoredRig(run)
	if err != nil {
		return Timeline{}, err
	}
	cal, err := calibrate.NewCalibratorFrom(r, store.Calibration)
	if err != nil {
		return Timeline{}, err
	}
	p, err := New(r, cal, Options{})
	if err != nil {
		return Timeline{}, err
	}
	kind := r.Kind
	if kind == "" {
		kind = rig.KindBody
	}
	type sample struct {
		tUs                int64
		q, alpha, cl, spin float64
	}
	var samples []sample
	var firstUs int64 = math.MaxInt64
	_, err = Replay(ctx, src, p, func(b *acquire.Block, _ Step) error {
		if b == nil {
			return nil
		}
		if b.Len() > 0 {
			firstUs = min(firstUs, b.AlignedT0Us)
		}
		lv, ok := p.Live()
		if !ok {
			return nil
		}
		// The window's middle; before the window has filled, the middle
		// of the samples so far.
		// A rollup bin is one block: its estimate stands for the bin.
		window := max(lv.Window, time.Duration(widthUs)*time.Microsecond)
		span := min(window, lv.T.Sub(time.UnixMicro(firstUs)))
		mid := lv.T.Add(-span / 2)
		s := sample{tUs: mid.UnixMicro(), q: lv.QPa.X, alpha: math.NaN(), cl: math.NaN(), spin: math.NaN()}
		if kind != rig.KindRoof {
			s.alpha = lv.AlphaRad.X * 180 / math.Pi
			if kind == rig.KindRotor {
				s.spin = lv.SpinRatio.X
				if lv.OmegaRadPerS == 0 && lv.SpinRatio.X == 0 {
					s.spin = math.NaN()
				}
			} else {
				s.cl = lv.CL.X
			}
		}
		samples = append(samples, s)
		return nil
	})
	if err != nil {
		return Timeline{}, err
	}
	tl := Timeline{Kind: kind}
	if t0, err := RunStart(store, run.ID); err == nil {
		tl.Start = t0
	}
	if len(samples) == 0 {
		return tl, nil
	}
	lo, hi := samples[0].tUs, samples[0].tUs
	qMax := 0.0
	for _, s := range samples {
		lo, hi = min(lo, s.tUs), max(hi, s.tUs)
		if finite(s.q) {
			qMax = max(qMax, s.q)
		}
	}
	if tl.Start.IsZero() {
		tl.Start = time.UnixMicro(lo).UTC()
	}
	span := hi - lo + 1
	binUs := (span + int64(points) - 1) / int64(points)
	n := int((span + binUs - 1) / binUs)
	tl.Bin = time.Duration(binUs) * time.Microsecond
	type acc struct {
		sum [4]float64
		n   [4]int
	}
	bins := make([]acc, n)
	for _, s := range samples {
		i := int((s.tUs - lo) / binUs)
		flowOn := finite(s.q) && s.q > flowOffTimelineFrac*qMax && s.q > 0
		for k, v := range [4]float64{s.q, s.alpha, s.cl, s.spin} {
			if !finite(v) || (k >= 2 && !flowOn) {
				continue
			}
			bins[i].sum[k] += v
			bins[i].n[k]++
		}
	}
	mean := func(a acc, k int) float64 {
		if a.n[k] == 0 {
			return math.NaN()
		}
		return a.sum[k] / float64(a.n[k])
	}
	for i, a := range bins {
		if a.n[0] == 0 && a.n[1] == 0 {
			continue // a gap: no point
		}
		tl.T = append(tl.T, time.UnixMicro(lo+int64(i)*binUs+binUs/2).UTC())
		tl.QPa = append(tl.QPa, mean(a, 0))
		tl.AlphaDeg = append(tl.AlphaDeg, mean(a, 1))
		tl.CL = append(tl.CL, mean(a, 2))
		tl.SpinRatio = append(tl.SpinRatio, mean(a, 3))
	}
	return tl, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
