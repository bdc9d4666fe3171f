package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

const calibrateUsage = "--channel NAME (--points FILE.csv | --interactive --rig RIG.toml --steps LIST) [--order N] [--db FILE] [--json] " +
	"[--unit U] [--who NAME] [--reference TEXT] [--reference-u U] [--valid-days N]"

const calibrateSummary = "fit, store and print a channel calibration (from a points file, or live at the rig)"

// defaultValidDays is how long a new calibration is valid unless --valid-days
// says otherwise: a yearly re-calibration of load cells and pressure
// transducers is common practice.
const defaultValidDays = 365

// captureGrace is how long a capture waits after its averaging window for
// the last block of the window to arrive (blocks come in bursts).
const captureGrace = time.Second

// runCalibrate is the calibrate verb with the process's standard input.
func runCalibrate(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	return calibrateMain(ctx, args, os.Stdin, stdout, stderr)
}

// calOptions are the calibrate flags.
type calOptions struct {
	channel, points, db, unit, who, reference, note string
	rigPath, steps, stepsFile                       string
	interactive, asJSON, verbose                    bool
	order, validDays                                int
	referenceU                                      float64
	settle, average                                 time.Duration
}

// calibrateMain is `liftyard calibrate`; stdin feeds the interactive prompts.
func calibrateMain(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := newFlags("calibrate", calibrateUsage, calibrateSummary, stdout)
	var o calOptions
	fs.StringVar(&o.channel, "channel", "", "channel to calibrate (its name in the rig file)")
	fs.StringVar(&o.points, "points", "", "points file: CSV with header applied,reading[,direction]")
	fs.BoolVar(&o.interactive, "interactive", false, "capture the points live from the rig's source (needs --rig and --steps or --steps-file)")
	fs.IntVar(&o.order, "order", 1, "polynomial order of the fit, 1 to 3")
	fs.StringVar(&o.db, "db", "liftyard.db", "bbolt store file (created when missing)")
	fs.BoolVar(&o.asJSON, "json", false, "print the result as JSON")
	fs.StringVar(&o.unit, "unit", "", "unit of the applied values (N, kgf, Pa, ...); default: the channel's unit from --rig")
	fs.StringVar(&o.who, "who", "", "who made the calibration")
	fs.StringVar(&o.reference, "reference", "", "the reference standard, e.g. \"M1 dead weights, cert. 4711\"")
	fs.Float64Var(&o.referenceU, "reference-u", 0, "standard uncertainty of the applied values, in the unit of --unit")
	fs.IntVar(&o.validDays, "valid-days", defaultValidDays, "days the calibration stays valid (0: no expiry)")
	fs.StringVar(&o.note, "note", "", "free text stored with the calibration")
	fs.StringVar(&o.rigPath, "rig", "", "rig file (interactive: the channel's source; also gives the default --unit)")
	fs.StringVar(&o.steps, "steps", "", "interactive: applied values in order, e.g. \"0,50,100,150,100,50,0\"")
	fs.StringVar(&o.stepsFile, "steps-file", "", "interactive: file of applied values, one or more per line (# comments)")
	fs.DurationVar(&o.settle, "settle", 2*time.Second, "interactive: wait this long after Enter before averaging")
	fs.DurationVar(&o.average, "average", 3*time.Second, "interactive: average the raw reading over this long")
	fs.BoolVar(&o.verbose, "v", false, "log source progress to stderr")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard calibrate --help)", pos[0])
	}
	if err := o.check(); err != nil {
		return err
	}

	var r *rig.Rig
	if o.rigPath != "" {
		var err error
		if r, _, err = readRig(o.rigPath); err != nil {
			return err
		}
		ch, ok := r.Channel(o.channel)
		if !ok {
			return usagef("channel %q is not in %s (its channels: %s)", o.channel, o.rigPath, channelNames(r))
		}
		if o.unit == "" {
			o.unit = ch.Unit
		} else if _, err := rig.UnitToSI(ch.Quantity, o.unit); err != nil {
			return usagef("--unit %q does not fit channel %q (%s): %v", o.unit, o.channel, ch.Quantity, err)
		}
	}

	var pts []calibrate.Point
	if o.interactive {
		if pts, err = capturePoints(ctx, o, r, stdin, stdout, stderr); err != nil {
			return err
		}
	} else if pts, err = readPointsFile(o.points); err != nil {
		return err
	}

	fit, err := calibrate.FitPoly(pts, o.order)
	if err != nil {
		if errors.Is(err, calibrate.ErrPoints) {
			return usagef("%v", err)
		}
		return err
	}
	store, err := storage.Open(o.db, storage.Options{})
	if err != nil {
		return err
	}
	defer store.Close()
	rec := calibrate.Record{
		Channel: o.channel, Unit: o.unit, Created: time.Now().UTC(), Who: o.who, Reference: o.reference,
		ReferenceU: o.referenceU, Note: o.note, Points: pts, Fit: fit,
	}
	if o.validDays > 0 {
		rec.ValidUntil = rec.Created.AddDate(0, 0, o.validDays)
	}
	if rec.ID, err = store.PutCalibration(rec); err != nil {
		if errors.Is(err, storage.ErrBadRecord) {
			return usagef("%v", err)
		}
		return err
	}
	if err := store.Close(); err != nil {
		return err
	}
	if o.asJSON {
		return writeCalJSON(stdout, rec, o.db)
	}
	writeCalSummary(stdout, rec, o.db)
	return nil
}

