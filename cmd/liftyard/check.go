package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"strings"

	"liftyard/acquire/mqtt"
	"liftyard/acquire/serial"
	"liftyard/calibrate"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// runCheck is `liftyard check [--db FILE] RIG.toml`.
func runCheck(_ context.Context, args []string, stdout, _ io.Writer) error {
	fs := newFlags("check", "[--db FILE] RIG.toml", "validate a rig file and list every problem with its line", stdout)
	dbPath := fs.String("db", "", "also look up the rig's stored calibration ids in this database (read only)")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return usagef("want exactly one rig file, got %d arguments", len(pos))
	}
	r, _, err := readRig(pos[0])
	if err != nil {
		return err
	}
	// The design file is read now, for every kind, so a missing file or a
	// header of the wrong kind is found before a run (issue 12).
	if err := process.CheckDesign(r); err != nil {
		return err
	}
	unset, err := checkLinks(r)
	if err != nil {
		return usagef("%s: %v", pos[0], err)
	}
	ids, err := checkStoredCalibrations(r, *dbPath)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "%s: ok: %q, %s in %s; %s, %s", pos[0], r.Name, r.Kind, strings.ReplaceAll(string(r.Fluid), "_", " "),
		count(len(r.Sources), "source"), count(len(r.Channels), "channel"))
	if r.Reference.AreaM2 > 0 {
		fmt.Fprintf(stdout, "; reference area %g m²", r.Reference.AreaM2)
		if r.Reference.AreaKind != "" {
			fmt.Fprintf(stdout, " (%s)", r.Reference.AreaKind)
		}
	}
	fmt.Fprintln(stdout)
	if w := tributaryWarning(r); w != "" {
		fmt.Fprintf(stdout, "%s: warning: %s\n", pos[0], w)
	}
	for _, name := range unset {
		fmt.Fprintf(stdout, "%s: warning: password_env names %s, which is not set in this shell; record needs it\n", pos[0], name)
	}
	for _, w := range carriedWarnings(r) {
		fmt.Fprintf(stdout, "%s: warning: %s\n", pos[0], w)
	}
	switch {
	case ids > 0 && *dbPath == "":
		fmt.Fprintf(stdout, "%s: note: %s not looked up: give --db FILE to check them before a record\n", pos[0], count(ids, "stored calibration"))
	case ids > 0:
		fmt.Fprintf(stdout, "%s: %s found in %s\n", pos[0], count(ids, "stored calibration"), *dbPath)
	}
	return nil
}

// checkLinks builds the rig's sources and [publish] link as record does,
// without connecting, so check refuses what record would (issue 16): a
// broker scheme paho cannot use, a ca_file on a broker without TLS or one
// that does not hold a CA, bad serial settings. A password environment
// variable that is not set here is no error (record runs elsewhere): it is
// returned to be warned about.
func checkLinks(r *rig.Rig) (unset []string, err error) {
	getenv := func(name string) string {
		if v := os.Getenv(name); v != "" {
			return v
		}
		unset = append(unset, name)
		return "set when record runs"
	}
	for _, s := range r.Sources {
		switch s.Type {
		case rig.SourceMQTT:
			_, err = mqtt.FromRig(s, r.Name, getenv)
		case rig.SourceSerial:
			_, err = serial.FromRig(s, r)
		}
		if err != nil {
			return nil, err
		}
	}
	if r.Publish != nil {
		if _, err := mqtt.OutboxFromRig(*r.Publish, r.Name, getenv); err != nil {
			return nil, err
		}
	}
	return unset, nil
}

