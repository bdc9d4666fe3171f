package storage

import (
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
)

// Status is where a run stands.
type Status string

// Run statuses.
const (
	StatusRecording   Status = "recording"   // the recorder is writing it
	StatusComplete    Status = "complete"    // ended normally
	StatusInterrupted Status = "interrupted" // found still "recording" when the store was opened again
)

// Run is the record of one acquisition run.
type Run struct {
	ID       uint64                   `json:"id"`
	Rig      string                   `json:"rig"`       // rig name
	Kind     string                   `json:"kind"`      // rig kind (foil, roof, ...)
	Fluid    string                   `json:"fluid"`     // rig fluid
	RigTOML  string                   `json:"-"`         // the rig file as read, so the run can be re-processed
	AreaM2   float64                  `json:"area_m2"`   // reference area used
	AreaKind string                   `json:"area_kind"` // planform, frontal, ...
	Started  time.Time                `json:"started"`
	Ended    time.Time                `json:"ended,omitzero"`
	Status   Status                   `json:"status"`
	Samples  uint64                   `json:"samples"`  // sample times stored
	Segments int                      `json:"segments"` // result rows stored
	Sources  []acquire.HealthSnapshot `json:"sources"`
	Channels []acquire.ChannelHealth  `json:"channels,omitempty"` // per-channel rate, gaps, saturation (at the end of the run)
	Loads    []calibrate.LoadHealth   `json:"loads,omitempty"`    // per rated channel: largest load against capacity
	Drift    []calibrate.DriftLine    `json:"drift,omitempty"`    // zero drift between the flow-off zeros before and after the run
	Note     string                   `json:"note,omitempty"`
	// BlockS is a roof run's result block, s; 0 for other kinds and for
	// runs stored before it was kept (reprocess then takes the rig's).
	BlockS float64 `json:"block_s,omitempty"`
}