// check refuses contradictory or missing flags (exit status 2).
func (o *calOptions) check() error {
	switch {
	case o.channel == "":
		return usagef("--channel is required")
	case o.points == "" && !o.interactive:
		return usagef("give --points FILE.csv, or --interactive to capture the points at the rig")
	case o.points != "" && o.interactive:
		return usagef("give either --points or --interactive, not both")
	case o.order < calibrate.MinOrder || o.order > calibrate.MaxOrder:
		return usagef("--order %d: use %d to %d", o.order, calibrate.MinOrder, calibrate.MaxOrder)
	case math.IsNaN(o.referenceU) || math.IsInf(o.referenceU, 0) || o.referenceU < 0:
		return usagef("--reference-u must be a standard uncertainty ≥ 0, not %v", o.referenceU)
	case o.validDays < 0:
		return usagef("--valid-days must be ≥ 0 (0: no expiry)")
	}
	if o.interactive {
		switch {
		case o.rigPath == "":
			return usagef("--interactive needs --rig RIG.toml (the source that reads the channel)")
		case o.steps == "" && o.stepsFile == "":
			return usagef("--interactive needs --steps \"0,50,100,50,0\" or --steps-file FILE")
		case o.steps != "" && o.stepsFile != "":
			return usagef("give either --steps or --steps-file, not both")
		case o.settle < 0 || o.average <= 0:
			return usagef("--settle must be ≥ 0 and --average > 0")
		}
	}
	return nil
}

func channelNames(r *rig.Rig) string {
	names := make([]string, len(r.Channels))
	for i, c := range r.Channels {
		names[i] = c.Name
	}
	return strings.Join(names, ", ")
}

// readPointsFile reads a points file; every problem is bad input (exit 2).
func readPointsFile(path string) ([]calibrate.Point, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, usagef("points file: %v", err)
	}
	defer f.Close()
	pts, err := calibrate.ReadPoints(f)
	if err != nil {
		var pe *rig.Error
		if errors.As(err, &pe) {
			pe.File = path
			return nil, usagef("%v", pe)
		}
		return nil, fmt.Errorf("points file %s: %w", path, err)
	}
	return pts, nil
}

// jnum is liftyard's one NaN-safe JSON number (estimate.Num): full
// precision (strconv 'g', -1), null for NaN.
type jnum = estimate.Num

func jnums(v []float64) []jnum {
	out := make([]jnum, len(v))
	for i, f := range v {
		out[i] = jnum(f)
	}
	return out
}

// calJSON is the --json output. The first seven fields are the docs/design.md §3.1
// contract; the rest are extras for scripts.
type calJSON struct {
	ID                string   `json:"id"`
	Channel           string   `json:"channel"`
	Poly              []jnum   `json:"poly"`
	PolyU             []jnum   `json:"poly_u"`
	ResidualSD        jnum     `json:"residual_sd"`
	NonlinearityPctFS jnum     `json:"nonlinearity_pct_fs"`
	HysteresisPctFS   jnum     `json:"hysteresis_pct_fs"`
	Unit              string   `json:"unit"`
	Order             int      `json:"order"`
	Dof               int      `json:"dof"`
	Points            int      `json:"points"`
	ReferenceU        jnum     `json:"reference_u"`
	ValueUMax         jnum     `json:"value_u_max"` // largest standard uncertainty of a calibrated value over the calibrated range, in unit
	Created           string   `json:"created"`
	ValidUntil        string   `json:"valid_until,omitempty"`
	Warnings          []string `json:"warnings"`
	DB                string   `json:"db"`
}

