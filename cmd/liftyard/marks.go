package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/dashboard"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// marksNote is the run note and event of segments recomputed from marks.
const (
	marksNote    = "segments set by user marks"
	unmarkedNote = "segments set by the automatic steady test (user marks cleared)"
)

// errFound stops a replay early.
var errFound = errors.New("found")

// storedRig parses the rig file stored with a run.
func storedRig(run storage.Run) (*rig.Rig, error) {
	if run.RigTOML == "" {
		return nil, fmt.Errorf("run %d has no stored rig file: it cannot be re-processed", run.ID)
	}
	r, err := rig.Parse("", []byte(run.RigTOML))
	if err != nil {
		return nil, fmt.Errorf("rig file stored with run %d: %w", run.ID, err)
	}
	return r, nil
}

// runStart returns the time of run id's first sample on the clock of its
// segments: sample 0 of the first stored block of the source that carries
// the rig's first normal-force channel (the estimator's timeline source).
func runStart(store *storage.Store, id uint64) (time.Time, error) {
	run, err := store.Run(id)
	if err != nil {
		return time.Time{}, err
	}
	r, err := storedRig(run)
	if err != nil {
		return time.Time{}, err
	}
	if len(r.Lift.Normal) == 0 {
		return time.Time{}, fmt.Errorf("run %d: the rig names no normal-force channel", id)
	}
	var t0 time.Time
	err = store.ReplayBlocks(id, func(b acquire.Block) error {
		for _, s := range b.Series {
			if s.Channel == r.Lift.Normal[0] && b.Len() > 0 {
				t0 = time.UnixMicro(b.T0Us).UTC()
				return errFound
			}
		}
		return nil
	})
	switch {
	case errors.Is(err, errFound):
		return t0, nil
	case err != nil:
		return time.Time{}, err
	}
	return time.Time{}, fmt.Errorf("run %d has no stored samples of %s", id, r.Lift.Normal[0])
}

// recomputeSegments re-runs run id's stored raw blocks through the
// recorder's stages — clock alignment, calibration, the flow-off zero (the
// drift between the zeros before and after the run when the run stored
// one, else the zero before the run as the live run applied it), the
// estimator — with marks (nil: the automatic steady test). It returns the
// segments and the marks that gave none.
func recomputeSegments(ctx context.Context, store *storage.Store, run storage.Run, marks []estimate.Mark) ([]estimate.Segment, []estimate.Mark, error) {
	r, err := storedRig(run)
	if err != nil {
		return nil, nil, err
	}
	if r.Kind == rig.KindRoof {
		// A roof run's segments are fixed blocks whose length the run
		// does not store: recomputing could change them.
		return nil, nil, fmt.Errorf("run %d is a roof run: its segments are fixed-length blocks, which user marks do not set", run.ID)
	}
	cal, err := calibrate.NewCalibratorFrom(r, store.Calibration)
	if err != nil {
		return nil, nil, err
	}
	est, err := newStage(r, estimate.RoofConfig{}, marks)
	if err != nil {
		return nil, nil, err
	}
	replay := func(fn func(cb *calibrate.Block)) error {
		var aligner acquire.Aligner
		return store.ReplayBlocks(run.ID, func(b acquire.Block) error {
			if err := ctx.Err(); err != nil {
				return err
			}
			aligner.Align(&b)
			cb := cal.Apply(&b)
			fn(&cb)
			return nil
		})
	}
	var correct func(cb *calibrate.Block)
	if zw := zeroWatch(r); zw != nil && len(run.Drift) > 0 {
		// The stored drift lines lack the zeros' times: take the zeros
		// again from the same raw blocks, as the recorder did.
		if err := replay(zw.Observe); err != nil {
			return nil, nil, err
		}
		d, err := zw.Drift()
		if err != nil {
			return nil, nil, fmt.Errorf("run %d stored a zero drift, but its flow-off zeros cannot be taken again: %w", run.ID, err)
		}
		correct = d.Correct
	} else if zw != nil {
		correct = func(cb *calibrate.Block) {
			zw.Observe(cb)
			if z := zw.Live(); z != nil {
				z.Correct(cb)
			}
		}
	}
	var segs []estimate.Segment
	err = replay(func(cb *calibrate.Block) {
		if correct != nil {
			correct(cb)
		}
		segs = append(segs, est.Add(cb)...)
	})
	if err != nil {
		return nil, nil, err
	}
	segs = append(segs, est.Flush()...)
	var unused []estimate.Mark
	if e, ok := est.(*estimate.Estimator); ok {
		unused = e.UnusedMarks()
	}
	return segs, unused, nil
}

