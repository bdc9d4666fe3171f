package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"time"

	"liftyard/acquire"
	"liftyard/rig"
	"liftyard/storage"
)

// runReprocess is `liftyard reprocess --db FILE --run ID [--rig RIG.toml]`.
func runReprocess(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("reprocess", "--db FILE --run ID|latest [--rig RIG.toml] [--block DURATION]",
		"re-process a run from its stored raw samples as a new run", stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	ref := fs.String("run", "", "run id to re-process, or latest")
	rigPath := fs.String("rig", "", "corrected rig file (default: the rig file stored with the run)")
	block := fs.Duration("block", 0, "roof rigs: length of one result block (default: the run's own, else the rig's [wind] block, else 10m)")
	verbose := fs.Bool("v", false, "log the run's events to stderr")
	quiet := quietFlag(fs)
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard reprocess --help)", pos[0])
	}
	if *ref == "" {
		return usagef("--run is required (a run id, or latest)")
	}
	if _, err := os.Stat(*db); err != nil {
		return usagef("store %s: %v", *db, err)
	}
	store, err := storage.Open(*db, storage.Options{})
	if err != nil {
		return err
	}
	defer store.Close()
	id, err := store.ResolveRun(*ref)
	if err != nil {
		return usagef("%v", err)
	}
	old, err := store.Run(id)
	if err != nil {
		return err
	}
	if old.Status == storage.StatusRecording {
		return fmt.Errorf("run %d is still recording: re-process it once it has ended", id)
	}
	srcs, err := store.RawSources(id)
	if err != nil {
		return err
	}
	if len(srcs) == 0 {
		return fmt.Errorf("run %d has no stored raw samples to re-process", id)
	}
	var (
		r       *rig.Rig
		rigTOML string
		note    = fmt.Sprintf("reprocessed from run %d", id)
	)
	if *rigPath != "" {
		var data []byte
		if r, data, err = readRig(*rigPath); err != nil {
			return err
		}
		rigTOML = string(data)
		note += " with rig file " + *rigPath
	} else {
		if old.RigTOML == "" {
			return usagef("run %d has no stored rig file: give --rig RIG.toml", id)
		}
		// A relative design path in a stored rig file is read from the
		// current directory: the rig file's own folder is not known.
		if r, err = rig.Parse("", []byte(old.RigTOML)); err != nil {
			return fmt.Errorf("rig file stored with run %d: %w", id, err)
		}
		rigTOML = old.RigTOML
	}
	src := &acquire.StoredRun{Store: store, RunID: id}
	if *block < 0 || (*block > 0 && r.Kind != rig.KindRoof) {
		return usagef("--block %s: a positive duration, for roof rigs only", *block)
	}
	if *block == 0 && old.BlockS > 0 {
		*block = time.Duration(old.BlockS * float64(time.Second)) // the run's own block length
	}
	prog := newProgress(stderr, *quiet, "reprocess", "sample times", int64(old.Samples))
	newID, fin, err := recordOffline(ctx, store, r, rigTOML, note, prog.replayer(src), &src.Health, fmt.Sprintf("replay of run %d", id), newLogger(stderr, *verbose), *block)
	prog.finish()
	if err != nil {
		return err
	}
	fmt.Fprintf(stderr, "liftyard reprocess: run %d re-processed as run %d\n", id, newID)
	printDrift(stderr, r, fin)
	if err := printSummary(stderr, store, newID, r); err != nil {
		return err
	}
	fmt.Fprintln(stdout, newID)
	return nil
}
