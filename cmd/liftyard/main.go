// Command liftyard records, calibrates and evaluates lift measurements: load
// cells and pressure sensors in, dynamic pressure and lift/drag coefficients
// with uncertainty out, stored in bbolt and shown on a local dashboard.
//
// Run "liftyard help" for the verbs. The wiring of every verb lives in this
// package; the logic lives in the packages along the data flow.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"

	"liftyard/process"
	"liftyard/rig"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// usageError marks bad usage: exit status 2.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, args ...any) error {
	return &usageError{msg: fmt.Sprintf(format, args...)}
}

// verb is one sub-command.
type verb struct {
	name    string
	summary string
	run     func(ctx context.Context, args []string, stdout, stderr io.Writer) error
}

func verbs() []verb {
	return []verb{
		{"demo", "run the whole job on a simulated tow rig through an embedded MQTT broker", runDemo},
		{"record", "record from the sources of a rig file, with the live dashboard", runRecord},
		{"check", "validate a rig file and list every problem with its line", runCheck},
		{"runs", "list the runs in a store", runRuns},
		{"export", "export a run's segment results, calibrated values or raw samples (json, csv)", runExport},
		{"import", "ingest a raw CSV recorded elsewhere as a new run, processed as a live run", runImport},
		{"calibrate", calibrateSummary, runCalibrate},
		{"fluid", "print density and viscosity of air or water at given conditions", runFluid},
		{"simulate", "emit synthetic sensor traffic (MQTT blocks or serial frames) for dry runs", runSimulate},
		{"serve", "serve the dashboard for a stored database (runs, calibrations, marks) without recording", runServe},
		{"marks", "set steady segments of a run by hand and recompute its segments with them", runMarks},
		{"compare", compareSummary, runCompare},
		{"report", "write a printable HTML report of a run: plots, segments, uncertainty budgets, record quality", runReport},
		{"balance", "fit a balance interaction matrix to combined bench loadings (prints the [balance] table)", runBalance},
		{"tare", "fit the weight tare against the angle from a recorded flow-off angle sweep (prints [[tare]] tables)", runTare},
		{"repair", repairSummary, runRepair},
		{"reprocess", "re-process a run from its stored raw samples as a new run (e.g. with a corrected rig file)", runReprocess},
		{"version", "print the module version and VCS revision of this build", runVersion},
	}
}

// run executes one command line and returns the exit status: 0 success,
// 1 runtime failure, 2 bad usage or bad input files.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		printHelp(stdout)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	if args[0] == "--version" || args[0] == "-version" {
		args = append([]string{"version"}, args[1:]...)
	}
	for _, v := range verbs() {
		if v.name != args[0] {
			continue
		}
		err := v.run(ctx, args[1:], stdout, stderr)
		return exitCode(err, v.name, stderr)
	}
	fmt.Fprintf(stderr, "liftyard: unknown command %q (run \"liftyard help\" for the list)\n", args[0])
	return 2
}

func exitCode(err error, name string, stderr io.Writer) int {
	if err == nil {
		return 0
	}
	if errors.Is(err, errHelp) {
		return 0
	}
	var ue *usageError
	var re rig.Errors
	var re1 *rig.Error
	var ie *process.InputError
	switch {
	case errors.As(err, &ue), errors.As(err, &ie):
		fmt.Fprintf(stderr, "liftyard %s: %v\n", name, err)
		return 2
	case errors.As(err, &re), errors.As(err, &re1):
		fmt.Fprintf(stderr, "%v\n", err)
		return 2
	}
	fmt.Fprintf(stderr, "liftyard %s: %v\n", name, err)
	return 1
}

func printHelp(w io.Writer) {
	fmt.Fprintln(w, "liftyard: lift measurement in the field (load cells, pitot, coefficients with uncertainty)")
	fmt.Fprintln(w, "\nUsage: liftyard <command> [flags]   (liftyard <command> --help for its flags; liftyard --version)")
	fmt.Fprintln(w, "\nCommands:")
	for _, v := range verbs() {
		fmt.Fprintf(w, "  %-10s %s\n", v.name, v.summary)
	}
}
