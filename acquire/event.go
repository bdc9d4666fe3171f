package acquire

import "time"

// EventKind names what happened to a source.
type EventKind string

// The events a source reports.
const (
	EventDisconnected EventKind = "disconnected" // the device or broker went away
	EventReconnected  EventKind = "reconnected"  // it came back; Duration is the outage
	EventGap          EventKind = "gap"          // samples are missing (seq jump or outage); Duration when known
	EventRejected     EventKind = "rejected"     // first bad frame of a reason (later ones are only counted)
	EventSaturated    EventKind = "saturated"    // a channel reached its raw range limit
)

// Event is something that happened to a source and belongs in the record:
// outages and gaps with their duration, first occurrences of bad input.
type Event struct {
	T        time.Time     // host clock when it was noticed
	Source   string        // source name
	Kind     EventKind     //
	Duration time.Duration // outage or gap length when known, else 0
	Message  string        // for people
}

// EventFunc receives events. It is called from the source's goroutines and
// must not block (hand the event to a bounded queue and return).
type EventFunc func(Event)
