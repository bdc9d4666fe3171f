package acquire

import (
	"math"
	"slices"
	"time"

	"liftyard/rig"
)

// StaleAfter is how long a channel may go without a sample before it is
// shown as stale when its source's block period is not known yet (fewer
// than two blocks seen): ten blocks of a typical 100 ms logger. Once the
// period is known, StaleLimit applies.
const StaleAfter = time.Second

// StaleBlocks is the number of block periods a source may stay silent
// before its data count as stale: a block arriving up to one period late
// is the ordinary jitter of a serial or network link (a serial block is
// only closed by the frame after it), two and a half periods of silence is
// a stopped source (common practice for polled loggers).
const StaleBlocks = 2.5

// MinStale is the shortest stale limit, whatever the block period: below it,
// the host's own scheduling jitter would flag a healthy fast source.
const MinStale = 100 * time.Millisecond

// StaleLimit is how long a source with blocks every period may be silent
// before its data are stale: StaleBlocks periods, at least MinStale;
// StaleAfter when the period is unknown (0).
func StaleLimit(period time.Duration) time.Duration {
	if period <= 0 {
		return StaleAfter
	}
	return max(time.Duration(StaleBlocks*float64(period)), MinStale)
}

// SourceAge is how fresh one source's data are: the data-age clock of the
// live page.
type SourceAge struct {
	Source string `json:"source"`
	// LastBlock is the host time the newest block arrived.
	LastBlock time.Time `json:"last_block,omitzero"`
	// BlockPeriod is the device time one block covers, or the mean
	// interval between the source's blocks over the last 2 s of arrivals
	// when that is longer (0 until two blocks arrived).
	BlockPeriod time.Duration `json:"-"`
	// Age is now − LastBlock; Limit is StaleLimit(BlockPeriod).
	Age   time.Duration `json:"-"`
	Limit time.Duration `json:"-"`
	Stale bool          `json:"stale"` // Age > Limit
}

// rateWindow is the stretch over which a channel's sample rate is measured.
const rateWindow = 2 * time.Second

// ChannelHealth is the raw-side health of one channel.
type ChannelHealth struct {
	Channel   string    `json:"channel"`
	Source    string    `json:"source"`
	RateHz    float64   `json:"rate_hz"`   // finite samples per second of device time, over the blocks of the last 2 s
	Samples   uint64    `json:"samples"`   // finite samples seen
	Missing   uint64    `json:"missing"`   // NaN samples ("no sample")
	Saturated uint64    `json:"saturated"` // samples at or beyond the raw range limits
	LastSeen  time.Time `json:"last_seen,omitzero"`
	Stale     bool      `json:"stale"` // no sample for StaleAfter
}

// Monitor keeps the raw-side health of every channel: rate, missing
// samples, saturation against the rig's raw_range, staleness. It is not safe
// for concurrent use; the recorder owns it.
type Monitor struct {
	limits  map[string][2]float64
	chans   map[string]*chanStat
	order   []string
	sources map[string]*srcStat
	srcs    []string // source names in order of first block
}

// srcStat is one source's block arrivals, for its data-age clock.
type srcStat struct {
	last   time.Time
	recv   []time.Time // arrivals over the last rateWindow (at least two kept)
	spanUs int64       // device time covered by the newest block, µs
}

type chanStat struct {
	h     ChannelHealth
	recv  []recvMark // recent blocks: host time and sample count, for the rate
	satOn bool       // inside a saturation episode (for events)
}

type recvMark struct {
	t      time.Time
	n      int   // finite samples
	spanUs int64 // device time the block covers, len × DtUs (0 when unknown)
}

// NewMonitor makes a Monitor for the channels of r (their raw ranges).
func NewMonitor(r *rig.Rig) *Monitor {
	m := &Monitor{limits: map[string][2]float64{}, chans: map[string]*chanStat{}}
	for _, c := range r.Channels {
		if c.RawMin != 0 || c.RawMax != 0 {
			m.limits[c.Name] = [2]float64{c.RawMin, c.RawMax}
		}
	}
	return m
}

