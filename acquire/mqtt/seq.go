package mqtt

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
	seqDuplicate                   // seen already (same seq and same device time)
	seqRestart                     // far below the window, or a seen seq with another device time: counter restarted
)

// seqTracker does the per-source seq accounting. It remembers, for every seq
// in (hi-SeqWindow, hi], whether it was seen and with which device time t0.
//
// A seq already seen with the same t0 is a duplicate (QoS 1 redelivers). A
// seen seq with a different t0, or a seq more than SeqWindow below the
// highest, means the sender restarted its counter: the window starts over
// from it. Not safe for concurrent use.
type seqTracker struct {
	started bool
	hi      uint64 // highest seq seen in this epoch
	base    uint64 // first seq of this epoch: lower ones were never counted missing
	seen    [SeqWindow]bool
	t0      [SeqWindow]int64
}

// observe classifies seq (with its device time t0Us; blockUs is the
// block's length, 0 when unknown) and records it. For seqJump, missing is
// the number of seqs skipped.
//
// A jump ahead must be confirmed by the device clock: when the blocks it
// says are missing would span more than twice the device time that passed
// since the highest seq (plus one block), the counter jumped, not the data
// — a corrupted or reset counter is handled as a restart, not as hours of
// missing data.
func (w *seqTracker) observe(seq uint64, t0Us, blockUs int64) (v seqVerdict, missing uint64) {
	i := seq % SeqWindow
	switch {
	case !w.started:
		w.reset(seq)
		v = seqNext
	case seq > w.hi && !w.plausible(seq, t0Us, blockUs):
		w.reset(seq)
		v = seqRestart
	case seq > w.hi:
		d := seq - w.hi
		if d >= SeqWindow {
			w.seen = [SeqWindow]bool{}
		} else {
			for s := w.hi + 1; s <= seq; s++ {
				w.seen[s%SeqWindow] = false
			}
		}
		w.hi = seq
		if d == 1 {
			v = seqNext
		} else {
			v, missing = seqJump, d-1
		}
	case w.hi-seq >= SeqWindow:
		w.reset(seq)
		v = seqRestart
	case w.seen[i]:
		if w.t0[i] == t0Us {
			return seqDuplicate, 0
		}
		w.reset(seq)
		v = seqRestart
	case seq < w.base:
		v = seqEarly
	default:
		v = seqLate
	}
	w.seen[i], w.t0[i] = true, t0Us
	return v, missing
}

// plausible reports whether a jump ahead to seq at device time t0Us agrees
// with the device time since the highest seq seen.
func (w *seqTracker) plausible(seq uint64, t0Us, blockUs int64) bool {
	if blockUs <= 0 || seq-w.hi <= 1 {
		return true
	}
	elapsed := t0Us - w.t0[w.hi%SeqWindow]
	if elapsed <= 0 {
		return false // the device clock did not move on: not a gap
	}
	skipped := seq - w.hi - 1
	return float64(skipped)*float64(blockUs) <= 2*float64(elapsed)+float64(blockUs)
}

func (w *seqTracker) reset(seq uint64) {
	w.started, w.hi, w.base = true, seq, seq
	w.seen = [SeqWindow]bool{}
}
