package main

import (
	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// correctDrift re-runs a stored run through the recorder's stages with the
// zero drift removed (linearly between the flow-off zeros) and returns the
// corrected segments. The replay feeds blocks in arrival order and aligns
// them again, so the join sees what the live run saw.
func correctDrift(store *storage.Store, runID uint64, r *rig.Rig, cal *calibrate.Calibrator, d calibrate.Drift) ([]estimate.Segment, error) {
	est, err := newStage(r, estimate.RoofConfig{}, nil)
	if err != nil {
		return nil, err
	}
	var aligner acquire.Aligner
	var segs []estimate.Segment
	err = store.ReplayBlocks(runID, func(b acquire.Block) error {
		aligner.Align(&b)
		cb := cal.Apply(&b)
		d.Correct(&cb)
		segs = append(segs, est.Add(&cb)...)
		return nil
	})
	if err != nil {
		return nil, err
	}
	return append(segs, est.Flush()...), nil
}
