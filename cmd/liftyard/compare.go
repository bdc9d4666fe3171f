package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"

	"liftyard/report"
	"liftyard/storage"
)

const compareSummary = "compare runs at matching set-points: ΔC_L, ΔC_D with U95 and En per point, a verdict per pair (the first run is the reference)"

// runCompare is `liftyard compare --db FILE --runs 3,5,7 [--format
// text|json] [--html FILE]`: every run after the first against the first,
// at the first run's set-points (report.BuildComparison).
func runCompare(_ context.Context, args []string, stdout, _ io.Writer) error {
	fs := newFlags("compare", "--db FILE --runs ID,ID[,ID...] [--format text|json] [--html FILE]", compareSummary, stdout)
	db := fs.String("db", "liftyard.db", "bbolt store file")
	list := fs.String("runs", "", "run ids separated by commas, the reference first (liftyard runs lists them)")
	format := fs.String("format", "text", "text (a table per pair and the verdict) or json")
	html := fs.String("html", "", "also write the printable comparison (overlay plots and tables) to this HTML file")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard compare --help)", pos[0])
	}
	if *format != "text" && *format != "json" {
		return usagef("--format %q: want text or json", *format)
	}
	ids, err := parseRunList(*list)
	if err != nil {
		return usagef("--runs: %v", err)
	}
	store, err := openStore(*db)
	if err != nil {
		return err
	}
	defer store.Close()
	c, err := report.BuildComparison(store, ids, report.Options{Version: version})
	switch {
	case errors.Is(err, storage.ErrNotFound):
		return usagef("%v (liftyard runs --db %s lists them)", err, *db)
	case errors.Is(err, report.ErrCompareUsage):
		return usagef("%v", err)
	case err != nil:
		return err
	}
	if *html != "" {
		if err := writeFileAtomic(*html, c.WriteHTML); err != nil {
			return fmt.Errorf("write comparison: %w", err)
		}
	}
	if *format == "json" {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(c.Doc())
	}
	if err := writeCompareText(stdout, c); err != nil {
		return err
	}
	if *html != "" {
		abs, err := filepath.Abs(*html)
		if err != nil {
			abs = *html
		}
		fmt.Fprintln(stdout, "printable comparison:", abs)
	}
	return nil
}

// parseRunList reads "3,5,7" (spaces allowed) into run ids.
func parseRunList(s string) ([]uint64, error) {
	if strings.TrimSpace(s) == "" {
		return nil, errors.New("missing: give two or more run ids separated by commas, the reference first, e.g. --runs 3,5")
	}
	var ids []uint64
	for f := range strings.SplitSeq(s, ",") {
		f = strings.TrimSpace(f)
		id, err := strconv.ParseUint(f, 10, 64)
		if err != nil || id == 0 {
			return nil, fmt.Errorf("%q is not a run id (a whole number from 1)", f)
		}
		ids = append(ids, id)
	}
	return ids, nil
}

// writeCompareText prints each pair's table and verdict, then the overall
// verdict on one line.
func writeCompareText(w io.Writer, c *report.Comparison) error {
	for _, n := range c.Notes {
		fmt.Fprintln(w, "note:", n)
	}
	for _, p := range c.Pairs() {
		fmt.Fprintf(w, "%s\nshared inputs: %s\n", p.Title, p.Shared)
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
		fmt.Fprintf(tw, "%s\tOTHER POINT\tC_L REF\tC_L OTHER\tΔC_L\tU95\tEn\tΔC_D\tU95\tEn C_D\tVERDICT\t\n", p.SetPointLabel)
		for _, r := range p.Rows {
			v := "agree"
			if r.Differs {
				v = "DIFFER"
			}
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", r.SetPoint, r.Match, r.CLRef, r.CLOther, r.DeltaCL, r.U95, r.En, r.DeltaCD, r.U95CD, r.EnCD, v)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		fmt.Fprintf(w, "%s.\n\n", p.Verdict)
	}
	_, err := fmt.Fprintf(w, "verdict: %s.\n", c.Verdict())
	return err
}

// comparer is the run-against-run capability of a dashboard over store
// (dashboard.Config.Compare): the same comparison as `liftyard compare`.
func comparer(store *storage.Store) func(ids []uint64) (*report.Comparison, error) {
	return func(ids []uint64) (*report.Comparison, error) {
		return report.BuildComparison(store, ids, report.Options{Version: version})
	}
}
