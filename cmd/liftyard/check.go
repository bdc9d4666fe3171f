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
	"liftyard/process"
	"liftyard/rig"
)

// runCheck is `liftyard check RIG.toml`.
func runCheck(_ context.Context, args []string, stdout, _ io.Writer) error {
	fs := newFlags("check", "RIG.toml", "validate a rig file and list every problem with its line", stdout)
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
