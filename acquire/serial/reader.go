package serial

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync/atomic"
	"time"

	"go.bug.st/serial"

	"liftyard/acquire"
)

// reader is the state of one Run: parsing, seq accounting and the block
// being filled. Only Run's goroutine touches it.
type reader struct {
	s      *Source
	log    *slog.Logger
	now    func() time.Time
	names  []string
	limits [][2]float64 // per value index, when hasLim[i]
	hasLim []bool
	sat    *saturation
	satHit []bool
	queue  *blockQueue

	delimited bool
	frame     acquire.Frame
	rec       acquire.DelimitedRecord
	logged    [8]bool // first rejection of each reason logged
	header    bool    // the next line is the first since the port opened

	// seq accounting (frames)
	haveSeq     bool
	lastSeq     uint32
	lastTUs     int64
	afterOutage bool // the port was just reopened: an outage gap was already reported
	lineSeq     uint64

	// the block being filled
	n          int
	seq0       uint64
	t0Us, dtUs int64
	cols       [][]float64
	lastRecv   time.Time
	firstRecv  time.Time
	hostTimed  bool // block times from the host clock
	lastDtUs   int64
	prevHostUs int64 // host time of the previous block's newest line, µs (0: none)
	maxFrames  int
	spanUs     int64
}

func (s *Source) newReader(names []string) *reader {
	log := s.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	log = log.With("source", s.Name)
	now := s.Now
	if now == nil {
		now = time.Now
	}
	r := &reader{
		s: s, log: log, now: now, names: names,
		delimited: s.Format == FormatDelimited,
		maxFrames: s.BlockFrames, spanUs: s.BlockSpan.Microseconds(),
		limits: make([][2]float64, len(names)), hasLim: make([]bool, len(names)), satHit: make([]bool, len(names)),
	}
	if r.maxFrames <= 0 {
		r.maxFrames = DefaultBlockFrames
	}
	if r.spanUs <= 0 {
		r.spanUs = DefaultBlockSpan.Microseconds()
	}
	sat := &saturation{names: make([]string, len(names)), counts: make([]atomic.Uint64, len(names))}
	for i, name := range names {
		if lim, ok := s.RawLimits[name]; ok {
			r.limits[i], r.hasLim[i] = lim, true
			sat.names[i] = name
		}
	}
	r.sat = sat
	s.sat.Store(sat)
	r.frame.Values = make([]float64, 0, len(names))
	r.rec.Values = make([]float64, 0, len(names))
	return r
}

// readPort reads lines until the port fails or ctx is done, then closes it.
func (r *reader) readPort(ctx context.Context, port serial.Port) error {
	stop := context.AfterFunc(ctx, func() { port.Close() }) // wakes a blocked Read
	defer stop()
	defer port.Close()
	lr := newLineReader(timeoutReader{port})
	r.header = true
	for {
		line, off, err := lr.next()
		switch {
		case err == nil:
			r.line(line, off)
			r.header = false
		case errors.Is(err, errReadTimeout):
			r.flush()
		case errors.Is(err, errLineTooLong):
			r.reject(&acquire.FrameError{Reason: acquire.ReasonParse, Err: acquire.ErrFrameTooLong}, off)
			r.header = false
		default:
			r.flush()
			if p := lr.partial(); len(p) > 0 && ctx.Err() == nil {
				r.reject(&acquire.FrameError{Reason: acquire.ReasonParse, Err: acquire.ErrFrameSyntax,
					Text: fmt.Sprintf("line torn when the port was lost (%d bytes)", len(p))}, lr.off)
			}
			if ctx.Err() != nil {
				return ctx.Err()
			}
			return err
		}
	}
}

