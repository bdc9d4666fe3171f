package acquire

import "sync/atomic"

// Reason says why a frame or message was rejected.
type Reason int

// The rejection reasons counted per source.
const (
	ReasonCRC        Reason = iota // checksum mismatch
	ReasonParse                    // not a number, bad JSON, bad syntax
	ReasonFieldCount               // wrong number of values
	ReasonRange                    // value out of the representable or rated range
	ReasonNaN                      // NaN or Inf reading
	ReasonSize                     // a message larger than the source's limit, refused before decoding
	ReasonChannel                  // a message with none of the rig's channels (unknown channels are dropped)
	numReasons
)

var reasonNames = [numReasons]string{"crc", "parse", "field_count", "range", "nan", "size", "channel"}

func (r Reason) String() string {
	if r < 0 || r >= numReasons {
		return "unknown"
	}
	return reasonNames[r]
}

// Health counts what happened to one source. All counters only increase during
// a run. A Health may be read and updated from any goroutine.
type Health struct {
	Frames         atomic.Uint64 // blocks (messages, frames) accepted
	Samples        atomic.Uint64 // sample times accepted
	SamplesDropped atomic.Uint64 // sample times dropped because a queue was full
	BlocksDropped  atomic.Uint64 // whole messages dropped undecoded because a queue was full
	Duplicates     atomic.Uint64 // blocks dropped as duplicates (same seq seen)
	Gaps           atomic.Uint64 // blocks found missing at jumps in seq (only increases)
	Late           atomic.Uint64 // missing blocks that arrived later and filled a counted gap
	Reconnects     atomic.Uint64 // re-established connections
	// ConnectFailures counts connection attempts that failed (the broker or
	// the device could not be reached); 0 once a link has held is normal.
	ConnectFailures atomic.Uint64
	// UnknownChannels counts series dropped because the rig file does not
	// declare their channel.
	UnknownChannels atomic.Uint64
	rejected        [numReasons]atomic.Uint64
}

// Reject counts one rejected frame or message.
func (h *Health) Reject(r Reason) {
	if r >= 0 && r < numReasons {
		h.rejected[r].Add(1)
	}
}

// Rejected returns the count for one reason.
func (h *Health) Rejected(r Reason) uint64 {
	if r < 0 || r >= numReasons {
		return 0
	}
	return h.rejected[r].Load()
}

// HealthSnapshot is a plain copy of a Health, for storage and display.
type HealthSnapshot struct {
	Source         string            `json:"name"`
	Frames         uint64            `json:"frames"`
	Samples        uint64            `json:"samples"`
	Rejected       uint64            `json:"rejected"`
	RejectedBy     map[string]uint64 `json:"rejected_by,omitempty"`
	SamplesDropped uint64            `json:"samples_dropped"`
	BlocksDropped  uint64            `json:"blocks_dropped"`
	Duplicates     uint64            `json:"duplicates"`
	Gaps           uint64            `json:"gaps"`
	Late           uint64            `json:"late"`
	Reconnects     uint64            `json:"reconnects"`
	// ConnectFailures and UnknownChannels are omitted when 0 (runs stored
	// before they existed read as 0).
	ConnectFailures uint64 `json:"connect_failures,omitempty"`
	UnknownChannels uint64 `json:"unknown_channels,omitempty"`
}

// Snapshot copies the counters.
func (h *Health) Snapshot(source string) HealthSnapshot {
	s := HealthSnapshot{
		Source:          source,
		Frames:          h.Frames.Load(),
		Samples:         h.Samples.Load(),
		SamplesDropped:  h.SamplesDropped.Load(),
		BlocksDropped:   h.BlocksDropped.Load(),
		Duplicates:      h.Duplicates.Load(),
		Gaps:            h.Gaps.Load(),
		Late:            h.Late.Load(),
		Reconnects:      h.Reconnects.Load(),
		ConnectFailures: h.ConnectFailures.Load(),
		UnknownChannels: h.UnknownChannels.Load(),
	}
	for r := Reason(0); r < numReasons; r++ {
		n := h.rejected[r].Load()
		if n == 0 {
			continue
		}
		if s.RejectedBy == nil {
			s.RejectedBy = map[string]uint64{}
		}
		s.RejectedBy[r.String()] = n
		s.Rejected += n
	}
	return s
}
