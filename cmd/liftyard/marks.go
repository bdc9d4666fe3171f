package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"liftyard/estimate"
	"liftyard/process"
	"liftyard/storage"
)

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
	t0, t0Err := process.RunStart(store, id)
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
		res, err := process.ApplyMarks(ctx, store, id)
		if err != nil {
			return err
		}
		fmt.Fprintf(stderr, "liftyard marks: run %d: %d segments stored; %s\n", id, res.Segments, res.Note)
		run, err := store.Run(id)
		if err != nil {
			return err
		}
		r, err := process.StoredRig(run)
		if err != nil {
			return err
		}
		if err := printSummary(stderr, store, id, r); err != nil {
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
