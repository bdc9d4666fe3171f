package estimate

import (
	"math"
	"time"

	"liftyard/calibrate"
)

// joiner joins channels of several sources by time, for every estimation
// stage (Estimator, RoofEstimator): one source carries the timeline and
// its blocks wait in a queue; every other source's channels are kept as a
// short history on the shared host timeline (AlignedT0Us, set by
// acquire.Aligner; the device clock when blocks are not aligned) and read
// at each timeline sample by linear interpolation, or held at the newest
// value past its end. A timeline block is released when every other source
// has delivered data up to its last sample, or when the timeline has run
// JoinWait ahead of it, so a source that arrives late is still joined at
// the right instant.
type joiner struct {
	hist    map[string]*history // recent samples of channels from other sources, on the shared timeline
	marks   map[string]int64    // newest timeline time delivered by each other source
	pending []*calibrate.Block  // timeline blocks waiting for other sources
	// primaryMark is the newest timeline time of the timeline source.
	primaryMark int64
}

// queue adds a timeline block to the wait.
func (j *joiner) queue(b *calibrate.Block) {
	j.pending = append(j.pending, b)
	if end := alignedEnd(b); end > j.primaryMark {
		j.primaryMark = end
	}
}

// next pops the oldest waiting timeline block when the other sources have
// caught up with it (at once when force is set), else returns nil.
func (j *joiner) next(force bool) *calibrate.Block {
	if len(j.pending) == 0 {
		return nil
	}
	b := j.pending[0]
	end := alignedEnd(b)
	if !force && j.primaryMark-end < int64(JoinWait/time.Microsecond) {
		for _, mark := range j.marks {
			if mark < end {
				return nil
			}
		}
	}
	j.pending[0] = nil
	j.pending = j.pending[1:]
	return b
}

// record keeps the finite samples of a block from another source and calls
// each (when not nil) with every series that had one, its newest finite
// value, for the stage's held values and uncertainties. It returns false
// for a block that cannot be placed on the timeline (no positive DtUs, no
// samples).
func (j *joiner) record(b *calibrate.Block, each func(s *calibrate.Series, newest float64)) bool {
	if b.DtUs <= 0 || b.Len() == 0 {
		return false
	}
	if j.hist == nil {
		j.hist = map[string]*history{}
		j.marks = map[string]int64{}
	}
	at0 := alignedStart(b)
	for k := range b.Series {
		s := &b.Series[k]
		h := j.hist[s.Channel]
		if h == nil {
			h = &history{}
			j.hist[s.Channel] = h
		}
		newest, any := 0.0, false
		for i, v := range s.Values {
			if finite(v) {
				h.push(at0+int64(i)*b.DtUs, v)
				newest, any = v, true
			}
		}
		if any && each != nil {
			each(s, newest)
		}
	}
	if end := alignedEnd(b); end > j.marks[b.Source] {
		j.marks[b.Source] = end
	}
	return true
}

// at reads channel name from the other sources' history at timeline time
// tUs: NaN when no other source carries it, or before its oldest sample.
func (j *joiner) at(name string, tUs int64) float64 {
	if h := j.hist[name]; h != nil {
		return h.at(tUs)
	}
	return math.NaN()
}

// has reports whether another source has delivered channel name.
func (j *joiner) has(name string) bool { return j.hist[name] != nil }
