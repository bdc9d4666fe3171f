package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"liftyard/report"
	"liftyard/storage"
)

// runReport is `liftyard report --db FILE --run ID|latest --out FILE.html
// [--rig-dir DIR]`: it writes the printable HTML report of one run and
// prints the file's path.
func runReport(_ context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("report", "--db FILE --run ID|latest --out FILE.html [--rig-dir DIR]",
		"write a printable HTML report of a run (plots, segments, uncertainty budgets, record quality)", stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	ref := fs.String("run", "", "run id, or latest")
	out := fs.String("out", "", "HTML file to write")
	rigDir := fs.String("rig-dir", "", "folder a relative [lift] design curve path is read from (default: the current directory)")
	quiet := quietFlag(fs)
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard report --help)", pos[0])
	}
	if *ref == "" {
		return usagef("--run missing: give a run id or latest (liftyard runs --db %s lists them)", *db)
	}
	if *out == "" {
		return usagef("--out missing: give the HTML file to write, e.g. --out run-%s.html", *ref)
	}
	store, err := openStore(*db)
	if err != nil {
		return err
	}
	defer store.Close()
	id, err := store.ResolveRun(*ref)
	if err != nil {
		if errors.Is(err, storage.ErrNotFound) {
			return usagef("run %s: no such run in %s (liftyard runs --db %s lists them)", *ref, *db, *db)
		}
		return usagef("%v", err)
	}
	prog := newProgress(stderr, *quiet, "report", "steps", 2) // gather and fit, then plot and write
	rep, err := report.Build(store, id, report.Options{RigDir: *rigDir, Version: version})
	if err != nil {
		return err
	}
	prog.add(1, 0)
	if err := writeFileAtomic(*out, rep.WriteHTML); err != nil {
		return fmt.Errorf("write report: %w", err)
	}
	prog.add(1, 0)
	prog.finish()
	abs, err := filepath.Abs(*out)
	if err != nil {
		abs = *out
	}
	fmt.Fprintln(stdout, abs)
	return nil
}

// reportWriter is the report capability of a dashboard over store
// (dashboard.Config.Report): the same HTML as `liftyard report`, with a
// relative design-curve path read from rigDir ("" is the current
// directory).
func reportWriter(store *storage.Store, rigDir string) func(w io.Writer, runID uint64) error {
	return func(w io.Writer, runID uint64) error {
		rep, err := report.Build(store, runID, report.Options{RigDir: rigDir, Version: version})
		if err != nil {
			return err
		}
		return rep.WriteHTML(w)
	}
}

// writeFileAtomic writes through a temporary file in the same folder and
// renames it, so a failed report never leaves half a file under the name.
func writeFileAtomic(path string, write func(io.Writer) error) error {
	f, err := os.CreateTemp(filepath.Dir(path), ".liftyard-report-*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	if err := write(f); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Chmod(tmp, 0o644); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return err
	}
	return nil
}
