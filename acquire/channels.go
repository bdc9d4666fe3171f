package acquire

import (
	"math"
	"slices"
	"time"

	"liftyard/rig"
)

// StaleAfter is how long a channel may go without a sample before it is
// shown as stale: ten blocks of a typical 100 ms logger.
const StaleAfter = time.Second

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
	limits map[string][2]float64
	chans  map[string]*chanStat
	order  []string
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

// Snapshot returns the health of every channel seen, sorted by name, with
// staleness judged at now.
func (m *Monitor) Snapshot(now time.Time) []ChannelHealth {
	out := make([]ChannelHealth, 0, len(m.order))
	for _, name := range m.order {
		st := m.chans[name]
		h := st.h
		h.Stale = h.LastSeen.IsZero() || now.Sub(h.LastSeen) > StaleAfter
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
