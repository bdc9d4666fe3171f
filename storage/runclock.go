package storage

import (
	"errors"
	"fmt"
	"time"

	"liftyard/acquire"
	"liftyard/rig"
)

// errFound stops a block replay early.
var errFound = errors.New("found")

// RunClock is where a run's timeline starts: sample 0 of the first stored
// block of the source that carries the rig's first normal-force channel
// (the estimator's timeline source), on the device clock and as UTC wall
// time (that block's device time mapped by acquire.Aligner, as the
// pipeline maps it).
type RunClock struct {
	Device time.Time // device clock, as stored; 1970 for a device counting from power-up
	Wall   time.Time // UTC wall time; equal to Device when the block has no receive time
}

// OffsetUs is Wall − Device in µs: what the estimator adds to the device
// clock (estimate.Estimator, "Wall-clock times").
func (c RunClock) OffsetUs() int64 { return c.Wall.UnixMicro() - c.Device.UnixMicro() }

// RunClock returns the start of run id's timeline. User marks are given in
// seconds from its Wall time.
func (s *Store) RunClock(id uint64) (RunClock, error) {
	run, err := s.Run(id)
	if err != nil {
		return RunClock{}, err
	}
	if run.RigTOML == "" {
		return RunClock{}, fmt.Errorf("run %d has no stored rig file", id)
	}
	r, err := rig.Parse("", []byte(run.RigTOML))
	if err != nil {
		return RunClock{}, fmt.Errorf("rig file stored with run %d: %w", id, err)
	}
	if len(r.Lift.Normal) == 0 {
		return RunClock{}, fmt.Errorf("run %d: the rig names no normal-force channel", id)
	}
	var c RunClock
	err = s.ReplayBlocks(id, func(b acquire.Block) error {
		if b.Len() == 0 {
			return nil
		}
		for _, sr := range b.Series {
			if sr.Channel == r.Lift.Normal[0] {
				// The first block of a source is its clock's first
				// observation, so a fresh Aligner maps it as the
				// pipeline did.
				var a acquire.Aligner
				a.Align(&b)
				c = RunClock{Device: time.UnixMicro(b.T0Us).UTC(), Wall: time.UnixMicro(b.AlignedT0Us).UTC()}
				return errFound
			}
		}
		return nil
	})
	switch {
	case errors.Is(err, errFound):
		return c, nil
	case err != nil:
		return RunClock{}, err
	}
	return RunClock{}, fmt.Errorf("run %d has no stored samples of %s", id, r.Lift.Normal[0])
}