func writeCalJSON(w io.Writer, rec calibrate.Record, db string) error {
	out := calJSON{
		ID: rec.ID, Channel: rec.Channel, Poly: jnums(rec.Fit.Poly), PolyU: jnums(rec.Fit.PolyU),
		ResidualSD: jnum(rec.Fit.ResidualSD), NonlinearityPctFS: jnum(rec.Fit.NonlinearityPctFS),
		HysteresisPctFS: jnum(rec.Fit.HysteresisPctFS), Unit: rec.Unit, Order: rec.Fit.Order, Dof: rec.Fit.Dof,
		Points: len(rec.Points), ReferenceU: jnum(rec.ReferenceU), ValueUMax: jnum(largestU(rec).U),
		Created: rec.Created.Format(time.RFC3339), Warnings: rec.Fit.Warnings, DB: db,
	}
	if !rec.ValidUntil.IsZero() {
		out.ValidUntil = rec.ValidUntil.Format(time.RFC3339)
	}
	if out.Warnings == nil {
		out.Warnings = []string{}
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(out)
}

// largestU returns the calibrated value with the largest standard
// uncertainty over the calibrated range (the points' readings and 64 steps
// between the lowest and highest), the u a recording uses for the channel.
func largestU(rec calibrate.Record) calibrate.Value {
	var worst calibrate.Value
	lo, hi := math.Inf(1), math.Inf(-1)
	try := func(x float64) {
		if v := rec.Apply(x); v.U > worst.U {
			worst = v
		}
	}
	for _, p := range rec.Points {
		try(p.Reading)
		lo, hi = min(lo, p.Reading), max(hi, p.Reading)
	}
	for i := 0; lo < hi && i <= 64; i++ {
		try(lo + (hi-lo)*float64(i)/64)
	}
	return worst
}

func unitOr(u, alt string) string {
	if u == "" {
		return alt
	}
	return u
}

// writeCalSummary prints the calibration for people.
func writeCalSummary(w io.Writer, rec calibrate.Record, db string) {
	f := rec.Fit
	unit := unitOr(rec.Unit, "(unit not stated: pass --unit)")
	up, down := 0, 0
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range rec.Points {
		if p.Direction == calibrate.Down {
			down++
		} else {
			up++
		}
		lo, hi = min(lo, p.Reading), max(hi, p.Reading)
	}
	fmt.Fprintf(w, "Calibration %s of channel %s, stored in %s\n\n", rec.ID, rec.Channel, db)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "  points\t%d (%d loading, %d unloading), readings %s to %s\n", len(rec.Points), up, down, sig(lo, 10), sig(hi, 10))
	fmt.Fprintf(tw, "  fit\tvalue [%s] = %s, order %d, %d degrees of freedom\n", unit, polyTerms(f.Order), f.Order, f.Dof)
	for k, c := range f.Poly {
		u := math.NaN()
		if k < len(f.PolyU) {
			u = f.PolyU[k]
		}
		fmt.Fprintf(tw, "    c%d\t%s\tu(c%d) = %s\n", k, strconv.FormatFloat(c, 'g', 12, 64), k, strconv.FormatFloat(u, 'g', 3, 64))
	}
	fmt.Fprintf(tw, "  residual SD\t%s %s\n", g3(f.ResidualSD), rec.Unit)
	fmt.Fprintf(tw, "  non-linearity\t%s %% FS (loading points against the line through the lowest and highest)\n", fixed(f.NonlinearityPctFS, 4))
	fmt.Fprintf(tw, "  hysteresis\t%s %% FS (largest |unloading − loading| reading at one applied value)\n", fixed(f.HysteresisPctFS, 4))
	lu := largestU(rec)
	fmt.Fprintf(tw, "  u of a value\t%s %s at most over the calibrated range (fit and reference standard u = %s)\n", g3(lu.U), rec.Unit, g3(rec.ReferenceU))
	if rec.Reference != "" {
		fmt.Fprintf(tw, "  reference\t%s\n", rec.Reference)
	}
	if rec.Who != "" {
		fmt.Fprintf(tw, "  by\t%s\n", rec.Who)
	}
	valid := "no expiry"
	if !rec.ValidUntil.IsZero() {
		valid = rec.ValidUntil.Format("2006-01-02")
	}
	fmt.Fprintf(tw, "  valid until\t%s\n", valid)
	tw.Flush()
	if len(f.Warnings) > 0 {
		fmt.Fprintln(w, "\nWarnings:")
		for _, m := range f.Warnings {
			fmt.Fprintf(w, "  - %s\n", m)
		}
	}
	fmt.Fprintln(w)
	writeResiduals(w, rec.Points, f)
	fmt.Fprintf(w, "\nUse it in the rig file:\n\n  [[channel]]\n  name        = %q\n  calibration = { id = %q }\n", rec.Channel, rec.ID)
}

