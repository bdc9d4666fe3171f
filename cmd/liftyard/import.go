package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"liftyard/acquire"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/report"
	"liftyard/rig"
	"liftyard/storage"
)

// checkRawCSV reads the whole file once before a run is made, so that a bad
// file is refused (exit 2, with its line) and leaves no half-made run. It
// returns the channels of the header. Its progress ("import: check") goes
// to stderr unless quiet.
func checkRawCSV(path, source string, r *rig.Rig, start time.Time, stderr io.Writer, quiet bool) (channels []string, samples int, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, 0, usagef("raw CSV: %v", err)
	}
	defer f.Close()
	var size int64
	if fi, err := f.Stat(); err == nil {
		size = fi.Size()
	}
	prog := newProgress(stderr, quiet, "import: check", unitBytes, size)
	info, err := acquire.CheckRawCSV(prog.reader(f), filepath.Base(path), start)
	prog.finish()
	if err != nil {
		return nil, 0, usagef("%v", err)
	}
	channels, samples = info.Channels, info.Rows
	defer func() {
		if err == nil && info.Relative {
			// Relative t_s with no start: the run would be dated 1970.
			err = usagef("%s: t_s starts at %.3f s, a relative time (not Unix time): give the UTC time of the first row with --start 2026-03-14T09:00:00Z, or a first line \"# start 2026-03-14T09:00:00Z\" in the file",
				filepath.Base(path), float64(info.FirstUs)/1e6)
		}
	}()
	// A multi-source export names its columns source/channel
	// (docs/export.md): each source must be one of the rig's.
	plain := make([]string, len(channels))
	for i, c := range channels {
		plain[i] = c
		if src, ch, ok := acquire.SplitColumn(c); ok {
			if !slices.ContainsFunc(r.Sources, func(s rig.Source) bool { return s.Name == src }) {
				return nil, 0, usagef("raw CSV %s: column %q names source %q, which is not a [[source]] of rig %q (its sources: %s)",
					path, c, src, r.Name, strings.Join(sourceNames(r), ", "))
			}
			plain[i] = ch
		}
	}
	var known []string
	for _, c := range plain {
		if _, ok := r.Channel(c); ok {
			known = append(known, c)
		}
	}
	if len(known) == 0 {
		return nil, 0, usagef("raw CSV %s: none of its channels (%s) is a channel of rig %q", path, strings.Join(channels, ", "), r.Name)
	}
	for _, c := range r.Lift.Normal {
		if !containsString(plain, c) {
			return nil, 0, usagef("raw CSV %s has no column for the normal-force channel %q of rig %q", path, c, r.Name)
		}
	}
	return channels, samples, nil
}

// sourceNames lists the names of r's sources.
func sourceNames(r *rig.Rig) []string {
	names := make([]string, len(r.Sources))
	for i, s := range r.Sources {
		names[i] = s.Name
	}
	return names
}

// fileSources reads the header of a raw CSV and returns the source of its
// first column when its columns are named source/channel (a multi-source
// export, docs/export.md), else "".
func fileSources(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", usagef("raw CSV: %v", err)
	}
	defer f.Close()
	br := bufio.NewReader(f)
	line, err := br.ReadString('\n')
	if strings.HasPrefix(line, "#") { // the "# start" line
		line, err = br.ReadString('\n')
	}
	if err != nil && err != io.EOF {
		return "", usagef("raw CSV: %v", err)
	}
	cols := strings.Split(strings.TrimRight(line, "\r\n"), ",")
	for _, c := range cols[min(1, len(cols)):] {
		if src, _, ok := acquire.SplitColumn(strings.Trim(strings.TrimSpace(c), `"`)); ok {
			return src, nil
		}
	}
	return "", nil
}

func containsString(xs []string, s string) bool {
	for _, x := range xs {
		if x == s {
			return true
		}
	}
	return false
}