// applyMarks recomputes run id's segments with its stored marks (the
// automatic steady test when it has none) and stores them with
// storage.CorrectRun; the raw blocks are untouched.
func applyMarks(ctx context.Context, store *storage.Store, id uint64) (dashboard.MarksApplied, error) {
	run, err := store.Run(id)
	if err != nil {
		return dashboard.MarksApplied{}, err
	}
	if run.Status == storage.StatusRecording {
		return dashboard.MarksApplied{}, fmt.Errorf("run %d is still recording: apply marks once it has ended", id)
	}
	marks, err := store.Marks(id)
	if err != nil {
		return dashboard.MarksApplied{}, err
	}
	segs, unused, err := recomputeSegments(ctx, store, run, marks)
	if err != nil {
		return dashboard.MarksApplied{}, err
	}
	res := dashboard.MarksApplied{Segments: len(segs), Unused: []int{}, Note: unmarkedNote}
	if len(marks) > 0 {
		res.Note = fmt.Sprintf("%s (%d marks)", marksNote, len(marks))
	}
	for _, u := range unused {
		if i := slices.IndexFunc(marks, func(m estimate.Mark) bool { return m.Start.Equal(u.Start) }); i >= 0 {
			res.Unused = append(res.Unused, i+1)
		}
	}
	if len(res.Unused) > 0 {
		res.Note += fmt.Sprintf("; marks %s held too few samples and gave no segment", joinInts(res.Unused))
	}
	if err := store.CorrectRun(id, segs, res.Note, nil); err != nil {
		return dashboard.MarksApplied{}, err
	}
	return res, nil
}

func joinInts(v []int) string {
	s := make([]string, len(v))
	for i, n := range v {
		s[i] = strconv.Itoa(n)
	}
	return strings.Join(s, ", ")
}

// parseMarkTime reads one end of a mark: seconds from the run's first
// sample ("12.5") or an RFC 3339 time ("2026-03-14T09:00:12.5Z").
func parseMarkTime(s string, t0 time.Time) (time.Time, error) {
	s = strings.TrimSpace(s)
	if v, err := strconv.ParseFloat(s, 64); err == nil {
		if v < 0 || v > 10*24*3600 || v != v {
			return time.Time{}, fmt.Errorf("%q: seconds from the run's first sample must be from 0 to 864000", s)
		}
		return t0.Add(time.Duration(v*1e6+0.5) * time.Microsecond), nil
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, fmt.Errorf("%q is neither seconds from the run's first sample (12.5) nor an RFC 3339 time (2026-03-14T09:00:12.5Z)", s)
	}
	return t, nil
}

// parseMarkFlag reads one --add START,END[,LABEL]; the label may hold
// commas.
func parseMarkFlag(v string, t0 time.Time) (estimate.Mark, error) {
	parts := strings.SplitN(v, ",", 3)
	if len(parts) < 2 {
		return estimate.Mark{}, fmt.Errorf("--add %q: write START,END[,LABEL], e.g. --add 12.0,15.5,\"carriage steady\"", v)
	}
	start, err := parseMarkTime(parts[0], t0)
	if err != nil {
		return estimate.Mark{}, fmt.Errorf("--add %q: start %w", v, err)
	}
	end, err := parseMarkTime(parts[1], t0)
	if err != nil {
		return estimate.Mark{}, fmt.Errorf("--add %q: end %w", v, err)
	}
	m := estimate.Mark{Start: start, End: end}
	if len(parts) == 3 {
		m.Label = strings.TrimSpace(parts[2])
	}
	return m, nil
}

