package acquire

import (
	"math"
	"time"
)

// # Aligning clocks
//
// Each device stamps its samples with its own clock (t_us), which may be off
// the host clock by seconds and run fast or slow by tens of ppm. To put
// channels from several sources on one timeline, a Clock maps a source's
// device time onto the host clock.
//
// Every block is one observation: the host receive time of the block minus
// the device time of its newest sample is offset + transport delay, and the
// transport delay is never negative. So the smallest difference seen over a
// stretch of time is the best estimate of the offset: the lower envelope of
// the observations (the idea behind one-way-delay clock filters; common
// practice). The Clock keeps the minimum of each ClockWindow of device time
// and fits a straight line through the last ClockWindows minima by least
// squares, which gives the offset and its drift; with one window it uses
// that window's minimum alone.
//
// What it cannot see: a transport delay that never drops to near zero. Two
// sources whose minimum delays differ by d are aligned d apart. Serial links
// and wired brokers have minimum delays well under a millisecond; Wi-Fi
// nodes a few milliseconds. That bounds the alignment error, and is why the
// offset is reported (Offset, DriftPPM) rather than hidden.

// ClockWindow is the stretch of device time whose smallest delay gives one
// point of the envelope: long enough that some block in it travels with
// near-minimal delay, short enough to follow drift.
const ClockWindow = 5 * time.Second

// ClockWindows is how many envelope points the drift fit uses (one minute).
const ClockWindows = 12

// Clock maps one source's device clock onto the host clock. It is not safe
// for concurrent use.
type Clock struct {
	cur    envPoint // minimum of the window being filled
	curEnd int64    // device time (µs) at which the current window ends
	have   bool
	pts    []envPoint // completed window minima, oldest first, at most ClockWindows
	// fitted line: offset(t) = a + b·(t − t0), all in µs
	t0, a, b float64
	fitted   bool
}

type envPoint struct {
	deviceUs int64
	offUs    float64 // host − device, µs
}

// Observe records one block: deviceUs is the device time of its newest
// sample and host the time it arrived.
func (c *Clock) Observe(deviceUs int64, host time.Time) {
	off := float64(host.UnixMicro() - deviceUs)
	if !c.have {
		c.cur = envPoint{deviceUs, off}
		c.curEnd = deviceUs + int64(ClockWindow/time.Microsecond)
		c.have = true
		c.refit()
		return
	}
	if deviceUs < c.cur.deviceUs-int64(ClockWindow/time.Microsecond) {
		// The device clock jumped back (a reset): start over.
		*c = Clock{}
		c.Observe(deviceUs, host)
		return
	}
	if deviceUs >= c.curEnd {
		c.pts = append(c.pts, c.cur)
		if len(c.pts) > ClockWindows {
			c.pts = c.pts[1:]
		}
		c.cur = envPoint{deviceUs, off}
		c.curEnd = deviceUs + int64(ClockWindow/time.Microsecond)
	} else if off < c.cur.offUs {
		c.cur = envPoint{deviceUs, off}
	}
	c.refit()
}

// refit fits the envelope line through the completed minima and the current
// window's minimum.
func (c *Clock) refit() {
	pts := append(c.pts[:len(c.pts):len(c.pts)], c.cur)
	if len(pts) == 1 {
		c.t0, c.a, c.b, c.fitted = float64(pts[0].deviceUs), pts[0].offUs, 0, true
		return
	}
	c.t0 = float64(pts[len(pts)-1].deviceUs)
	var sx, sy, sxx, sxy float64
	for _, p := range pts {
		x := float64(p.deviceUs) - c.t0
		sx += x
		sy += p.offUs
		sxx += x * x
		sxy += x * p.offUs
	}
	n := float64(len(pts))
	den := n*sxx - sx*sx
	if den == 0 {
		c.a, c.b = sy/n, 0
	} else {
		c.b = (n*sxy - sx*sy) / den
		c.a = (sy - c.b*sx) / n
	}
	// A line above any observed minimum would put samples after their
	// arrival: lower it onto the envelope.
	lo := math.Inf(1)
	for _, p := range pts {
		lo = math.Min(lo, p.offUs-(c.a+c.b*(float64(p.deviceUs)-c.t0)))
	}
	if lo < 0 {
		c.a += lo
	}
	c.fitted = true
}

// HostUs maps a device time to host time, µs since the Unix epoch. Before
// the first observation it returns deviceUs unchanged.
func (c *Clock) HostUs(deviceUs int64) int64 {
	if !c.fitted {
		return deviceUs
	}
	return deviceUs + int64(math.Round(c.a+c.b*(float64(deviceUs)-c.t0)))
}

// Offset returns the current offset host − device.
func (c *Clock) Offset() time.Duration {
	return time.Duration(c.a) * time.Microsecond
}

// DriftPPM returns the device clock's rate error against the host in parts
// per million (positive: the device clock runs slow).
func (c *Clock) DriftPPM() float64 { return c.b * 1e6 }

// Aligner keeps one Clock per source and stamps blocks with their time on
// the host clock. It is not safe for concurrent use; the recorder owns it.
type Aligner struct {
	clocks map[string]*Clock
}

// Align observes b and sets b.AlignedT0Us, the device time of its first
// sample mapped onto the host clock. A block without a receive time is
// left unaligned (AlignedT0Us = T0Us).
func (a *Aligner) Align(b *Block) {
	if b.Received.IsZero() || b.Len() == 0 {
		b.AlignedT0Us = b.T0Us
		return
	}
	if a.clocks == nil {
		a.clocks = map[string]*Clock{}
	}
	c := a.clocks[b.Source]
	if c == nil {
		c = &Clock{}
		a.clocks[b.Source] = c
	}
	c.Observe(b.T0Us+int64(b.Len()-1)*b.DtUs, b.Received)
	b.AlignedT0Us = c.HostUs(b.T0Us)
}

// Clock returns the clock of one source, or nil before its first block.
func (a *Aligner) Clock(source string) *Clock { return a.clocks[source] }
