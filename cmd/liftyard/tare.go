package main

import (
	"context"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"liftyard/process"
	"liftyard/rig"
)

// runTare is `liftyard tare --db FILE --run ID|latest [--angle-tol-deg D]`:
// it fits the weight tare of every balance channel to a stored flow-off
// angle sweep and prints the [[tare]] tables to paste into the rig file.
func runTare(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("tare", "--db FILE --run ID|latest [--angle-tol-deg D]",
		"fit the weight tare against the angle from a recorded flow-off angle sweep; prints [[tare]] tables for the rig file", stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	ref := fs.String("run", "", "the run that recorded the flow-off sweep (id, or latest)")
	tolDeg := fs.Float64("angle-tol-deg", rig.Deg(process.TareAngleTolRad), "spread of the angle within one hold, degrees")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard tare --help)", pos[0])
	}
	if *ref == "" {
		return usagef("--run is required (the run of the flow-off angle sweep, or latest)")
	}
	if !(*tolDeg > 0) || *tolDeg > 5 {
		return usagef("--angle-tol-deg %g: want more than 0 and at most 5 degrees", *tolDeg)
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
	sw, err := process.FitTareRun(ctx, store, id, rig.Rad(*tolDeg))
	if len(sw.Holds) > 0 {
		printTareHolds(stderr, sw)
	}
	for _, w := range sw.Warnings {
		fmt.Fprintf(stderr, "liftyard tare: warning: %s\n", w)
	}
	if err != nil {
		return err
	}
	printTareTOML(stdout, id, sw)
	return nil
}

// printTareHolds lists the holds found, each channel in its file unit.
func printTareHolds(w io.Writer, sw process.TareSweep) {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', tabwriter.AlignRight)
	head := []string{"hold", "α [°]", "s", "q [Pa]"}
	for _, c := range sw.Channels {
		head = append(head, fmt.Sprintf("%s [%s]", c, unitOf(sw.Rig, c)))
	}
	fmt.Fprintln(tw, strings.Join(head, "\t")+"\t")
	for i, h := range sw.Holds {
		row := []string{strconv.Itoa(i + 1), fmt.Sprintf("%.3f", rig.Deg(h.AlphaRad)),
			fmt.Sprintf("%.1f", h.End.Sub(h.Start).Seconds()), fmt.Sprintf("%.3g", h.QPa)}
		for _, c := range sw.Channels {
			row = append(row, fmt.Sprintf("%.5g", h.Readings[c]/sw.Rig.UnitScale(c)))
		}
		fmt.Fprintln(tw, strings.Join(row, "\t")+"\t")
	}
	tw.Flush()
}

// printTareTOML prints one [[tare]] table per channel, in the channel's
// file unit, with the fit's residual SD as its u.
func printTareTOML(w io.Writer, id uint64, sw process.TareSweep) {
	lo, hi := sw.Holds[0].AlphaRad, sw.Holds[0].AlphaRad
	for _, h := range sw.Holds {
		lo, hi = min(lo, h.AlphaRad), max(hi, h.AlphaRad)
	}
	fmt.Fprintf(w, "# Weight tare fitted by liftyard tare from run %d: %d holds from %.1f° to %.1f°, flow off.\n",
		id, len(sw.Holds), rig.Deg(lo), rig.Deg(hi))
	fmt.Fprintf(w, "# Outside that range the tare is extrapolated. Paste into the rig file (docs/rig-file.md).\n")
	for _, c := range sw.Channels {
		f := sw.Fit.Channels[c]
		s := sw.Rig.UnitScale(c)
		fmt.Fprintf(w, "\n[[tare]]\nchannel = %q\ncoef    = [%s, %s, %s]   # %s: a + b·sin α + c·cos α\nu       = %s   # %s (the larger of the fit's residual SD, %d degrees of freedom, and the holds' standard error)\n",
			c, num6(f.Coef[0]/s), num6(f.Coef[1]/s), num6(f.Coef[2]/s), unitOf(sw.Rig, c), num6(sw.U[c]/s), unitOf(sw.Rig, c), f.Dof)
	}
}

func num6(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }

func unitOf(r *rig.Rig, name string) string {
	if ch, ok := r.Channel(name); ok && ch.Unit != "" {
		return ch.Unit
	}
	return "SI"
}