// runMarks is `liftyard marks --db FILE --run ID (--add START,END[,LABEL] … | --clear | --list) [--apply]`.
func runMarks(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("marks", "--db FILE --run ID|latest (--add START,END[,LABEL] … | --clear | --list) [--apply]",
		"set steady segments by hand (they override the automatic steady test once applied)", stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	ref := fs.String("run", "", "run id, or latest")
	var adds []string
	fs.Func("add", "add a mark START,END[,LABEL]: seconds from the run's first sample or RFC 3339 times (repeat for more)", func(v string) error {
		adds = append(adds, v)
		return nil
	})
	clearAll := fs.Bool("clear", false, "remove every mark of the run")
	list := fs.Bool("list", false, "list the run's marks (the default)")
	apply := fs.Bool("apply", false, "recompute the run's segments from its raw samples with its marks")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard marks --help)", pos[0])
	}
	if *ref == "" {
		return usagef("--run is required (a run id, or latest)")
	}
	n := 0
	for _, set := range []bool{len(adds) > 0, *clearAll, *list} {
		if set {
			n++
		}
	}
	if n > 1 {
		return usagef("give one of --add, --clear or --list")
	}
	if _, err := os.Stat(*db); err != nil {
		return usagef("store %s: %v", *db, err)
	}
	store, err := storage.Open(*db, storage.Options{ReadOnly: !*apply && len(adds) == 0 && !*clearAll})
	if err != nil {
		return err
	}
	defer store.Close()
	id, err := store.ResolveRun(*ref)
	if err != nil {
		return usagef("%v", err)
	}
	marks, err := store.Marks(id)
	if err != nil {
		return err
	}
	t0, t0Err := runStart(store, id)
	switch {
	case len(adds) > 0:
		if t0Err != nil {
			return t0Err
		}
		for _, a := range adds {
			m, err := parseMarkFlag(a, t0)
			if err != nil {
				return usagef("%v", err)
			}
			marks = append(marks, m)
		}
		slices.SortStableFunc(marks, func(a, b estimate.Mark) int { return a.Start.Compare(b.Start) })
		if err := estimate.CheckMarks(marks, 0); err != nil {
			return usagef("%v (run %d has %d marks; liftyard marks --run %d --list shows them)", err, id, len(marks)-len(adds), id)
		}
		if err := store.PutMarks(id, marks); err != nil {
			return err
		}
		fmt.Fprintf(stderr, "liftyard marks: run %d now has %d marks\n", id, len(marks))
	case *clearAll:
		if err := store.PutMarks(id, nil); err != nil {
			return err
		}
		marks = nil
		fmt.Fprintf(stderr, "liftyard marks: marks of run %d cleared\n", id)
	}
	if *apply {
		res, err := applyMarks(ctx, store, id)
		if err != nil {
			return err
		}
		fmt.Fprintf(stderr, "liftyard marks: run %d: %d segments stored; %s\n", id, res.Segments, res.Note)
		run, err := store.Run(id)
		if err != nil {
			return err
		}
		r, err := storedRig(run)
		if err != nil {
			return err
		}
		if err := printSummary(stderr, *db, store, id, r); err != nil {
			return err
		}
	}
	printMarks(stdout, marks, t0)
	return nil
}

// printMarks lists marks with their times from the run's first sample.
func printMarks(w io.Writer, marks []estimate.Mark, t0 time.Time) {
	if len(marks) == 0 {
		fmt.Fprintln(w, "no marks: segments come from the automatic steady test")
		return
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "#\tstart [s]\tend [s]\tlength [s]\tstart (UTC)\tlabel\t")
	for i, m := range marks {
		rel := func(t time.Time) string {
			if t0.IsZero() {
				return "—"
			}
			return strconv.FormatFloat(t.Sub(t0).Seconds(), 'f', 3, 64)
		}
		fmt.Fprintf(tw, "%d\t%s\t%s\t%.3f\t%s\t%s\t\n", i+1, rel(m.Start), rel(m.End), m.End.Sub(m.Start).Seconds(),
			m.Start.UTC().Format("2006-01-02T15:04:05.000Z"), m.Label)
	}
	tw.Flush()
}
