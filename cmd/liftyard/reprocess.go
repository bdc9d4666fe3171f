package main

import (
	"context"
	"fmt"
	"io"
	"os"

	"liftyard/acquire"
	"liftyard/rig"
	"liftyard/storage"
)

// storeSource replays the raw blocks of a stored run in the order they
// arrived (storage.ReplayBlocks), with their receive times, so the
// recorder's stages (clock alignment, join, steady test) see what the live
// run saw. Like csvSource it is not live: it waits for the recorder and
// returns nil when the run's blocks are done.
type storeSource struct {
	store  *storage.Store
	runID  uint64
	health *acquire.Health
}

// Run implements acquire.Source.
func (s *storeSource) Run(ctx context.Context, out chan<- acquire.Block) error {
	err := s.store.ReplayBlocks(s.runID, func(b acquire.Block) error {
		select {
		case out <- b:
			s.health.Frames.Add(1)
			s.health.Samples.Add(uint64(b.Len()))
			return nil
		case <-ctx.Done():
			return ctx.Err()
		}
	})
	if ctx.Err() != nil {
		return nil
	}
	return err
}

// runReprocess is `liftyard reprocess --db FILE --run ID [--rig RIG.toml]`.
func runReprocess(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("reprocess", "--db FILE --run ID|latest [--rig RIG.toml]",
		"re-process a run from its stored raw samples as a new run", stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	ref := fs.String("run", "", "run id to re-process, or latest")
	rigPath := fs.String("rig", "", "corrected rig file (default: the rig file stored with the run)")
	verbose := fs.Bool("v", false, "log progress to stderr")
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
		data, err := os.ReadFile(*rigPath)
		if err != nil {
			return usagef("read rig file: %v", err)
		}
		if r, err = rig.Parse(*rigPath, data); err != nil {
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
	m := offlineMain(r, rigTOML, *db, note, newLogger(stderr, *verbose))
	m.Store = store
	h := &acquire.Health{}
	m.Sources = []Source{{Name: fmt.Sprintf("replay of run %d", id), Src: &storeSource{store: store, runID: id, health: h}, Health: h}}
	if err := m.Run(ctx); err != nil {
		return err
	}
	fmt.Fprintf(stderr, "liftyard reprocess: run %d re-processed as run %d\n", id, m.RunID())
	printDrift(stderr, m)
	if err := printSummary(stderr, *db, store, m.RunID(), m.Rig); err != nil {
		return err
	}
	fmt.Fprintln(stdout, m.RunID())
	return nil
}