// runImport is `liftyard import --rig RIG.toml --db FILE RAW.csv`.
func runImport(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("import", "--rig RIG.toml --db FILE [--source NAME] [--start TIME] RAW.csv",
		"ingest a raw CSV recorded elsewhere as a new run, processed exactly as a live run", stdout)
	rigPath := fs.String("rig", "", "rig file (TOML) of the rig that made the record")
	db := fs.String("db", "liftyard.db", "bbolt store file")
	source := fs.String("source", "", "rig source the file comes from (default: the rig's first [[source]])")
	blockN := fs.Int("block-samples", acquire.DefaultRawCSVBlock, "rows of the file per acquisition block")
	var block time.Duration
	fs.Func("block", "roof rigs: length of one result block, e.g. 10m (default: the rig's [wind] block, else 10m); a whole number is the old meaning, --block-samples", func(v string) error {
		if n, err := strconv.Atoi(v); err == nil {
			*blockN = n // before the result block had this flag: samples per block
			fmt.Fprintf(stderr, "liftyard import: --block %d means --block-samples %d (a duration such as 10m sets a roof's result block)\n", n, n)
			return nil
		}
		d, err := time.ParseDuration(v)
		if err != nil || d <= 0 {
			return fmt.Errorf("%q: a positive duration such as 10m (or --block-samples N)", v)
		}
		block = d
		return nil
	})
	startS := fs.String("start", "", "UTC time of the file's first row, RFC 3339 (e.g. 2026-03-14T09:00:00Z); needed when t_s is relative and the file has no \"# start\" line")
	verbose := fs.Bool("v", false, "log the run's events to stderr")
	quiet := quietFlag(fs)
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if *rigPath == "" {
		return usagef("--rig is required")
	}
	if len(pos) != 1 {
		return usagef("give exactly one raw CSV file (got %d)", len(pos))
	}
	if *blockN <= 0 {
		return usagef("--block-samples %d: want a positive number of rows", *blockN)
	}
	r, data, err := readRig(*rigPath)
	if err != nil {
		return err
	}
	if block > 0 && r.Kind != rig.KindRoof {
		return usagef("--block %s: a result block length is for roof rigs only (rig %q is a %s); --block-samples sets rows per acquisition block", block, r.Name, r.Kind)
	}
	name := *source
	names := sourceNames(r)
	fileSrc, err := fileSources(pos[0])
	if err != nil {
		return err
	}
	switch {
	case name == "" && fileSrc != "":
		name = fileSrc // the columns say where they belong
	case name == "" && len(r.Sources) == 0:
		return usagef("rig %q declares no [[source]]: give --source NAME", r.Name)
	case name == "":
		name = r.Sources[0].Name
	case !slices.Contains(names, name):
		return usagef("--source %q is not a [[source]] of rig %q (its sources: %s)", name, r.Name, strings.Join(names, ", "))
	}
	var start time.Time
	if *startS != "" {
		if start, err = time.Parse(time.RFC3339Nano, *startS); err != nil {
			return usagef("--start %q: want an RFC 3339 time such as 2026-03-14T09:00:00Z", *startS)
		}
		start = start.UTC()
	}
	// The check pass reads the whole file before a run is made, so that a
	// bad file leaves no run; meanwhile the import parses ahead on the
	// other core (prefetch), and nothing is stored before the check passed.
	src := &acquire.CSVFile{Path: pos[0], Source: name, BlockN: *blockN, Start: start}
	ahead := newPrefetch(ctx, acquire.SplitReplayer{R: src}, prefetchBytes)
	channels, samples, err := checkRawCSV(pos[0], name, r, start, stderr, *quiet)
	if err != nil {
		ahead.stop()
		return err
	}
	store, err := storage.Open(*db, storage.Options{})
	if err != nil {
		ahead.stop()
		return err
	}
	defer store.Close()
	prog := newProgress(stderr, *quiet, "import", "rows", int64(samples))
	id, fin, err := recordOffline(ctx, store, r, string(data), fmt.Sprintf("imported from %s", filepath.Base(pos[0])),
		prog.replayer(ahead), &src.Health, name, newLogger(stderr, *verbose), block)
	prog.finish()
	if err != nil {
		return err
	}
	fmt.Fprintf(stderr, "liftyard import: %d sample times of %d channels (%s) from %s as run %d in %s\n",
		samples, len(channels), strings.Join(channels, ", "), pos[0], id, *db)
	printDrift(stderr, r, fin)
	if err := printSummary(stderr, store, id, r); err != nil {
		return err
	}
	fmt.Fprintln(stdout, id)
	return nil
}

// errStopped ends an offline run that was stopped before its data ended.
var errStopped = errors.New("stopped before the end of the data; the run is stored as interrupted")

// recordOffline makes a new run in store from a source that is not live (a
// file, a stored run): every block goes through the one pipeline
// (process.Replay) and waits for the store rather than being dropped.
// Nothing is published to a site broker: the results were not made live.
// h counts what src handed over, as source name in the run's health.
func recordOffline(ctx context.Context, store *storage.Store, r *rig.Rig, rigTOML, note string,
	src acquire.Replayer, h *acquire.Health, name string, log *slog.Logger, block time.Duration) (uint64, process.Finished, error) {
	rc := *r
	rc.Publish = nil
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: &rc, RigTOML: rigTOML, Note: note, Offline: true, Logger: log,
		Pipeline: process.Options{Roof: estimate.RoofConfig{Block: block}}})
	if err != nil {
		return 0, process.Finished{}, err
	}
	_, err = process.ReplayStaged(ctx, src, rec.Pipeline(), rec.Keep)
	if err != nil && ctx.Err() != nil {
		err = errStopped
	}
	fin, ferr := rec.Finish(ctx, err, []acquire.HealthSnapshot{h.Snapshot(name)})
	return rec.RunID(), fin, errors.Join(err, ferr)
}

