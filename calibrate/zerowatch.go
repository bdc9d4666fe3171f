package calibrate

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"time"

	"liftyard/rig"
)

// FlowOffFrac is the dynamic pressure, as a fraction of the q channel's
// rated capacity, below which the flow counts as off for a zero (common
// practice: a carriage at rest reads a few per mille of its range).
const FlowOffFrac = 0.02

// ZeroKeep bounds the flow-off stretch kept at each end of a run: 30 s of a
// 200 Hz logger is plenty for a mean and little memory.
const ZeroKeep = 30 * time.Second

// ZeroMin is the shortest flow-off stretch that makes a zero.
const ZeroMin = 500 * time.Millisecond

// ZeroWatch collects the flow-off stretches at the start and the end of a
// run (docs/design.md §4: flow-off zero before and after each run). It is not safe
// for concurrent use; the recorder loop owns it.
type ZeroWatch struct {
	q         string  // dynamic pressure channel
	qOffSI    float64 // flow-off threshold, Pa
	channels  []string
	flowOff   bool
	seenFlow  bool
	startDone bool
	start     []Block
	tail      []Block
	live      *Drift // the zero before the run, once the flow has come on
}

// NewZeroWatch returns nil when the rig cannot tell flow-off: no pitot
// channel with a rated capacity.
func NewZeroWatch(r *rig.Rig) *ZeroWatch {
	ch, ok := r.Channel(r.Lift.DynamicPressure)
	if !ok || ch.CapacitySI <= 0 {
		return nil
	}
	z := &ZeroWatch{q: ch.Name, qOffSI: FlowOffFrac * ch.CapacitySI, flowOff: true}
	z.channels = append(append(append(z.channels, r.Lift.Normal...), r.Lift.Axial...), ch.Name)
	return z
}

// Observe looks at one calibrated block (before the estimator sees it).
func (z *ZeroWatch) Observe(b *Block) {
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
				if !z.startDone && span(z.start) >= ZeroMin {
					if zs, err := CaptureZero(mid(z.start), z.start); err == nil {
						z.live = &Drift{Start: zs, End: zs}
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
		if span(z.start) < ZeroKeep {
			z.start = append(z.start, kept)
		}
		return
	}
	z.tail = append(z.tail, kept)
	for len(z.tail) > 1 && span(z.tail[1:]) >= ZeroKeep {
		z.tail = z.tail[1:]
	}
}

// keep copies the series of the zeroed channels (load cells and pitot; an
// angle or a temperature has no zero to take).
func (z *ZeroWatch) keep(b *Block) Block {
	out := Block{Source: b.Source, T0Us: b.T0Us, DtUs: b.DtUs, AlignedT0Us: b.AlignedT0Us}
	for _, s := range b.Series {
		if slices.Contains(z.channels, s.Channel) {
			s.Values = slices.Clone(s.Values)
			out.Series = append(out.Series, s)
		}
	}
	return out
}

// span is the time covered by blocks, by their sample counts.
func span(bs []Block) time.Duration {
	var d time.Duration
	for _, b := range bs {
		d += time.Duration(int64(b.Len())*b.DtUs) * time.Microsecond
	}
	return d
}

// mid is the time in the middle of a stretch, on the shared timeline.
func mid(bs []Block) time.Time {
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

// Drift returns the zeros before and after the run, when the run began and
// ended with the flow off long enough.
func (z *ZeroWatch) Drift() (Drift, error) {
	switch {
	case !z.seenFlow:
		return Drift{}, errors.New("the flow never came on")
	case span(z.start) < ZeroMin:
		return Drift{}, fmt.Errorf("no flow-off zero before the run (record at least %s at rest first)", ZeroMin)
	case span(z.tail) < ZeroMin || !z.flowOff:
		return Drift{}, fmt.Errorf("no flow-off zero after the run (stop the flow for at least %s before ending)", ZeroMin)
	}
	start, err := CaptureZero(mid(z.start), z.start)
	if err != nil {
		return Drift{}, fmt.Errorf("zero before the run: %w", err)
	}
	end, err := CaptureZero(mid(z.tail), z.tail)
	if err != nil {
		return Drift{}, fmt.Errorf("zero after the run: %w", err)
	}
	return Drift{Start: start, End: end}, nil
}

// Live returns the zero taken before the run, as a constant Drift to apply
// to live blocks, once the flow has come on; nil until then or when there
// was no flow-off stretch before it.
func (z *ZeroWatch) Live() *Drift { return z.live }
