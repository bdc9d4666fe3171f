package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"strings"

	"liftyard/acquire"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// estimatorConfig is the estimator set-up that every path shares (live
// recording, import, reprocess, the zero-drift recomputation): the rig's
// design curve, loaded here because estimate does no I/O.
func estimatorConfig(r *rig.Rig) (estimate.Config, error) {
	d, err := loadDesign(r)
	if err != nil {
		return estimate.Config{}, err
	}
	return estimate.Config{Design: d}, nil
}

// loadDesign returns the design lift curve the rig asks for in [lift]
// design: "thin-airfoil" (2π/rad with the span correction on the rig's
// aspect ratio, α_L0 = 0), a design-curve CSV (rig.Parse has resolved a
// relative path against the rig file's folder), or nil.
func loadDesign(r *rig.Rig) (estimate.Design, error) {
	switch d := r.Lift.Design; d {
	case "":
		return nil, nil
	case rig.DesignThinAirfoil:
		return estimate.ThinAirfoil{AspectRatio: r.Reference.AspectRatio()}, nil
	default:
		f, err := os.Open(d)
		if err != nil {
			return nil, usagef("[lift] design: %v", err)
		}
		defer f.Close()
		c, err := estimate.ParseDesignCurve(f, d)
		if err != nil {
			return nil, usagef("[lift] design: %v", err)
		}
		return c, nil
	}
}

// csvSource replays a raw CSV file (DESIGN §3.3) as one source of the rig:
// an acquire.Source that is not live. It waits for the recorder instead of
// dropping (nothing is lost by waiting for a file) and returns nil at the
// end of the file, which ends the recording.
type csvSource struct {
	path, source string
	blockN       int
	health       *acquire.Health
}

// Run implements acquire.Source.
func (s *csvSource) Run(ctx context.Context, out chan<- acquire.Block) error {
	f, err := os.Open(s.path)
	if err != nil {
		return err
	}
	defer f.Close()
	err = acquire.ReadRawCSV(f, s.source, s.blockN, func(b acquire.Block) error {
		select {
		case out <- b:
			s.health.Frames.Add(1)
			s.health.Samples.Add(uint64(b.Len()))
			return nil
		case <-ctx.Done():
			return ctx.Err()
		}
	})
	if errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
		return nil
	}
	return err
}

// checkRawCSV reads the whole file once before a run is made, so that a bad
// file is refused (exit 2, with its line) and leaves no half-made run. It
// returns the channels of the header.
func checkRawCSV(path, source string, r *rig.Rig) (channels []string, samples int, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, 0, usagef("raw CSV: %v", err)
	}
	defer f.Close()
	err = acquire.ReadRawCSV(f, filepath.Base(path), 0, func(b acquire.Block) error {
		if channels == nil {
			for _, s := range b.Series {
				channels = append(channels, s.Channel)
			}
		}
		samples += b.Len()
		return nil
	})
	if err != nil {
		return nil, 0, usagef("%v", err)
	}
	var known []string
	for _, c := range channels {
		if _, ok := r.Channel(c); ok {
			known = append(known, c)
		}
	}
	if len(known) == 0 {
		return nil, 0, usagef("raw CSV %s: none of its channels (%s) is a channel of rig %q", path, strings.Join(channels, ", "), r.Name)
	}
	for _, c := range r.Lift.Normal {
		if !containsString(channels, c) {
			return nil, 0, usagef("raw CSV %s has no column for the normal-force channel %q of rig %q", path, c, r.Name)
		}
	}
	return channels, samples, nil
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
	fs := newFlags("import", "--rig RIG.toml --db FILE [--source NAME] RAW.csv",
		"ingest a raw CSV recorded elsewhere as a new run, processed exactly as a live run", stdout)
	rigPath := fs.String("rig", "", "rig file (TOML) of the rig that made the record")
	db := fs.String("db", "liftyard.db", "bbolt store file")
	source := fs.String("source", "", "rig source the file comes from (default: the rig's first [[source]])")
	blockN := fs.Int("block", acquire.DefaultRawCSVBlock, "samples per block")
	verbose := fs.Bool("v", false, "log progress to stderr")
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
		return usagef("--block %d: want a positive number of samples", *blockN)
	}
	data, err := os.ReadFile(*rigPath)
	if err != nil {
		return usagef("read rig file: %v", err)
	}
	r, err := rig.Parse(*rigPath, data)
	if err != nil {
		return err
	}
	name := *source
	if name == "" {
		if len(r.Sources) == 0 {
			return usagef("rig %q declares no [[source]]: give --source NAME", r.Name)
		}
		name = r.Sources[0].Name
	}
	channels, samples, err := checkRawCSV(pos[0], name, r)
	if err != nil {
		return err
	}
	m := offlineMain(r, string(data), *db, fmt.Sprintf("imported from %s", filepath.Base(pos[0])), newLogger(stderr, *verbose))
	src := &csvSource{path: pos[0], source: name, blockN: *blockN, health: &acquire.Health{}}
	m.Sources = []Source{{Name: name, Src: src, Health: src.health}}
	if err := m.Run(ctx); err != nil {
		return err
	}
	fmt.Fprintf(stderr, "liftyard import: %d sample times of %d channels (%s) from %s as run %d in %s\n",
		samples, len(channels), strings.Join(channels, ", "), pos[0], m.RunID(), *db)
	printDrift(stderr, m)
	if err := printSummary(stderr, *db, nil, m.RunID(), m.Rig); err != nil {
		return err
	}
	fmt.Fprintln(stdout, m.RunID())
	return nil
}