// line handles one complete line.
func (r *reader) line(line []byte, off int64) {
	recv := r.now()
	if !r.delimited {
		if err := acquire.ParseFrame(line, len(r.names), &r.frame); err != nil {
			r.reject(err, off)
			return
		}
		r.acceptFrame(recv)
		return
	}
	if err := r.s.Delimited.Parse(line, &r.rec); err != nil {
		if r.header && errors.Is(err, acquire.ErrFrameSyntax) {
			// A header line (names, not numbers): counted as parse once,
			// as documented on acquire.DelimitedFormat, logged as such.
			r.s.Health.Reject(acquire.ReasonParse)
			r.log.Info("skipped a header line", "line", string(trimmed(line)))
			return
		}
		r.reject(err, off)
		return
	}
	r.lineSeq++
	r.count(r.rec.Values)
	if r.rec.HasTime {
		r.addTimed(r.lineSeq-1, r.rec.TUs, r.rec.Values, recv)
	} else {
		r.addHost(r.lineSeq-1, r.rec.Values, recv)
	}
}

func trimmed(p []byte) []byte {
	if len(p) > 64 {
		p = p[:64]
	}
	for len(p) > 0 && (p[len(p)-1] == '\n' || p[len(p)-1] == '\r') {
		p = p[:len(p)-1]
	}
	return p
}

// acceptFrame does the seq accounting for a good frame and adds it.
func (r *reader) acceptFrame(recv time.Time) {
	f := &r.frame
	if r.haveSeq {
		d := f.Seq - r.lastSeq // uint32: wraps at 2^32 by itself
		switch {
		case d == 0:
			r.s.Health.Duplicates.Add(1)
			return
		case d >= 1<<31:
			// The counter went back: the device restarted (power, DTR
			// reset). Nothing is known to be missing; start afresh.
			r.flush()
			r.log.Info("device frame counter restarted", "from", r.lastSeq, "to", f.Seq)
		case d > 1:
			missing := uint64(d - 1)
			r.s.Health.Gaps.Add(missing)
			r.flush()
			if !r.afterOutage {
				var gap time.Duration
				if span := f.TUs - r.lastTUs; span > 0 {
					gap = time.Duration(span/int64(d)*int64(missing)) * time.Microsecond
				}
				r.emit(acquire.EventGap, gap, fmt.Sprintf("%d frames missing after seq %d", missing, r.lastSeq))
			}
		}
	}
	r.haveSeq, r.lastSeq, r.lastTUs, r.afterOutage = true, f.Seq, f.TUs, false
	r.count(f.Values)
	r.addTimed(uint64(f.Seq), f.TUs, f.Values, recv)
}

// count updates the frame, sample and saturation counters for good values.
func (r *reader) count(values []float64) {
	r.s.Health.Frames.Add(1)
	r.s.Health.Samples.Add(1)
	for i, v := range values {
		if !r.hasLim[i] || !saturated(v, r.limits[i]) {
			continue
		}
		r.sat.counts[i].Add(1)
		if !r.satHit[i] {
			r.satHit[i] = true
			msg := fmt.Sprintf("channel %s reached its raw limit (%g, range %g to %g)", r.names[i], v, r.limits[i][0], r.limits[i][1])
			r.log.Warn("saturated", "channel", r.names[i], "raw", v)
			r.emit(acquire.EventSaturated, 0, msg)
		}
	}
}

// addTimed adds a sample with a device time. A block holds evenly spaced
// samples: when a time is more than a quarter spacing off the block's grid,
// the block is flushed and a new one starts.
func (r *reader) addTimed(seq uint64, tUs int64, values []float64, recv time.Time) {
	if r.n > 0 && r.hostTimed {
		r.flush()
	}
	switch {
	case r.n == 1:
		if dt := tUs - r.t0Us; dt > 0 {
			r.dtUs = dt
		} else {
			r.flush()
		}
	case r.n > 1:
		want := r.t0Us + int64(r.n)*r.dtUs
		if off := tUs - want; off > r.dtUs/4 || off < -r.dtUs/4 {
			r.flush()
		}
	}
	if r.n == 0 {
		r.start(seq, recv)
		r.t0Us, r.dtUs = tUs, 0
	}
	r.append(values, recv)
	if r.n >= r.maxFrames || int64(r.n-1)*r.dtUs >= r.spanUs {
		r.flush()
	}
}

