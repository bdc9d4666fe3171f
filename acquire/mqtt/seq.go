package mqtt

import (
	"encoding/binary"
	"hash/fnv"
	"math"

	"liftyard/acquire"
)

// SeqWindow is how many seq values below the highest one seen are
// remembered. 4096 blocks is almost 7 minutes at 10 blocks/s: far more than
// QoS 1 redelivery (an in-flight window of tens of messages) or a persistent
// session backlog delivered out of order would ever reach back.
const SeqWindow = 4096

// seqVerdict is what the window says about one arriving seq.
type seqVerdict int

const (
	seqNext      seqVerdict = iota // the next one, or the first ever
	seqJump                        // ahead of the next one: missing blocks before it
	seqLate                        // below the highest, not seen yet, inside a counted gap: fills it
	seqEarly                       // below the first seq of this epoch, not seen: accepted, no gap to fill
	seqDuplicate                   // the same block again: same seq, same device time, same readings
	seqRestart                     // far below the window, or a seen seq with another device time or other readings: counter restarted
)

// # The duplicate rule
//
// A block is identified by its seq, its device time t0 and a checksum of
// its readings (blockSum). A duplicate is the same block again — all three
// equal — as QoS 1 redelivers it, byte for byte. A block with a seq seen
// already but another device time or other readings is never a duplicate:
// it is another block (a logger that rebooted, whose seq and power-up clock
// both start again from 0; or a block queued by the broker for an earlier
// session of the same client id), and it is delivered, the window starting
// a new epoch from it.
//
// The tracker keeps the epoch before the current one as well, so a
// redelivery of a block of that epoch (a stale QoS 1 copy arriving after
// the restart) is still counted as a duplicate and does not restart the
// window again. Seq and device time alone are not enough: a logger whose
// seq and clock both count from power-up sends, after a reboot, blocks
// with exactly the seqs and device times of the blocks it sent after the
// previous power-up, and those still queued for a persistent session
// (issue 15: 11 fresh blocks were dropped as "duplicates" of stale ones).

// seqEpoch remembers, for every seq in (hi-SeqWindow, hi], whether it was
// seen and with which device time and readings.
type seqEpoch struct {
	hi   uint64 // highest seq seen in this epoch
	base uint64 // first seq of this epoch: lower ones were never counted missing
	seen [SeqWindow]bool
	t0   [SeqWindow]int64
	sum  [SeqWindow]uint64
}

// has reports whether this exact block (seq, t0, sum) was seen.
func (e *seqEpoch) has(seq uint64, t0Us int64, sum uint64) bool {
	if seq > e.hi || e.hi-seq >= SeqWindow {
		return false
	}
	i := seq % SeqWindow
	return e.seen[i] && e.t0[i] == t0Us && e.sum[i] == sum
}

// seqTracker does the per-source seq accounting over the current epoch
// and the one before it (see the duplicate rule above). A seq more than
// SeqWindow below the highest, a seen seq with another block, or a jump
// ahead the device clock denies means the sender restarted its counter: a
// new epoch starts from it. Not safe for concurrent use.
type seqTracker struct {
	started  bool
	cur      seqEpoch
	prev     seqEpoch
	havePrev bool
}

// observe classifies seq (with its device time t0Us, the checksum of its
// readings sum, and blockUs the block's length, 0 when unknown) and
// records it. For seqJump, missing is the number of seqs skipped.
//
// A jump ahead must be confirmed by the device clock: when the blocks it
// says are missing would span more than twice the device time that passed
// since the highest seq (plus one block), the counter jumped, not the data
// — a corrupted or reset counter is handled as a restart, not as hours of
// missing data.
func (w *seqTracker) observe(seq uint64, t0Us int64, sum uint64, blockUs int64) (v seqVerdict, missing uint64) {
	c := &w.cur
	i := seq % SeqWindow
	switch {
	case !w.started:
		w.reset(seq)
		v = seqNext
	case c.has(seq, t0Us, sum) || (w.havePrev && w.prev.has(seq, t0Us, sum)):
		return seqDuplicate, 0
	case seq > c.hi && !w.plausible(seq, t0Us, blockUs):
		w.reset(seq)
		v = seqRestart
	case seq > c.hi:
		d := seq - c.hi
		if d >= SeqWindow {
			c.seen = [SeqWindow]bool{}
		} else {
			for s := c.hi + 1; s <= seq; s++ {
				c.seen[s%SeqWindow] = false
			}
		}
		c.hi = seq
		if d == 1 {
			v = seqNext
		} else {
			v, missing = seqJump, d-1
		}
	case c.hi-seq >= SeqWindow, c.seen[i]: // far below, or this seq with another block
		w.reset(seq)
		v = seqRestart
	case seq < c.base:
		v = seqEarly
	default:
		v = seqLate
	}
	c = &w.cur // reset may have moved it
	c.seen[i], c.t0[i], c.sum[i] = true, t0Us, sum
	return v, missing
}

// plausible reports whether a jump ahead to seq at device time t0Us agrees
// with the device time since the highest seq seen.
func (w *seqTracker) plausible(seq uint64, t0Us, blockUs int64) bool {
	c := &w.cur
	if blockUs <= 0 || seq-c.hi <= 1 {
		return true
	}
	elapsed := t0Us - c.t0[c.hi%SeqWindow]
	if elapsed <= 0 {
		return false // the device clock did not move on: not a gap
	}
	skipped := seq - c.hi - 1
	return float64(skipped)*float64(blockUs) <= 2*float64(elapsed)+float64(blockUs)
}

// reset starts a new epoch at seq; the current one becomes the previous.
func (w *seqTracker) reset(seq uint64) {
	if w.started {
		w.prev, w.havePrev = w.cur, true
	}
	w.started = true
	w.cur.hi, w.cur.base = seq, seq
	w.cur.seen = [SeqWindow]bool{}
}

// blockSum is the checksum of a block's readings for the duplicate rule:
// FNV-1a over its sample spacing, channel names and the bits of every
// reading, so a redelivered copy matches and a different block with the
// same seq and device time (almost surely) does not.
func blockSum(b *acquire.Block) uint64 {
	h := fnv.New64a()
	var buf [8]byte
	binary.LittleEndian.PutUint64(buf[:], uint64(b.DtUs))
	h.Write(buf[:])
	for _, s := range b.Series {
		h.Write([]byte(s.Channel))
		h.Write([]byte{0})
		for _, v := range s.Raw {
			binary.LittleEndian.PutUint64(buf[:], math.Float64bits(v))
			h.Write(buf[:])
		}
	}
	return h.Sum64()
}