// printSummary prints what a test engineer looks at first after a run is
// processed: the lift curve (FitPolar) and the verdict against the design.
func printSummary(w io.Writer, store *storage.Store, runID uint64, r *rig.Rig) error {
	segs, err := store.Segments(runID)
	if err != nil {
		return err
	}
	if r.Kind == rig.KindRoof {
		printRoofSummary(w, segs)
		return nil
	}
	fmt.Fprintf(w, "  %d steady segments\n", len(segs))
	if r.Kind == rig.KindRotor {
		printRotorSummary(w, segs, r)
		return nil
	}
	var fit *estimate.Polar
	if p, err := estimate.FitPolar(segs, estimate.PolarOptions{}); err == nil {
		fit = &p
		fmt.Fprintf(w, "  %d points at %d angles in %d sweeps\n", p.Points, p.Angles, p.Sweeps)
		fmt.Fprintf(w, "  lift slope %.4f ± %.4f /rad (%.5f /deg), zero-lift angle %.2f ± %.2f° (95 %%), linear %.1f° to %.1f°\n",
			p.SlopePerRad.X, p.SlopePerRad.U95(), p.SlopePerDeg(), rig.Deg(p.AlphaZeroRad.X), rig.Deg(p.AlphaZeroRad.U95()),
			rig.Deg(p.LinearMinRad), rig.Deg(p.LinearMaxRad))
		if p.Stalled {
			fmt.Fprintf(w, "  stall at %.1f°, C_L,max %.3f ± %.3f (95 %%)\n", rig.Deg(p.StallRad), p.CLMax.X, p.CLMax.U95())
		}
		if h, ok := p.MaxHysteresis(); ok {
			fmt.Fprintf(w, "  %s\n", h.Describe())
		}
		for _, warn := range p.Warnings {
			fmt.Fprintf(w, "  note: %s\n", warn)
		}
	} else {
		fmt.Fprintf(w, "  no lift-curve fit: %v\n", err)
	}
	d, err := process.LoadDesign(r)
	if err != nil || d == nil {
		return nil
	}
	c := estimate.Compare(segs, d, fit)
	fmt.Fprintf(w, "  design (%s): %s\n", c.Design, c.Verdict)
	for _, reason := range c.Reasons {
		fmt.Fprintf(w, "    %s\n", reason)
	}
	return nil
}

// printRotorSummary is printSummary for a rotor: each segment's spin
// ratio and C_L, the fitted C_L(S) and the design against the spin ratio
// (never the foil's lift-curve lines).
func printRotorSummary(w io.Writer, segs []estimate.Segment, r *rig.Rig) {
	for _, s := range segs {
		line := fmt.Sprintf("  #%d  S %.3f ± %.3f  C_L %.3f ± %.3f  C_D %.3f ± %.3f", s.Index,
			s.SpinRatio, s.SpinRatioValue().U95(), s.CL.X, s.CL.U95(), s.CD.X, s.CD.U95())
		if agrees, ok := estimate.Agrees(s.En); ok {
			verdict := "agrees"
			if !agrees {
				verdict = "disagrees"
			}
			line += fmt.Sprintf("  design %.3f, En %.2f (%s)", s.DesignCL.X, s.En, verdict)
		}
		fmt.Fprintln(w, line)
	}
	if c, err := estimate.FitSpinCurve(segs); err == nil {
		fmt.Fprintf(w, "  C_L(S): %s\n", c.Describe())
	} else {
		fmt.Fprintf(w, "  no C_L(S) curve: %v\n", err)
	}
	if d, err := process.LoadSpinDesign(r); err == nil && d != nil {
		fmt.Fprintf(w, "  design: %s, compared at each segment's spin ratio\n", d.Describe())
	}
}

// printRoofSummary is printSummary for a roof: each block's zones with the
// net Cp mean ± U95 on the block's mean q, the block peak suction and the
// wind direction, then the samples that fell in no block.
func printRoofSummary(w io.Writer, segs []estimate.Segment) {
	blocks, unblocked := map[int]bool{}, 0
	for _, s := range segs {
		if s.Zone != "" {
			blocks[s.Block] = true
		}
		unblocked += s.SamplesUnblocked
	}
	fmt.Fprintf(w, "  %d blocks\n", len(blocks))
	for _, s := range segs {
		if s.Zone == "" || s.Tap != "" {
			continue // per-tap rows are in the export
		}
		dir := ""
		if !math.IsNaN(s.DirectionRad) && s.DirectionRad != 0 {
			dir = fmt.Sprintf(", wind from %.0f°", rig.Deg(s.DirectionRad))
		}
		fmt.Fprintf(w, "  block %d %-8s net Cp %s, block peak %s (q at %s%s)\n", s.Block, s.Zone,
			report.PlusMinus(s.CpMean.X, s.CpMean.U95(), 2), report.PlusMinus(s.CpPeak, 2*s.CpPeakU, 2), orMast(s.QAt), dir)
	}
	if unblocked > 0 {
		fmt.Fprintf(w, "  %d samples fell in no block (short or unusable stretches)\n", unblocked)
	}
	fmt.Fprintln(w, "  Test data, not a design approval: wind loads on a structure follow the local code and a licensed engineer.")
}

func orMast(at string) string {
	if at == "" {
		return "mast"
	}
	return at
}