// offlineMain sets up Main for a source that is not live (import,
// reprocess): blocks wait for the store instead of being dropped, the
// dashboard listens on a free loopback port only, and nothing is published
// to a site broker (the results were not made live).
func offlineMain(r *rig.Rig, rigTOML, db, note string, log *slog.Logger) *Main {
	rc := *r
	rc.Publish = nil
	return &Main{Rig: &rc, RigTOML: rigTOML, DBPath: db, Addr: "127.0.0.1:0", Logger: log, Replay: true, Note: note}
}

// printSummary prints what a test engineer looks at first after a run is
// processed: the lift curve (FitPolar) and the verdict against the design.
// store may be nil (the file at db is opened read-only).
func printSummary(w io.Writer, db string, store *storage.Store, runID uint64, r *rig.Rig) error {
	if store == nil {
		st, err := storage.Open(db, storage.Options{ReadOnly: true})
		if err != nil {
			return err
		}
		defer st.Close()
		store = st
	}
	segs, err := store.Segments(runID)
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "  %d steady segments\n", len(segs))
	if p, err := estimate.FitPolar(segs, estimate.PolarOptions{}); err == nil {
		fmt.Fprintf(w, "  lift slope %.4f ± %.4f /rad (%.5f /deg), zero-lift angle %.2f ± %.2f° (95 %%), linear %.1f° to %.1f°\n",
			p.SlopePerRad.X, p.SlopePerRad.U95(), p.SlopePerDeg(), rig.Deg(p.AlphaZeroRad.X), rig.Deg(p.AlphaZeroRad.U95()),
			rig.Deg(p.LinearMinRad), rig.Deg(p.LinearMaxRad))
		if p.Stalled {
			fmt.Fprintf(w, "  stall at %.1f°, C_L,max %.3f\n", rig.Deg(p.StallRad), p.CLMax.X)
		}
		for _, warn := range p.Warnings {
			fmt.Fprintf(w, "  note: %s\n", warn)
		}
	} else {
		fmt.Fprintf(w, "  no lift-curve fit: %v\n", err)
	}
	d, err := loadDesign(r)
	if err != nil || d == nil {
		return nil
	}
	c := estimate.Compare(segs, d)
	fmt.Fprintf(w, "  design (%s): %s\n", c.Design, c.Verdict)
	for _, reason := range c.Reasons {
		fmt.Fprintf(w, "    %s\n", reason)
	}
	return nil
}
