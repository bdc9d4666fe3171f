package sim

import (
	"fmt"
	"math"
	"slices"

	"liftyard/acquire"
	"liftyard/rig"
)

// Route is one rig source's share of a simulation: the channels it
// carries, in the order its wire format sends them.
type Route struct {
	Source rig.Source
	// Channels are the channels the source carries: a serial frame
	// source's channels, a delimited source's channel columns, an MQTT
	// source's channels (or, for the one MQTT source without a channel
	// list, every simulated channel no other source carries).
	Channels []string
	// Missing are the channels of Channels the simulator does not make
	// (a humidity sensor, say): serial formats need a field for them, so
	// they are sent as raw 0; MQTT leaves them out.
	Missing []string
}

// Routes assigns the channels the simulator makes (made, in its order) to
// the rig's serial and MQTT sources, each in its own wire order, so one
// simulation is split across the sources as the real sensors are.
// Simulated sources get no route (the recorder simulates them itself).
// unrouted lists the made channels no source carries. More than one MQTT
// source without a channel list is an error: which carries what would be a
// guess.
func Routes(r *rig.Rig, made []string) (routes []Route, unrouted []string, err error) {
	claimed := map[string]bool{}
	open := -1 // the MQTT source that takes the channels nobody claims
	for _, s := range r.Sources {
		if s.Type != rig.SourceSerial && s.Type != rig.SourceMQTT {
			continue // simulated: not a wire source
		}
		chans, listed := s.Carried()
		if !listed {
			if open >= 0 {
				return nil, nil, fmt.Errorf("mqtt sources %q and %q both have no channels list: give each its channels = [...] so the simulation knows which source carries what", routes[open].Source.Name, s.Name)
			}
			open = len(routes)
		}
		rt := Route{Source: s, Channels: append([]string(nil), chans...)}
		for _, c := range chans {
			claimed[c] = true
			if !slices.Contains(made, c) {
				rt.Missing = append(rt.Missing, c)
			}
		}
		routes = append(routes, rt)
	}
	for _, c := range made {
		if claimed[c] {
			continue
		}
		if open >= 0 {
			routes[open].Channels = append(routes[open].Channels, c)
			continue
		}
		unrouted = append(unrouted, c)
	}
	return routes, unrouted, nil
}

// DeviceClock is one simulated device's own clock: it reads StartUs when
// the simulation starts and runs fast by DriftPPM parts per million (slow
// when negative), as a logger's crystal does.
type DeviceClock struct {
	StartUs  int64
	DriftPPM float64
}

// DefaultClock is the clock of the i-th routed source of a dry run: each
// starts at its own time since "power-up" (between 10 min and 2 h) and
// drifts by its own few to 100 ppm, so every dry run exercises the clock
// alignment (acquire.Aligner). Invented values.
func DefaultClock(i int) DeviceClock {
	drifts := []float64{40, -85, 12, -100, 70, -6}
	starts := []int64{3600, 777, 5230, 1415, 6020, 2450} // s
	return DeviceClock{StartUs: starts[i%len(starts)]*1e6 + int64(i/len(starts))*7e6, DriftPPM: drifts[i%len(drifts)]}
}

// Splitter cuts each simulator block into one block per route: the
// route's channels only, labelled with the route's source, stamped with
// that source's device clock and numbered by that source's own seq. The
// physics stays one simulation; only the wire split and the clocks differ.
// Not safe for concurrent use.
type Splitter struct {
	Routes []Route
	Clocks []DeviceClock // one per route

	started bool
	t0Us    int64 // simulator clock at the first block
	seq     []uint64
}

// Split returns the blocks of b for each route, in route order.
func (s *Splitter) Split(b acquire.Block) []acquire.Block {
	if !s.started {
		s.started, s.t0Us = true, b.T0Us
		s.seq = make([]uint64, len(s.Routes))
	}
	n := b.Len()
	out := make([]acquire.Block, len(s.Routes))
	for k, rt := range s.Routes {
		c := s.Clocks[k]
		elapsed := float64(b.T0Us - s.t0Us)
		o := acquire.Block{
			Source:   rt.Source.Name,
			Seq:      s.seq[k],
			T0Us:     c.StartUs + int64(math.Round(elapsed*(1+c.DriftPPM*1e-6))),
			DtUs:     b.DtUs,
			Received: b.Received,
		}
		s.seq[k]++
		for _, name := range rt.Channels {
			raw := b.Raw(name)
			switch {
			case raw != nil:
				raw = append([]float64(nil), raw...)
			case rt.Source.Type == rig.SourceMQTT:
				continue
			default:
				raw = make([]float64, n) // not simulated: raw 0 keeps the line's fields
			}
			o.Series = append(o.Series, acquire.Series{Channel: name, Raw: raw})
		}
		out[k] = o
	}
	return out
}