// writeResiduals prints each point with its fitted value and residual, and
// a bar that shows the residual against the largest one.
func writeResiduals(w io.Writer, pts []calibrate.Point, f calibrate.Fit) {
	poly := calibrate.Poly{Coef: f.Poly}
	maxR := 0.0
	for _, p := range pts {
		maxR = max(maxR, math.Abs(p.Applied-poly.Eval(p.Reading)))
	}
	const barWidth = 12
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "  applied\treading\tdir\tfitted\tresidual\t\t")
	for _, p := range pts {
		fit := poly.Eval(p.Reading)
		res := p.Applied - fit
		dir := string(p.Direction)
		if dir == "" {
			dir = "-"
		}
		fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%s\t%s\t\n", g(p.Applied), sig(p.Reading, 10), dir, g6(fit), g3(res), residualBar(res, maxR, barWidth))
	}
	tw.Flush()
}

// residualBar draws res on a scale of ±maxR as a left or right bar around a
// centre mark.
func residualBar(res, maxR float64, width int) string {
	n := 0
	if maxR > 0 {
		n = int(math.Round(math.Abs(res) / maxR * float64(width)))
	}
	left, right := strings.Repeat(" ", width), strings.Repeat(" ", width)
	if res < 0 {
		left = strings.Repeat(" ", width-n) + strings.Repeat("=", n)
	} else {
		right = strings.Repeat("=", n) + strings.Repeat(" ", width-n)
	}
	return left + "|" + right
}

func polyTerms(order int) string {
	terms := []string{"c0", "c1·r", "c2·r²", "c3·r³"}
	return strings.Join(terms[:min(order, 3)+1], " + ") + " (r = raw reading)"
}

