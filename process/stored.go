package process

import (
	"context"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// Notes stored with a run whose segments were recomputed from marks.
const (
	MarksNote    = "segments set by user marks"
	UnmarkedNote = "segments set by the automatic steady test (user marks cleared)"
)

// StoredRig parses the rig file stored with a run. A relative design path
// in it is read from the current directory: the rig file's own folder is
// not known.
func StoredRig(run storage.Run) (*rig.Rig, error) {
	if run.RigTOML == "" {
		return nil, fmt.Errorf("run %d has no stored rig file: it cannot be re-processed", run.ID)
	}
	r, err := rig.Parse("", []byte(run.RigTOML))
	if err != nil {
		return nil, fmt.Errorf("rig file stored with run %d: %w", run.ID, err)
	}
	return r, nil
}

// RunStart returns the time of run id's first sample on the clock of its
// segments (UTC wall time, storage.RunClock): sample 0 of the first stored
// block of the estimator's timeline source. User marks are given in
// seconds from it.
func RunStart(store *storage.Store, id uint64) (time.Time, error) {
	c, err := store.RunClock(id)
	if err != nil {
		return time.Time{}, err
	}
	return c.Wall, nil
}

// Recompute replays run's stored raw blocks through the pipeline of the rig
// stored with it — with marks (nil: the automatic steady test) and the
// flow-off zero as the run had it: the drift between the zeros before and
// after when the run stored one, else the zero before the run as the live
// run applied it. It returns the segments and the marks that gave none.
func Recompute(ctx context.Context, store *storage.Store, run storage.Run, marks []estimate.Mark) ([]estimate.Segment, []estimate.Mark, error) {
	r, err := StoredRig(run)
	if err != nil {
		return nil, nil, err
	}
	if !MarksApply(r) {
		// A roof run's segments are fixed blocks whose length the run
		// does not store: recomputing could change them.
		return nil, nil, fmt.Errorf("run %d is a %s run: its segments are fixed-length blocks, which user marks do not set", run.ID, r.Kind)
	}
	cal, err := calibrate.NewCalibratorFrom(r, store.Calibration)
	if err != nil {
		return nil, nil, err
	}
	opt := Options{Marks: marks}
	src := &acquire.StoredRun{Store: store, RunID: run.ID}
	if len(run.Drift) > 0 {
		// The stored drift lines lack the zeros' times: take the zeros
		// again from the same raw blocks, as the recorder did.
		first, err := New(r, cal, Options{})
		if err != nil {
			return nil, nil, err
		}
		if _, err := ReplayStaged(ctx, src, first, nil); err != nil {
			return nil, nil, err
		}
		d, err := first.Drift()
		if err != nil {
			return nil, nil, fmt.Errorf("run %d stored a zero drift, but its flow-off zeros cannot be taken again: %w", run.ID, err)
		}
		opt.Drift = &d
	}
	p, err := New(r, cal, opt)
	if err != nil {
		return nil, nil, err
	}
	segs, err := ReplayStaged(ctx, src, p, nil)
	if err != nil {
		return nil, nil, err
	}
	return segs, p.UnusedMarks(), nil
}

// MarksApplied is what applying a run's marks did.
type MarksApplied struct {
	Segments int    `json:"segments"` // segments stored
	Unused   []int  `json:"unused"`   // 1-based numbers of the marks that gave no segment
	Note     string `json:"note"`     // the note stored with the run
}

// ApplyMarks recomputes run id's segments with its stored marks (the
// automatic steady test when it has none) and stores them with
// storage.CorrectRun; the raw blocks are untouched.
func ApplyMarks(ctx context.Context, store *storage.Store, id uint64) (MarksApplied, error) {
	run, err := store.Run(id)
	if err != nil {
		return MarksApplied{}, err
	}
	if run.Status == storage.StatusRecording {
		return MarksApplied{}, fmt.Errorf("run %d is still recording: apply marks once it has ended", id)
	}
	marks, err := store.Marks(id)
	if err != nil {
		return MarksApplied{}, err
	}
	segs, unused, err := Recompute(ctx, store, run, marks)
	if err != nil {
		return MarksApplied{}, err
	}
	res := MarksApplied{Segments: len(segs), Unused: []int{}, Note: UnmarkedNote}
	if len(marks) > 0 {
		res.Note = fmt.Sprintf("%s (%d marks)", MarksNote, len(marks))
	}
	for _, u := range unused {
		if i := slices.IndexFunc(marks, func(m estimate.Mark) bool { return m.Start.Equal(u.Start) }); i >= 0 {
			res.Unused = append(res.Unused, i+1)
		}
	}
	if len(res.Unused) > 0 {
		s := make([]string, len(res.Unused))
		for i, n := range res.Unused {
			s[i] = strconv.Itoa(n)
		}
		res.Note += fmt.Sprintf("; marks %s held too few samples and gave no segment", strings.Join(s, ", "))
	}
	if err := store.CorrectRun(id, segs, res.Note, nil); err != nil {
		return MarksApplied{}, err
	}
	return res, nil
}
