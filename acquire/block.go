package acquire

import (
	"context"
	"time"
)

// Block is a set of raw readings from one source that share one timebase:
// sample i of every series was taken at device time T0Us + i·DtUs.
//
// A Block is owned by whoever receives it from a channel; the sender must not
// touch it again, so stages may keep or modify it without copying.
type Block struct {
	Source   string    // name of the source (rig [[source]] name)
	Seq      uint64    // per-source message counter from the device (wraps)
	T0Us     int64     // device clock at sample 0, µs
	DtUs     int64     // sample spacing on the device clock, µs (> 0)
	Received time.Time // host clock when the block arrived
	// AlignedT0Us is T0Us mapped onto the host clock (µs since the Unix
	// epoch) by the source's Clock, so that blocks of several sources share
	// one timeline; 0 until an Aligner has seen the block.
	AlignedT0Us int64
	Series      []Series // one per channel, all of the same length
	// Ack, when not nil, tells the source that the block has reached its
	// end: committed to the store, or counted as dropped or rejected. An
	// MQTT source acknowledges the QoS 1 message then, so that the broker
	// keeps the message until the store has it. Whoever ends the block's
	// life calls it (a second call is harmless); it never
	// blocks. Offline sources leave it nil.
	Ack func() `json:"-"`
}

// Done calls b.Ack when b has one.
func (b *Block) Done() {
	if b != nil && b.Ack != nil {
		b.Ack()
	}
}

// Series is one channel's raw readings in a Block. NaN marks "no sample".
type Series struct {
	Channel string
	Raw     []float64
}

// Len returns the number of sample times in the block.
func (b *Block) Len() int {
	if len(b.Series) == 0 {
		return 0
	}
	return len(b.Series[0].Raw)
}

// Raw returns the raw readings of the named channel, or nil.
func (b *Block) Raw(channel string) []float64 {
	for i := range b.Series {
		if b.Series[i].Channel == channel {
			return b.Series[i].Raw
		}
	}
	return nil
}

// Source produces raw blocks.
//
// Run sends blocks on out until ctx is done or the source ends for good (a
// finished file, a failure it cannot recover from), then returns. It never
// closes out: the caller owns the channel and closes it once every source
// sharing it has returned. Run must not block forever on a full out: a live
// source drops the block and counts it in its Health instead (acquisition
// never waits for storage). Run returns nil after ctx is cancelled.
type Source interface {
	Run(ctx context.Context, out chan<- Block) error
}