// g prints v exactly (shortest round-trip form), without an exponent for
// the readings of a 24-bit ADC and other ordinary magnitudes.
func g(v float64) string {
	if a := math.Abs(v); a == 0 || (a >= 1e-4 && a < 1e15) {
		return strconv.FormatFloat(v, 'f', -1, 64)
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// sig prints v rounded to n significant digits, without an exponent for
// ordinary magnitudes.
func sig(v float64, n int) string {
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', n, 64), 64)
	if err != nil {
		return g(v)
	}
	return g(r)
}

func g3(v float64) string { return strconv.FormatFloat(v, 'g', 3, 64) }
func g6(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }
func fixed(v float64, d int) string {
	return strconv.FormatFloat(v, 'f', d, 64)
}

// ---- interactive capture -------------------------------------------------

// parseSteps reads applied values: numbers separated by commas, spaces or
// new lines; '#' starts a comment to the end of the line.
func parseSteps(text, what string) ([]float64, error) {
	var out []float64
	for ln, line := range strings.Split(text, "\n") {
		if i := strings.IndexByte(line, '#'); i >= 0 {
			line = line[:i]
		}
		for _, f := range strings.FieldsFunc(line, func(r rune) bool { return r == ',' || r == ' ' || r == '\t' || r == '\r' }) {
			v, err := strconv.ParseFloat(f, 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, usagef("%s:%d: step %q is not a finite number", what, ln+1, f)
			}
			out = append(out, v)
		}
	}
	return out, nil
}

// stepDirections gives each step its direction: up while the applied value
// increases, down while it decreases; a repeated value keeps the direction
// before it, and the first step is up.
func stepDirections(steps []float64) []calibrate.Direction {
	dirs := make([]calibrate.Direction, len(steps))
	d := calibrate.Up
	for i, v := range steps {
		if i > 0 {
			switch {
			case v > steps[i-1]:
				d = calibrate.Up
			case v < steps[i-1]:
				d = calibrate.Down
			}
		}
		dirs[i] = d
	}
	return dirs
}

// feed collects one channel's raw readings from the sources during a
// capture window. add is called by the collector goroutine, the rest by the
// prompt loop.
type feed struct {
	channel string

	mu       sync.Mutex
	from, to time.Time // capture window on the host clock; zero: not capturing
	vals     []float64
	last     time.Time // receive time of the latest block
	samples  uint64    // readings of the channel seen in all
}

func (f *feed) add(b *acquire.Block) {
	raw := b.Raw(f.channel)
	t := b.Received
	if t.IsZero() {
		t = time.Now()
	}
	f.mu.Lock()
	defer f.mu.Unlock()
	f.last = t
	f.samples += uint64(len(raw))
	if f.from.IsZero() || t.Before(f.from) || t.After(f.to) {
		return
	}
	for _, v := range raw {
		if !math.IsNaN(v) {
			f.vals = append(f.vals, v)
		}
	}
}

func (f *feed) arm(from, to time.Time) {
	f.mu.Lock()
	f.from, f.to, f.vals = from, to, nil
	f.mu.Unlock()
}

// disarm ends the window and returns its readings.
func (f *feed) disarm() []float64 {
	f.mu.Lock()
	defer f.mu.Unlock()
	v := f.vals
	f.from, f.to, f.vals = time.Time{}, time.Time{}, nil
	return v
}

func (f *feed) lastBlock() time.Time {
	f.mu.Lock()
	defer f.mu.Unlock()
	return f.last
}

// sourcesFor returns a copy of r whose sources are only those that may
// carry the channel: a serial source that lists it, and every MQTT or
// simulated source (their channels are known only from the data).
func sourcesFor(r *rig.Rig, channel string) *rig.Rig {
	c := *r
	c.Sources = nil
	for _, s := range r.Sources {
		if chans, listed := s.Carried(); listed && !slices.Contains(chans, channel) {
			continue
		}
		c.Sources = append(c.Sources, s)
	}
	return &c
}

// capturePoints runs the rig's sources for the channel and, for each step,
// prompts for the load, waits --settle, averages the raw reading over
// --average and shows the growing fit.
func capturePoints(ctx context.Context, o calOptions, r *rig.Rig, stdin io.Reader, stdout, stderr io.Writer) ([]calibrate.Point, error) {
	var steps []float64
	var err error
	if o.stepsFile != "" {
		data, rerr := os.ReadFile(o.stepsFile)
		if rerr != nil {
			return nil, usagef("steps file: %v", rerr)
		}
		steps, err = parseSteps(string(data), o.stepsFile)
	} else {
		steps, err = parseSteps(o.steps, "--steps")
	}
	if err != nil {
		return nil, err
	}
	if need := o.order + 2; len(steps) < need {
		return nil, usagef("%d steps: an order-%d fit needs at least %d points (and more to show its residuals)", len(steps), o.order, need)
	}
	sub := sourcesFor(r, o.channel)
	if len(sub.Sources) == 0 {
		return nil, usagef("no [[source]] in %s reads channel %q (its sources: %s): add it to the channels of one", o.rigPath, o.channel, describeSources(r))
	}
	log := newLogger(stderr, o.verbose)
	fluid, err := estimate.Properties(r.Fluid, r.Conditions)
	if err != nil {
		return nil, err
	}
	onEvent := func(ev acquire.Event) { log.Warn(ev.Message, "source", ev.Source, "event", ev.Kind) }
	srcs, err := buildSources(sub, log, fluid.RhoKgPerM3, onEvent)
	if err != nil {
		return nil, err
	}

	ctx, cancel := context.WithCancelCause(ctx)
	defer cancel(nil)
	raw := make(chan acquire.Block, rawQueue)
	var wg sync.WaitGroup
	for _, s := range srcs {
		wg.Go(func() {
			if err := s.Src.Run(ctx, raw); err != nil {
				cancel(fmt.Errorf("source %q: %w", s.Name, err))
			}
		})
	}
	fd := &feed{channel: o.channel}
	collected := make(chan struct{})
	go func() {
		defer close(collected)
		for b := range raw {
			fd.add(&b)
		}
	}()
	defer func() {
		cancel(nil)
		wg.Wait()
		close(raw)
		<-collected
	}()

	unit := unitOr(o.unit, "(in the calibration's unit)")
	dirs := stepDirections(steps)
	in := bufio.NewReader(stdin)
	fmt.Fprintf(stdout, "Calibrating channel %s: %d steps; after Enter, %s to settle and %s of averaging. Type q and Enter to stop.\n",
		o.channel, len(steps), o.settle, o.average)
	var pts []calibrate.Point
	for i := 0; i < len(steps); {
		what := "load"
		if dirs[i] == calibrate.Down {
			what = "unload"
		}
		fmt.Fprintf(stdout, "\n[%d/%d] apply %s %s (%s), then press Enter\n", i+1, len(steps), g(steps[i]), unit, what)
		line, rerr := in.ReadString('\n')
		if strings.EqualFold(strings.TrimSpace(line), "q") {
			return nil, fmt.Errorf("stopped at step %d of %d: nothing stored", i+1, len(steps))
		}
		if rerr != nil {
			return nil, fmt.Errorf("input ended at step %d of %d (%d points captured): nothing stored", i+1, len(steps), len(pts))
		}
		vals, err := capture(ctx, fd, o.settle, o.average)
		if err != nil {
			return nil, err
		}
		if len(vals) == 0 {
			fmt.Fprintf(stdout, "  no reading of %s in %s: check that the source is connected and sends this channel, then press Enter to try again\n", o.channel, o.average)
			continue
		}
		mean, sd := meanSD(vals)
		p := calibrate.Point{Applied: steps[i], Reading: mean, Direction: dirs[i]}
		pts = append(pts, p)
		fmt.Fprintf(stdout, "  captured: reading %s (SD %s of %d readings, SD of the mean %s)\n", g6(mean), g3(sd), len(vals), g3(sd/math.Sqrt(float64(len(vals)))))
		showGrowingFit(stdout, pts, o.order)
		i++
	}
	return pts, nil
}

// capture waits settle, then collects readings for average, and returns
// them once a block received after the window has arrived (or captureGrace
// has passed).
func capture(ctx context.Context, fd *feed, settle, average time.Duration) ([]float64, error) {
	from := time.Now().Add(settle)
	to := from.Add(average)
	fd.arm(from, to)
	tick := time.NewTicker(20 * time.Millisecond)
	defer tick.Stop()
	for {
		select {
		case <-ctx.Done():
			fd.disarm()
			if err := context.Cause(ctx); err != nil && !errors.Is(err, context.Canceled) {
				return nil, err
			}
			return nil, errors.New("stopped: nothing stored")
		case now := <-tick.C:
			if fd.lastBlock().After(to) || now.After(to.Add(captureGrace)) {
				return fd.disarm(), nil
			}
		}
	}
}

// meanSD returns the mean and the sample standard deviation.
func meanSD(v []float64) (mean, sd float64) {
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	if len(v) < 2 {
		return mean, 0
	}
	var ss float64
	for _, x := range v {
		ss += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(ss / float64(len(v)-1))
}

// showGrowingFit prints the fit of the points so far and its residuals:
// the two-point sensitivity after the second point, then a fit of order
// min(order, points − 2) from the third.
func showGrowingFit(w io.Writer, pts []calibrate.Point, order int) {
	n := len(pts)
	switch {
	case n < 2:
		return
	case n == 2:
		dr := pts[1].Reading - pts[0].Reading
		if dr == 0 {
			fmt.Fprintln(w, "  the reading did not change between the first two points: is the load on the right channel?")
			return
		}
		fmt.Fprintf(w, "  sensitivity so far: %s per unit of reading\n", g6((pts[1].Applied-pts[0].Applied)/dr))
		return
	}
	k := min(order, n-2)
	f, err := calibrate.FitPoly(pts, k)
	if err != nil {
		fmt.Fprintf(w, "  no fit yet: %v\n", err)
		return
	}
	coef := make([]string, len(f.Poly))
	for i, c := range f.Poly {
		coef[i] = g6(c)
	}
	fmt.Fprintf(w, "  fit so far (order %d, %d points): poly = [%s], residual SD %s\n", k, n, strings.Join(coef, ", "), g3(f.ResidualSD))
	writeResiduals(w, pts, f)
}