// addHost adds a sample without a device time; the host receive time stands in.
func (r *reader) addHost(seq uint64, values []float64, recv time.Time) {
	if r.n > 0 && !r.hostTimed {
		r.flush()
	}
	if r.n == 0 {
		r.start(seq, recv)
		r.hostTimed = true
	}
	r.append(values, recv)
	if r.n >= r.maxFrames || recv.Sub(r.firstRecv).Microseconds() >= r.spanUs {
		r.flush()
	}
}

func (r *reader) start(seq uint64, recv time.Time) {
	r.seq0, r.firstRecv, r.hostTimed = seq, recv, false
	r.cols = make([][]float64, len(r.names))
	for i := range r.cols {
		r.cols[i] = make([]float64, 0, r.maxFrames)
	}
}

func (r *reader) append(values []float64, recv time.Time) {
	for i, v := range values {
		r.cols[i] = append(r.cols[i], v)
	}
	r.n++
	r.lastRecv = recv
}

// flush queues the pending block, if any.
func (r *reader) flush() {
	if r.n == 0 {
		return
	}
	b := acquire.Block{Source: r.s.Name, Seq: r.seq0, Received: r.lastRecv, Series: make([]acquire.Series, len(r.names))}
	for i, name := range r.names {
		b.Series[i] = acquire.Series{Channel: name, Raw: r.cols[i]}
	}
	if r.hostTimed {
		// Lines arrive in bursts, so the newest line's receive time is the
		// best anchor; the spacing is the mean since the previous block's
		// newest line (or over this block when that is too long ago).
		lastUs := r.lastRecv.UnixMicro()
		var dt int64
		if r.prevHostUs != 0 && r.firstRecv.UnixMicro()-r.prevHostUs < hostContinuity.Microseconds() {
			dt = (lastUs - r.prevHostUs) / int64(r.n)
		} else if r.n > 1 {
			dt = (lastUs - r.firstRecv.UnixMicro()) / int64(r.n-1)
		}
		b.DtUs = clampDt(dt, r.lastDtUs)
		b.T0Us = lastUs - int64(r.n-1)*b.DtUs
		r.prevHostUs = lastUs
	} else {
		b.T0Us = r.t0Us
		b.DtUs = clampDt(r.dtUs, r.lastDtUs)
	}
	if r.n > 1 {
		r.lastDtUs = b.DtUs
	}
	r.n, r.cols = 0, nil
	r.queue.push(b)
}

// reject counts a bad line; the first of each reason is logged and reported.
func (r *reader) reject(err error, off int64) {
	reason := acquire.ReasonParse
	var fe *acquire.FrameError
	if errors.As(err, &fe) {
		fe.Source, fe.Offset = r.s.Name, off
		reason = fe.Reason
	}
	r.s.Health.Reject(reason)
	if reason >= 0 && int(reason) < len(r.logged) && !r.logged[reason] {
		r.logged[reason] = true
		r.log.Warn("rejected line (later ones of this reason are only counted)", "reason", reason.String(), "err", err)
		r.emit(acquire.EventRejected, 0, err.Error())
	}
}

// logTotals logs the rejection totals, once per connection.
func (r *reader) logTotals() {
	h := r.s.Health.Snapshot(r.s.Name)
	r.log.Info("serial totals", "frames", h.Frames, "rejected", h.Rejected, "rejected_by", h.RejectedBy,
		"gaps", h.Gaps, "duplicates", h.Duplicates, "samples_dropped", h.SamplesDropped, "reconnects", h.Reconnects)
}

func (r *reader) emit(kind acquire.EventKind, d time.Duration, msg string) {
	if r.s.OnEvent == nil {
		return
	}
	r.s.OnEvent(acquire.Event{T: r.now(), Source: r.s.Name, Kind: kind, Duration: d, Message: msg})
}