// Observe counts one block. It returns an EventSaturated for each channel
// that has just started to saturate (once per episode).
func (m *Monitor) Observe(b *Block) []Event {
	var evs []Event
	m.arrived(b)
	for _, s := range b.Series {
		st := m.chans[s.Channel]
		if st == nil {
			st = &chanStat{h: ChannelHealth{Channel: s.Channel, Source: b.Source}}
			m.chans[s.Channel] = st
			m.order = append(m.order, s.Channel)
			slices.Sort(m.order)
		}
		lim, hasLim := m.limits[s.Channel]
		sat := 0
		finite := 0
		for _, v := range s.Raw {
			switch {
			case math.IsNaN(v):
				st.h.Missing++
				continue
			case hasLim && (v <= lim[0] || v >= lim[1]):
				sat++
			}
			finite++
		}
		st.h.Samples += uint64(finite)
		st.h.Saturated += uint64(sat)
		if sat > 0 && !st.satOn {
			evs = append(evs, Event{T: b.Received, Source: b.Source, Kind: EventSaturated,
				Message: "channel " + s.Channel + " reached its raw range limit (amplifier or converter saturated)"})
		}
		st.satOn = sat > 0
		if finite > 0 && !b.Received.IsZero() {
			st.h.LastSeen = b.Received
			st.recv = append(st.recv, recvMark{b.Received, finite, int64(len(s.Raw)) * b.DtUs})
			cut := b.Received.Add(-rateWindow)
			i := 0
			for i < len(st.recv)-1 && st.recv[i].t.Before(cut) {
				i++
			}
			st.recv = st.recv[i:]
		}
	}
	return evs
}

// arrived notes the arrival of b for its source's data-age clock.
func (m *Monitor) arrived(b *Block) {
	if b.Received.IsZero() || b.Source == "" {
		return
	}
	if m.sources == nil {
		m.sources = map[string]*srcStat{}
	}
	st := m.sources[b.Source]
	if st == nil {
		st = &srcStat{}
		m.sources[b.Source] = st
		m.srcs = append(m.srcs, b.Source)
	}
	if b.Received.Before(st.last) {
		return // out of order: the clock does not go back
	}
	st.last = b.Received
	st.spanUs = int64(b.Len()) * b.DtUs
	st.recv = append(st.recv, b.Received)
	cut := b.Received.Add(-rateWindow)
	i := 0
	for i < len(st.recv)-2 && st.recv[i].Before(cut) {
		i++
	}
	st.recv = st.recv[i:]
}

// period is the source's block period: the device time its newest block
// covers, or the mean interval between its recent arrivals when that is
// longer (a source that sends less often than it samples). Counting the
// device span keeps a burst of queued blocks, which arrive together, from
// shrinking the limit. 0 before two blocks arrived.
func (st *srcStat) period() time.Duration {
	n := len(st.recv)
	if n < 2 {
		return 0
	}
	mean := st.recv[n-1].Sub(st.recv[0]) / time.Duration(n-1)
	return max(mean, time.Duration(st.spanUs)*time.Microsecond)
}

// Ages returns the data-age clock of every source seen, in order of its
// first block, judged at now: the age of its newest block against
// StaleLimit of its own block period.
func (m *Monitor) Ages(now time.Time) []SourceAge {
	out := make([]SourceAge, 0, len(m.srcs))
	for _, name := range m.srcs {
		st := m.sources[name]
		a := SourceAge{Source: name, LastBlock: st.last, BlockPeriod: st.period(), Age: max(now.Sub(st.last), 0)}
		a.Limit = StaleLimit(a.BlockPeriod)
		a.Stale = a.Age > a.Limit
		out = append(out, a)
	}
	return out
}

// Snapshot returns the health of every channel seen, sorted by name, with
// staleness judged at now against its source's StaleLimit.
func (m *Monitor) Snapshot(now time.Time) []ChannelHealth {
	out := make([]ChannelHealth, 0, len(m.order))
	for _, name := range m.order {
		st := m.chans[name]
		h := st.h
		limit := StaleAfter
		if src := m.sources[h.Source]; src != nil {
			limit = StaleLimit(src.period())
		}
		h.Stale = h.LastSeen.IsZero() || now.Sub(h.LastSeen) > limit
		// The rate is finite samples per second of device time over the
		// blocks received in the last rateWindow: the device's own clock,
		// so bursts and jitter of arrival (an MQTT link) do not move it
		// (issue 13: a 200 Hz channel showed 190 Hz). Blocks without a
		// spacing fall back to host arrival times.
		var nDev int
		var devUs int64
		for _, r := range st.recv {
			if r.spanUs <= 0 {
				devUs = 0
				break
			}
			nDev += r.n
			devUs += r.spanUs
		}
		if devUs > 0 {
			h.RateHz = float64(nDev) / (float64(devUs) / 1e6)
		} else if len(st.recv) >= 2 {
			span := st.recv[len(st.recv)-1].t.Sub(st.recv[0].t).Seconds()
			n := 0
			for _, r := range st.recv[1:] { // samples that arrived after the first mark
				n += r.n
			}
			if span > 0 {
				h.RateHz = float64(n) / span
			}
		}
		if h.Stale {
			h.RateHz = 0
		}
		out = append(out, h)
	}
	return out
}
