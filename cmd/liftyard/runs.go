package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"text/tabwriter"
	"time"

	"liftyard/calibrate"
	"liftyard/rig"
	"liftyard/storage"
)

// openStore opens an existing store read-only: listing and exporting must
// not create a file or change one.
func openStore(path string) (*storage.Store, error) {
	if _, err := os.Stat(path); err != nil {
		return nil, usagef("store %s: %v", path, err)
	}
	return storage.Open(path, storage.Options{ReadOnly: true})
}

// runRuns is `liftyard runs --db FILE [--json]`.
func runRuns(_ context.Context, args []string, stdout, _ io.Writer) error {
	fs := newFlags("runs", "--db FILE [--json]", "list the runs in a store", stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	asJSON := fs.Bool("json", false, "print JSON instead of a table")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	store, err := openStore(*db)
	if err != nil {
		return err
	}
	defer store.Close()
	runs, err := store.Runs()
	if err != nil {
		return err
	}
	if *asJSON {
		if runs == nil {
			runs = []storage.Run{}
		}
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(runs)
	}
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "RUN\tRIG\tKIND\tSTARTED (UTC)\tDURATION\tSTATUS\tSAMPLES\tSEGMENTS")
	for _, r := range runs {
		dur := "-"
		if !r.Ended.IsZero() {
			dur = r.Ended.Sub(r.Started).Round(time.Second).String()
		}
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%s\t%d\t%d\n", r.ID, r.Rig, r.Kind,
			r.Started.UTC().Format("2006-01-02 15:04:05"), dur, r.Status, r.Samples, r.Segments)
	}
	return tw.Flush()
}

// runExport is `liftyard export --db FILE --run ID|latest --what raw|values|segments [--format csv|json] [--out FILE]`.
func runExport(_ context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("export", "--db FILE --run ID|latest --what raw|values|segments [--format csv|json] [--out FILE]",
		"export a run's segment results, raw samples or calibrated values", stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	ref := fs.String("run", "latest", "run id, or latest")
	what := fs.String("what", "segments", "segments (one row per steady segment), raw (raw readings, CSV) or values (calibrated values in SI units, CSV; no zero or drift correction)")
	format := fs.String("format", "json", "json or csv (raw is always csv)")
	outPath := fs.String("out", "", "output file (default: standard output)")
	quiet := quietFlag(fs)
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	switch *what {
	case "segments":
		if *format != "json" && *format != "csv" {
			return usagef("--format %q: want json or csv", *format)
		}
	case "raw":
		if *format != "csv" && *format != "json" {
			return usagef("--format %q: want csv", *format)
		}
	case "values":
		if *format != "csv" && *format != "json" {
			return usagef("--format %q: want csv", *format)
		}
	default:
		return usagef("--what %q: want segments, raw or values", *what)
	}
	store, err := openStore(*db)
	if err != nil {
		return err
	}
	defer store.Close()
	id, err := store.ResolveRun(*ref)
	if err != nil {
		return usagef("%v", err)
	}
	run, err := store.Run(id)
	if err != nil {
		return err
	}
	w := stdout
	if *outPath != "" {
		f, err := os.Create(*outPath)
		if err != nil {
			return err
		}
		defer f.Close()
		w = f
	}
	var prog *progress
	file := w
	if *what != "segments" { // raw and values: one row per sample time
		prog = newProgress(stderr, *quiet, "export", "rows", int64(run.Samples))
		w = prog.writer(w, 1) // after the header
	}
	switch *what {
	case "raw":
		err = store.ExportRaw(w, id)
	case "values":
		err = exportValues(store, w, run)
	default:
		segs, serr := store.Segments(id)
		if serr != nil {
			return serr
		}
		err = storage.ExportSegments(w, run, segs, *format)
	}
	prog.finish()
	if err != nil {
		return err
	}
	if f, ok := file.(*os.File); ok && f != os.Stdout {
		return f.Close()
	}
	return nil
}

// exportValues writes the calibrated values of run through the calibrations
// of the rig file stored with it (stored calibration ids resolved in the
// same store).
func exportValues(store *storage.Store, w io.Writer, run storage.Run) error {
	if run.RigTOML == "" {
		return fmt.Errorf("run %d has no stored rig file: its calibrations are unknown", run.ID)
	}
	r, err := rig.Parse("", []byte(run.RigTOML))
	if err != nil {
		return fmt.Errorf("rig file stored with run %d: %w", run.ID, err)
	}
	cal, err := calibrate.NewCalibratorFrom(r, store.Calibration)
	if err != nil {
		return fmt.Errorf("run %d: %w", run.ID, err)
	}
	return store.ExportValues(w, run.ID, r, cal)
}
