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

// runExport is `liftyard export --db FILE --run ID|latest --what raw|values|segments [--format csv|json|parquet] [--out FILE]`,
// or with --campaign DIR, Parquet files of many runs in a partitioned
// directory (campaign.go).
func runExport(_ context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("export", "--db FILE --run ID|latest --what raw|values|segments [--format csv|json|parquet] [--out FILE] [--quiet]\n       liftyard export --db FILE --campaign DIR [--run all|ID|latest] [--what all|raw|values|segments] [--replace]",
		"export a run's segment results, raw samples or calibrated values; or Parquet files of every run into a campaign directory", stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	ref := fs.String("run", "", "run id, or latest (with --campaign: all, the default, or one run)")
	what := fs.String("what", "", "segments (one row per steady segment; the default), raw (raw readings) or values (calibrated values in SI units; no zero or drift correction); with --campaign also all (the default)")
	format := fs.String("format", "", "json (the default for segments), csv (the default for raw and values) or parquet")
	outPath := fs.String("out", "", "output file (default: standard output)")
	campaign := fs.String("campaign", "", "write Parquet files into DIR/<what>/rig=<rig>/date=<YYYY-MM-DD>/run-<id>.parquet (docs/export.md)")
	replace := fs.Bool("replace", false, "with --campaign: write files that already exist again (default: keep them)")
	quiet := quietFlag(fs)
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	if *campaign != "" {
		if *outPath != "" || (*format != "" && *format != "parquet") {
			return usagef("--campaign writes Parquet files into its directory: drop --out and --format")
		}
		return exportCampaign(*db, *campaign, *ref, *what, *replace, stderr)
	}
	if *replace {
		return usagef("--replace is for --campaign")
	}
	if *ref == "" {
		*ref = "latest"
	}
	if *what == "" {
		*what = "segments"
	}
	switch *what {
	case "segments":
		if *format == "" {
			*format = "json"
		}
		if *format != "json" && *format != "csv" && *format != "parquet" {
			return usagef("--format %q: want json, csv or parquet", *format)
		}
	case "raw", "values":
		if *format == "" || *format == "json" { // json: accepted, as before parquet, and written as CSV
			*format = "csv"
		}
		if *format != "csv" && *format != "parquet" {
			return usagef("--format %q: want csv or parquet", *format)
		}
	default:
		return usagef("--what %q: want segments, raw or values", *what)
	}
	if f, ok := stdout.(*os.File); ok && *format == "parquet" && *outPath == "" {
		if fi, err := f.Stat(); err == nil && fi.Mode()&os.ModeCharDevice != 0 {
			return usagef("--format parquet writes a binary file: give --out FILE (or redirect standard output)")
		}
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
	if *what != "segments" && *format != "parquet" { // CSV raw and values: one row per sample time
		prog = newProgress(stderr, *quiet, "export", "rows", int64(run.Samples))
		w = prog.writer(w, 1) // after the header
	}
	err = exportOne(store, w, run, *what, *format)
	prog.finish()
	if err != nil {
		return err
	}
	if f, ok := file.(*os.File); ok && f != os.Stdout {
		return f.Close()
	}
	return nil
}

// exportOne writes what (raw, values or segments) of run in format.
func exportOne(store *storage.Store, w io.Writer, run storage.Run, what, format string) error {
	pq := format == "parquet"
	switch what {
	case "raw":
		if pq {
			return store.ExportRawParquet(w, run.ID)
		}
		return store.ExportRaw(w, run.ID)
	case "values":
		return exportValues(store, w, run, pq)
	}
	segs, err := store.Segments(run.ID)
	if err != nil {
		return err
	}
	if pq {
		return storage.ExportSegmentsParquet(w, run, segs)
	}
	return storage.ExportSegments(w, run, segs, format)
}

// exportValues writes the calibrated values of run through the calibrations
// of the rig file stored with it (stored calibration ids resolved in the
// same store).
func exportValues(store *storage.Store, w io.Writer, run storage.Run, parquet bool) error {
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
	if parquet {
		return store.ExportValuesParquet(w, run.ID, r, cal)
	}
	return store.ExportValues(w, run.ID, r, cal)
}
