package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"strings"

	"liftyard/calibrate"
	"liftyard/rig"
)

// runBalance is `liftyard balance --rig RIG.toml --points LOADS.csv
// [--outputs A,B,…] [--components X,Y,…] [--second-order]`: it fits the
// balance interaction matrix to bench loadings (calibrate.FitBalance) and
// prints the [balance] table for the rig file.
func runBalance(_ context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("balance", "--rig RIG.toml --points LOADS.csv [--outputs A,B,…] [--components X,Y,…] [--second-order]",
		"fit a balance interaction matrix to combined bench loadings; prints the [balance] table for the rig file", stdout)
	rigPath := fs.String("rig", "", "rig file naming the output and component channels")
	points := fs.String("points", "", "loadings CSV: applied_<component> columns and one column per output (docs/rig-file.md)")
	outFlag := fs.String("outputs", "", "output channels, comma-separated (default: the rig's [balance] outputs, else its [lift] normal and axial channels)")
	compFlag := fs.String("components", "", "component channels, comma-separated (default: the rig's [balance] components, else the outputs)")
	second := fs.Bool("second-order", false, "fit the products of the outputs too (needs more loadings)")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard balance --help)", pos[0])
	}
	if *rigPath == "" || *points == "" {
		return usagef("--rig and --points are required")
	}
	r, _, err := readRig(*rigPath)
	if err != nil {
		return err
	}
	outputs, components := slices.Concat(r.Lift.Normal, r.Lift.Axial), []string(nil)
	if r.Balance != nil {
		outputs, components = r.Balance.Outputs, r.Balance.Components
	}
	if *outFlag != "" {
		outputs = splitList(*outFlag)
	}
	if *compFlag != "" {
		components = splitList(*compFlag)
	}
	if len(components) == 0 {
		components = outputs
	}
	for _, c := range slices.Concat(outputs, components) {
		if _, ok := r.Channel(c); !ok {
			return usagef("channel %q is not a [[channel]] of rig %q", c, r.Name)
		}
	}
	f, err := os.Open(*points)
	if err != nil {
		return usagef("loadings file: %v", err)
	}
	defer f.Close()
	loads, zero, err := calibrate.ReadBalanceLoads(f, outputs, components)
	if err != nil {
		var re *rig.Error
		if errors.As(err, &re) {
			re.File = *points
		}
		return err
	}
	if zero != nil {
		fmt.Fprintf(stderr, "liftyard balance: no-load reading subtracted from every loading: %s\n", joinNums(zero))
	}
	b, err := calibrate.FitBalance(loads, *second)
	if err != nil {
		return usagef("%s: %v", *points, err)
	}
	for _, w := range b.Warnings {
		fmt.Fprintf(stderr, "liftyard balance: warning: %s\n", w)
	}
	for k, c := range components {
		fmt.Fprintf(stderr, "  %s: residual SD %.4g %s over %d loadings (ν = %d)\n", c, b.ResidualSD[k], unitOf(r, c), len(loads), b.Dof)
	}
	order := "linear"
	if *second {
		order = "second order"
	}
	fmt.Fprintf(stdout, "# Balance interaction matrix fitted by liftyard balance from %s: %d loadings, %s, ν = %d.\n", *points, len(loads), order, b.Dof)
	fmt.Fprintf(stdout, "# Outputs in their channels' units, components in theirs. Paste into the rig file (docs/rig-file.md).\n")
	fmt.Fprintf(stdout, "[balance]\noutputs    = %s\ncomponents = %s\nmatrix     = [\n", quoteList(outputs), quoteList(components))
	for _, row := range b.C {
		fmt.Fprintf(stdout, "  [%s],\n", joinNums(row))
	}
	fmt.Fprintf(stdout, "]\nu          = [%s]   # residual SD of each component\n", joinNums(b.ResidualSD))
	return nil
}

func splitList(s string) []string {
	var out []string
	for _, p := range strings.Split(s, ",") {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

func quoteList(xs []string) string {
	q := make([]string, len(xs))
	for i, x := range xs {
		q[i] = strconv.Quote(x)
	}
	return "[" + strings.Join(q, ", ") + "]"
}

func joinNums(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = num6(x)
	}
	return strings.Join(s, ", ")
}