// checkStoredCalibrations looks up every stored calibration id the rig
// names in the database at dbPath (opened read only; "" looks up nothing)
// and checks that each fits its channel, as record will. Every problem is
// listed, one per channel. It returns how many channels name an id.
func checkStoredCalibrations(r *rig.Rig, dbPath string) (int, error) {
	ids := 0
	for _, ch := range r.Channels {
		if ch.Calibration.ID != "" {
			ids++
		}
	}
	if dbPath == "" || ids == 0 {
		return ids, nil
	}
	if _, err := os.Stat(dbPath); err != nil {
		return ids, usagef("--db: %v", err)
	}
	st, err := storage.Open(dbPath, storage.Options{ReadOnly: true})
	if err != nil {
		return ids, err
	}
	defer st.Close()
	var problems []string
	for _, ch := range r.Channels {
		if ch.Calibration.ID == "" {
			continue
		}
		one := *r
		one.Channels = []rig.Channel{ch}
		if _, err := calibrate.NewCalibratorFrom(&one, st.Calibration); err != nil {
			problems = append(problems, err.Error())
		}
	}
	if len(problems) > 0 {
		return ids, fmt.Errorf("%s in %s:\n  %s", count(len(problems), "stored calibration problem"), dbPath, strings.Join(problems, "\n  "))
	}
	return ids, nil
}

// carriedWarnings names each channel the rig's kind needs (every [lift]
// role and, on a roof, every tap and the internal pressure channel) that
// no source carries, with the sources there are. Only when every source
// lists its channels: an MQTT source without a channels list, or a
// simulated source, may carry any channel. A warning, not an error: rig
// files that pass today keep passing.
func carriedWarnings(r *rig.Rig) []string {
	if len(r.Sources) == 0 {
		return nil // import-only rig
	}
	carried := map[string]bool{}
	for _, s := range r.Sources {
		chans, listed := s.Carried()
		if !listed {
			return nil
		}
		for _, c := range chans {
			carried[c] = true
		}
	}
	l := r.Lift
	need := append(append([]string{}, l.Normal...), l.Axial...)
	need = append(need, l.Moment, l.AngleChannel, l.DynamicPressure, l.Speed, l.Spin, l.Direction, l.Temperature, r.Internal.Channel)
	for _, t := range r.Taps {
		need = append(need, t.Channel)
	}
	var out []string
	seen := map[string]bool{}
	for _, c := range need {
		if c == "" || carried[c] || seen[c] {
			continue
		}
		seen[c] = true
		out = append(out, fmt.Sprintf("channel %q is used by the rig but no source carries it, so it will have no readings: add it to the channels (or columns) of one of the sources %s", c, describeSources(r)))
	}
	return out
}

// describeSources lists the rig's sources with what each carries, for an
// error that must name them: "amp (serial: n_fore, n_aft); node (mqtt: any
// channel its payloads name)".
func describeSources(r *rig.Rig) string {
	if len(r.Sources) == 0 {
		return "none"
	}
	var names []string
	for _, s := range r.Sources {
		chans, listed := s.Carried()
		what := strings.Join(chans, ", ")
		switch {
		case !listed && s.Type == rig.SourceSimulated:
			what = "every channel, simulated"
		case !listed:
			what = "any channel its payloads name"
		}
		names = append(names, fmt.Sprintf("%s (%s: %s)", s.Name, s.Type, what))
	}
	return strings.Join(names, "; ")
}

// count writes n with its noun, plural when n ≠ 1 ("1 source", "4 channels").
func count(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return fmt.Sprintf("%d %ss", n, noun)
}

// tributaryWarning says when a roof's taps' tributary areas do not add up
// to its reference area (within 1 %): a tap missing from the rig file, or
// an area typed wrong, biases the whole-roof result. Not an error: a
// mock-up may be instrumented on part of its roof on purpose.
func tributaryWarning(r *rig.Rig) string {
	if r.Kind != rig.KindRoof || len(r.Taps) == 0 || !(r.Reference.AreaM2 > 0) {
		return ""
	}
	sum := 0.0
	for _, t := range r.Taps {
		sum += t.AreaM2
	}
	if math.Abs(sum-r.Reference.AreaM2) <= 0.01*r.Reference.AreaM2 {
		return ""
	}
	return fmt.Sprintf("the taps' tributary areas add up to %.4g m², the reference area is %.4g m² (%+.1f %%): check for a missing tap or a mistyped area_m2",
		sum, r.Reference.AreaM2, 100*(sum-r.Reference.AreaM2)/r.Reference.AreaM2)
}
