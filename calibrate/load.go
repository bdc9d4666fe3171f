package calibrate

import (
	"math"
	"slices"

	"liftyard/rig"
)

// The load levels against a channel's rated capacity (docs/design.md §5).
const (
	LoadWarnFrac  = 0.8 // warning at 80 % of capacity
	LoadAlarmFrac = 1.0 // alarm at 100 %
)

// LoadState is where a rated channel stands against its capacity.
type LoadState string

// Load states.
const (
	LoadOK      LoadState = "ok"
	LoadWarning LoadState = "warning" // at or above 80 % of capacity
	LoadAlarm   LoadState = "alarm"   // at or above capacity
)

// LoadHealth is one rated channel's load against its capacity.
type LoadHealth struct {
	Channel    string  `json:"channel"`
	CapacitySI float64 `json:"capacity_si"` // rated capacity in the SI unit of the channel's quantity
	Unit       string  `json:"unit"`        // that SI unit
	PeakFrac   float64 `json:"peak_frac"`   // largest |value|/capacity in the latest block
	MaxFrac    float64 `json:"max_frac"`    // largest |value|/capacity of the run
	Warnings   uint64  `json:"warnings"`    // samples at or above 80 %
	Alarms     uint64  `json:"alarms"`      // samples at or above 100 %
	// State is the alarm while Latched, else the latest block's state.
	State LoadState `json:"state"`
	// Now is the latest block's state alone (ok, warning or alarm).
	Now LoadState `json:"now,omitempty"`
	// Latched: the channel reached its capacity and the alarm is held
	// until someone acknowledges it (LoadMonitor.Acknowledge), however far
	// the load has fallen since: an overloaded cell may have yielded.
	Latched bool `json:"latched,omitempty"`
}

// LoadMonitor watches calibrated values against each channel's rated
// capacity. It is not safe for concurrent use; the recorder owns it.
type LoadMonitor struct {
	chans map[string]*LoadHealth
	order []string
}

// NewLoadMonitor watches the channels of r that have a capacity.
func NewLoadMonitor(r *rig.Rig) *LoadMonitor {
	m := &LoadMonitor{chans: map[string]*LoadHealth{}}
	for _, c := range r.Channels {
		if c.CapacitySI > 0 {
			m.chans[c.Name] = &LoadHealth{Channel: c.Name, CapacitySI: c.CapacitySI, Unit: c.Quantity.SIUnit(), State: LoadOK, Now: LoadOK}
			m.order = append(m.order, c.Name)
		}
	}
	slices.Sort(m.order)
	return m
}

// Observe checks one calibrated block. It returns the channels whose state
// rose (ok → warning, or to alarm) with this block, so the caller can log
// the moment.
func (m *LoadMonitor) Observe(b *Block) []LoadHealth {
	var rose []LoadHealth
	for _, s := range b.Series {
		h := m.chans[s.Channel]
		if h == nil {
			continue
		}
		peak := 0.0
		for _, v := range s.Values {
			if math.IsNaN(v) {
				continue
			}
			f := math.Abs(v) / h.CapacitySI
			peak = math.Max(peak, f)
			if f >= LoadWarnFrac {
				h.Warnings++
			}
			if f >= LoadAlarmFrac {
				h.Alarms++
			}
		}
		h.PeakFrac = peak
		h.MaxFrac = math.Max(h.MaxFrac, peak)
		prev := h.Now
		switch {
		case peak >= LoadAlarmFrac:
			h.Now = LoadAlarm
			h.Latched = true
		case peak >= LoadWarnFrac:
			h.Now = LoadWarning
		default:
			h.Now = LoadOK
		}
		h.State = h.Now
		if h.Latched {
			h.State = LoadAlarm
		}
		if rank(h.Now) > rank(prev) {
			rose = append(rose, *h)
		}
	}
	return rose
}

// Acknowledge releases the held alarm of channel: its state falls back to
// the latest block's. It reports whether an alarm was held; an unknown
// channel holds none. A load still at or above capacity latches again with
// the next block.
func (m *LoadMonitor) Acknowledge(channel string) bool {
	h := m.chans[channel]
	if h == nil || !h.Latched {
		return false
	}
	h.Latched = false
	h.State = h.Now
	return true
}

// State is the worst state of all rated channels (alarm while any alarm is
// held).
func (m *LoadMonitor) State() LoadState {
	worst := LoadOK
	for _, h := range m.chans {
		if rank(h.State) > rank(worst) {
			worst = h.State
		}
	}
	return worst
}

func rank(s LoadState) int {
	switch s {
	case LoadAlarm:
		return 2
	case LoadWarning:
		return 1
	}
	return 0
}

// Snapshot returns every rated channel's load, sorted by name.
func (m *LoadMonitor) Snapshot() []LoadHealth {
	out := make([]LoadHealth, 0, len(m.order))
	for _, name := range m.order {
		out = append(out, *m.chans[name])
	}
	return out
}
