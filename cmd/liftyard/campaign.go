package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"

	"liftyard/storage"
)

// campaignWhats are the datasets of a campaign directory, in the order
// they are written.
var campaignWhats = []string{"segments", "values", "raw"}

// exportCampaign writes Parquet files of the runs ref names (all, latest,
// or an id) into dir, one file per run and dataset, at
// storage.CampaignPath, dated by the day its data was taken
// (storage.DataStart). A file that exists is kept unless replace is set;
// each file is written under a temporary name and renamed when complete,
// so an existing file is always whole. A run being recorded cannot be
// seen (the recorder holds the store's lock); one left `recording` by a
// crash reads as interrupted and is exported with what it holds. It
// prints one line per file to w.
func exportCampaign(db, dir, ref, what string, replace bool, w io.Writer) error {
	whats := campaignWhats
	switch what {
	case "", "all":
	case "raw", "values", "segments":
		whats = []string{what}
	default:
		return usagef("--what %q: want all, segments, values or raw", what)
	}
	store, err := openStore(db)
	if err != nil {
		return err
	}
	defer store.Close()
	var runs []storage.Run
	if ref == "" || ref == "all" {
		if runs, err = store.Runs(); err != nil {
			return err
		}
	} else {
		id, err := store.ResolveRun(ref)
		if err != nil {
			return usagef("%v", err)
		}
		run, err := store.Run(id)
		if err != nil {
			return err
		}
		runs = []storage.Run{run}
	}
	var wrote, kept int
	for _, run := range runs {
		day, err := store.DataStart(run.ID)
		if err != nil {
			return fmt.Errorf("run %d: %w", run.ID, err)
		}
		for _, wh := range whats {
			if wh == "values" && run.RigTOML == "" {
				fmt.Fprintf(w, "liftyard export: run %d has no stored rig file: no values file\n", run.ID)
				continue
			}
			path := filepath.Join(dir, storage.CampaignPath(run, day, wh))
			if _, err := os.Stat(path); err == nil && !replace {
				kept++
				continue
			}
			if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
				return err
			}
			// Through a temporary file (a dot file, which engines skip)
			// renamed when whole: a file that exists is always complete.
			if err := writeFileAtomic(path, func(f io.Writer) error { return exportOne(store, f, run, wh, "parquet") }); err != nil {
				return fmt.Errorf("run %d %s: %w", run.ID, wh, err)
			}
			fmt.Fprintf(w, "liftyard export: %s\n", path)
			wrote++
		}
	}
	fmt.Fprintf(w, "liftyard export: %d files written, %d kept (already there; --replace writes them again), in %s\n",
		wrote, kept, dir)
	return nil
}
