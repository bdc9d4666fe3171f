package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"

	"liftyard/storage"
)

// errRepairLost makes repair exit 1 when something could not be read; the
// new file holds the rest.
var errRepairLost = errors.New("some records could not be read (listed above); the new file holds everything else")

// runRepair is `liftyard repair --db BAD --out NEW`.
func runRepair(_ context.Context, args []string, stdout, _ io.Writer) error {
	fs := newFlags("repair", "--db BAD.db --out NEW.db", repairSummary, stdout)
	db := fs.String("db", "", "the damaged store file (only read)")
	out := fs.String("out", "", "the new store file to write (must not exist)")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	if *db == "" || *out == "" {
		return usagef("--db and --out are required: liftyard repair --db BAD.db --out NEW.db")
	}
	if _, err := os.Stat(*db); err != nil {
		return usagef("store %s: %v", *db, err)
	}
	if _, err := os.Stat(*out); err == nil {
		return usagef("--out %s exists; name a new file", *out)
	}
	rep, err := storage.Repair(*db, *out, nil)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "liftyard repair: copied %d run(s) and %d calibration(s) from %s to %s\n", len(rep.Runs), rep.Calibrations, *db, *out)
	for _, r := range rep.Runs {
		state := "complete copy"
		if len(r.Damage) > 0 {
			state = fmt.Sprintf("%d damaged place(s)", len(r.Damage))
		}
		fmt.Fprintf(stdout, "  run %d (%s): %d blocks, %d sample times, %d segments, %d events: %s\n",
			r.ID, r.Rig, r.Blocks, r.Samples, r.Segments, r.Events, state)
		for _, d := range r.Damage {
			fmt.Fprintf(stdout, "    not readable: %s\n", d)
		}
	}
	for _, d := range rep.Damage {
		fmt.Fprintf(stdout, "  not readable: %s\n", d)
	}
	if rep.Lost() {
		fmt.Fprintf(stdout, "liftyard repair: each run that lost data carries a %q event saying what is missing\n", storage.EventRepaired)
		return errRepairLost
	}
	return nil
}

const repairSummary = "copy every readable run of a damaged store into a new file and list what could not be read"
