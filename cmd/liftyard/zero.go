package main

import (
	"fmt"
	"math"
	"slices"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// flowOffFrac is the dynamic pressure, as a fraction of the q channel's
// rated capacity, below which the flow counts as off for a zero (common
// practice: a carriage at rest reads a few per mille of its range).
const flowOffFrac = 0.02

// zeroKeep bounds the flow-off stretch kept at each end of a run: 30 s of a
// 200 Hz logger is plenty for a mean and little memory.
const zeroKeep = 30 * time.Second

// zeroMin is the shortest flow-off stretch that makes a zero.
const zeroMin = 500 * time.Millisecond

// zeroWatch collects the flow-off stretches at the start and the end of a
// run (DESIGN §4: flow-off zero before and after each run). It is owned by
// the recorder loop.
type zeroWatch struct {
	q         string  // dynamic pressure channel
	qOffSI    float64 // flow-off threshold, Pa
	channels  []string
	flowOff   bool
	seenFlow  bool
	startDone bool
	start     []calibrate.Block
	tail      []calibrate.Block
	// live is the zero before the run, applied to live blocks once the
	// flow has come on (nil until then, or when there was none).
	live *calibrate.Drift
}

// newZeroWatch returns nil when the rig cannot tell flow-off: no pitot
// channel with a rated capacity.
func newZeroWatch(r *rig.Rig) *zeroWatch {
	ch, ok := r.Channel(r.Lift.DynamicPressure)
	if !ok || ch.CapacitySI <= 0 {
		return nil
	}
	z := &zeroWatch{q: ch.Name, qOffSI: flowOffFrac * ch.CapacitySI, flowOff: true}
	z.channels = append(append(append(z.channels, r.Lift.Normal...), r.Lift.Axial...), ch.Name)
	return z
}

// observe looks at one calibrated block (before the estimator sees it).
func (z *zeroWatch) observe(b *calibrate.Block) {
	if s := b.Find(z.q); s != nil {
		sum, n := 0.0, 0
		for _, v := range s.Values {
			if !math.IsNaN(v) {
				sum, n = sum+v, n+1
			}
		}
		if n > 0 {
			z.flowOff = math.Abs(sum/float64(n)) < z.qOffSI
			if !z.flowOff {
				if !z.startDone && span(z.start) >= zeroMin {
					if zs, err := calibrate.CaptureZero(mid(z.start), z.start); err == nil {
						z.live = &calibrate.Drift{Start: zs, End: zs}
					}
				}
				z.seenFlow, z.startDone = true, true
				z.tail = z.tail[:0]
			}
		}
	}
	if !z.flowOff {
		return
	}
	kept := z.keep(b)
	if len(kept.Series) == 0 {
		return
	}
	if !z.startDone {
		if span(z.start) < zeroKeep {
			z.start = append(z.start, kept)
		}
		return
	}
	z.tail = append(z.tail, kept)
	for len(z.tail) > 1 && span(z.tail[1:]) >= zeroKeep {
		z.tail = z.tail[1:]
	}
}

// keep copies the series of the zeroed channels (load cells and pitot; an
// angle or a temperature has no zero to take).
func (z *zeroWatch) keep(b *calibrate.Block) calibrate.Block {
	out := calibrate.Block{Source: b.Source, T0Us: b.T0Us, DtUs: b.DtUs, AlignedT0Us: b.AlignedT0Us}
	for _, s := range b.Series {
		if slices.Contains(z.channels, s.Channel) {
			s.Values = slices.Clone(s.Values)
			out.Series = append(out.Series, s)
		}
	}
	return out
}

// span is the time covered by blocks, by their sample counts.
func span(bs []calibrate.Block) time.Duration {
	var d time.Duration
	for _, b := range bs {
		d += time.Duration(int64(b.Len())*b.DtUs) * time.Microsecond
	}
	return d
}

// mid is the time in the middle of a stretch, on the shared timeline.
func mid(bs []calibrate.Block) time.Time {
	first, last := bs[0], bs[len(bs)-1]
	t0 := first.AlignedT0Us
	if t0 == 0 {
		t0 = first.T0Us
	}
	t1 := last.AlignedT0Us
	if t1 == 0 {
		t1 = last.T0Us
	}
	t1 += int64(last.Len()) * last.DtUs
	return time.UnixMicro((t0 + t1) / 2)
}

// drift returns the zeros before and after the run, when the run began and
// ended with the flow off long enough.
func (z *zeroWatch) drift() (calibrate.Drift, error) {
	switch {
	case !z.seenFlow:
		return calibrate.Drift{}, fmt.Errorf("the flow never came on")
	case span(z.start) < zeroMin:
		return calibrate.Drift{}, fmt.Errorf("no flow-off zero before the run (record at least %s at rest first)", zeroMin)
	case span(z.tail) < zeroMin || !z.flowOff:
		return calibrate.Drift{}, fmt.Errorf("no flow-off zero after the run (stop the flow for at least %s before ending)", zeroMin)
	}
	start, err := calibrate.CaptureZero(mid(z.start), z.start)
	if err != nil {
		return calibrate.Drift{}, fmt.Errorf("zero before the run: %w", err)
	}
	end, err := calibrate.CaptureZero(mid(z.tail), z.tail)
	if err != nil {
		return calibrate.Drift{}, fmt.Errorf("zero after the run: %w", err)
	}
	return calibrate.Drift{Start: start, End: end}, nil
}

// correctDrift re-runs a stored run through the recorder's stages with the
// zero drift removed (linearly between the flow-off zeros) and returns the
// corrected segments. The replay feeds blocks in arrival order and aligns
// them again, so the join sees what the live run saw.
func correctDrift(store *storage.Store, runID uint64, r *rig.Rig, cal *calibrate.Calibrator, d calibrate.Drift) ([]estimate.Segment, error) {
	estCfg, err := estimatorConfig(r)
	if err != nil {
		return nil, err
	}
	est, err := estimate.NewEstimator(r, estCfg)
	if err != nil {
		return nil, err
	}
	var aligner acquire.Aligner
	var segs []estimate.Segment
	err = store.ReplayBlocks(runID, func(b acquire.Block) error {
		aligner.Align(&b)
		cb := cal.Apply(&b)
		d.Correct(&cb)
		segs = append(segs, est.Add(&cb)...)
		return nil
	})
	if err != nil {
		return nil, err
	}
	return append(segs, est.Flush()...), nil
}
