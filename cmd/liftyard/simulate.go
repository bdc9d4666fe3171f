package main

import (
	"cmp"
	"context"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"liftyard/acquire"
	"liftyard/acquire/mqtt"
	"liftyard/acquire/serial"
	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/rig"
)

// runSimulate is `liftyard simulate --rig RIG.toml [per-source flags] [--for DURATION]`.
//
// One simulation (one flow, one sweep) is split across the rig's serial and
// MQTT sources, each in its own wire format and on its own transport, each
// stamped by its own device clock (sim.Splitter). A rig without serial or
// MQTT sources, or a --serial/--mqtt the rig has no source for, sends every
// channel down that one transport, as before issue 15.
func runSimulate(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("simulate", "--rig RIG.toml [--device NAME=PATH|pty]... [--broker NAME=URL]... [--mqtt URL] [--serial DEVICE|pty] [--drift-ppm NAME=PPM]... [--clock-start-s NAME=S]... [--steps-deg LIST] [--hold DURATION] [--for DURATION] [--seed N] [--speed-m-s V]",
		"emit synthetic sensor traffic for every source of the rig, in its wire format, for dry runs before real hardware arrives", stdout)
	rigPath := fs.String("rig", "", "rig file whose sources, channels and calibrations the traffic follows")
	brokerURL := fs.String("mqtt", "", "broker of every MQTT source (default: each source's broker); for a rig with no MQTT source, publish every channel here")
	topic := fs.String("topic", "", "MQTT topic when --mqtt sends every channel (a rig with no MQTT source)")
	device := fs.String("serial", "", `device of the rig's one serial source; "pty" makes a pseudo-terminal and prints its path; for a rig with no serial source, write every channel as CRC frames here`)
	devices := sourceFlag{}
	fs.Var(devices, "device", "`NAME=PATH` writes serial source NAME into PATH (\"pty\": a new pseudo-terminal, the default); repeat per source")
	brokers := sourceFlag{}
	fs.Var(brokers, "broker", "`NAME=URL` publishes MQTT source NAME to the broker at URL (default: --mqtt, then the rig's broker); repeat per source")
	drifts := sourceFlag{}
	fs.Var(drifts, "drift-ppm", "`NAME=PPM` makes source NAME's device clock run fast by PPM (negative: slow; default a few to 100 ppm, different per source)")
	starts := sourceFlag{}
	fs.Var(starts, "clock-start-s", "`NAME=S` starts source NAME's device clock at S seconds (default: a different time per source)")
	dur := fs.Duration("for", 0, "stop after this long (0: until Ctrl-C)")
	seed := fs.Uint64("seed", 1, "random seed of the turbulence and sensor noise")
	speed := fs.Float64("speed-m-s", 0, "flow speed, m/s (default 2 in water, 12 in air)")
	stepsText := fs.String("steps-deg", "", "foil or body rigs: the angle-of-attack steps, degrees, comma separated (default -4,-2,...,12)")
	hold := fs.Duration("hold", 2500*time.Millisecond, "foil or body rigs: steady time per step")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	var steps []float64
	for f := range strings.SplitSeq(*stepsText, ",") {
		if f = strings.TrimSpace(f); f == "" {
			continue
		}
		x, err := strconv.ParseFloat(f, 64)
		if err != nil || math.Abs(x) > 90 {
			return usagef("--steps-deg %q: want angles in degrees within ±90, comma separated", *stepsText)
		}
		steps = append(steps, x)
	}
	if *hold <= 0 {
		return usagef("--hold %s: want a positive duration", *hold)
	}
	if *rigPath == "" {
		return usagef("--rig is required")
	}
	r, err := rig.Load(*rigPath)
	if err != nil {
		return err
	}
	fluid, err := estimate.Properties(r.Fluid, r.Conditions)
	if err != nil {
		return err
	}
	v := *speed
	if v <= 0 {
		v = defaultSpeed(r.Fluid)
	}
	q := estimate.DynamicPressure(fluid.RhoKgPerM3, v)
	s, err := sim.ForRig(r, sim.Common{QPa: q, Seed: *seed, RhoKgPerM3: fluid.RhoKgPerM3, StepsDeg: steps, Hold: *hold})
	if err != nil {
		return fmt.Errorf("simulate %q: %w", r.Name, err)
	}
	routes, unrouted, err := sim.Routes(r, simChannels(s))
	if err != nil {
		return usagef("simulate %q: %v", r.Name, err)
	}
	var nSerial, nMQTT int
	for _, rt := range routes {
		if rt.Source.Type == rig.SourceSerial {
			nSerial++
		} else {
			nMQTT++
		}
	}
	if *dur > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, *dur)
		defer cancel()
	}
	switch {
	case len(routes) == 0 || (*device != "" && nSerial == 0) || (*brokerURL != "" && nMQTT == 0):
		// One transport carries every channel (the rig's sources are
		// simulated, or the flag names a transport the rig has no source on).
		if (*brokerURL == "") == (*device == "") {
			return usagef("the rig has no serial or mqtt source to drive: give exactly one of --mqtt URL or --serial DEVICE")
		}
		return simulateOne(ctx, r, s, *brokerURL, *topic, *device, stdout)
	case *device != "" && nSerial > 1:
		return usagef("the rig has %d serial sources: give --device NAME=PATH for each instead of --serial", nSerial)
	}
	names := make([]string, len(routes))
	for i, rt := range routes {
		names[i] = rt.Source.Name
	}
	for flagName, m := range map[string]sourceFlag{"device": devices, "broker": brokers, "drift-ppm": drifts, "clock-start-s": starts} {
		for name := range m {
			if !slices.Contains(names, name) {
				return usagef("--%s %s: the rig has no serial or mqtt source %q (sources: %s)", flagName, name, name, strings.Join(names, ", "))
			}
		}
	}
	clocks := make([]sim.DeviceClock, len(routes))
	for i, rt := range routes {
		clocks[i] = sim.DefaultClock(i)
		if text, ok := drifts[rt.Source.Name]; ok {
			ppm, err := strconv.ParseFloat(text, 64)
			if err != nil || math.Abs(ppm) > 1000 {
				return usagef("--drift-ppm %s=%s: want a number of ppm within ±1000", rt.Source.Name, text)
			}
			clocks[i].DriftPPM = ppm
		}
		if text, ok := starts[rt.Source.Name]; ok {
			sec, err := strconv.ParseFloat(text, 64)
			if err != nil || sec < 0 || sec > 1e9 {
				return usagef("--clock-start-s %s=%s: want seconds ≥ 0", rt.Source.Name, text)
			}
			clocks[i].StartUs = int64(math.Round(sec * 1e6))
		}
	}
	if len(unrouted) > 0 {
		fmt.Fprintf(stdout, "liftyard simulate: no source of the rig carries %s: not sent\n", strings.Join(unrouted, ", "))
	}

	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var wg sync.WaitGroup
	defer wg.Wait()
	defer cancel()
	errs := make(chan error, len(routes))
	ins := make([]chan acquire.Block, len(routes))
	dropped := make([]atomic.Uint64, len(routes))
	var pubs []*mqtt.Publisher
	for i, rt := range routes {
		ins[i] = make(chan acquire.Block, 64)
		src := rt.Source
		where := ""
		var run func() error
		switch src.Type {
		case rig.SourceMQTT:
			broker := cmp.Or(brokers[src.Name], *brokerURL, src.Broker)
			pub := &mqtt.Publisher{Broker: broker, Topic: src.Topic, ClientID: "liftyard-simulate-" + r.Name + "-" + src.Name}
			pubs = append(pubs, pub)
			where = fmt.Sprintf("publishing blocks of %s as JSON to %s topic %s", strings.Join(rt.Channels, ", "), broker, src.Topic)
			run = func() error { return pub.Run(ctx, ins[i]) }
		case rig.SourceSerial:
			dev := cmp.Or(devices[src.Name], *device, "pty")
			w, path, err := openSimDevice(dev, src)
			if err != nil {
				return fmt.Errorf("source %q: %w", src.Name, err)
			}
			// A write blocks while nobody reads the port (a pty with no
			// reader holds a few kilobytes): closing the device ends it.
			stop := context.AfterFunc(ctx, func() { w.Close() })
			defer stop()
			defer w.Close()
			if src.Format == "delimited" {
				f := acquire.DelimitedFormat{Delimiter: src.Delimiter, Columns: src.Columns}
				where = fmt.Sprintf("writing %s as delimited lines %s into %s", strings.Join(rt.Channels, ", "), strings.Join(src.Columns, cmp.Or(src.Delimiter, ",")), path)
				run = func() error { return serial.WriteDelimited(ctx, w, f, ins[i]) }
			} else {
				where = fmt.Sprintf("writing frames seq,t_us,%s*CRC into %s", strings.Join(rt.Channels, ","), path)
				run = func() error { return serial.WriteFrames(ctx, w, rt.Channels, ins[i]) }
			}
			if dev == "pty" {
				where += fmt.Sprintf(" (set port = %q in source %q)", path, src.Name)
			}
		}
		fmt.Fprintf(stdout, "liftyard simulate: %q source %s: %s; device clock from %.3f s, %+g ppm\n",
			r.Name, src.Name, where, float64(clocks[i].StartUs)/1e6, clocks[i].DriftPPM)
		if len(rt.Missing) > 0 && src.Type == rig.SourceSerial {
			fmt.Fprintf(stdout, "liftyard simulate: source %s: %s not simulated, sent as raw 0\n", src.Name, strings.Join(rt.Missing, ", "))
		}
		wg.Go(func() {
			if err := run(); err != nil && ctx.Err() == nil {
				errs <- fmt.Errorf("source %q: %w", src.Name, err)
				cancel()
			}
		})
	}
	blocks := make(chan acquire.Block, 16)
	wg.Go(func() { _ = s.Run(ctx, blocks) })
	split := &sim.Splitter{Routes: routes, Clocks: clocks}
	fmt.Fprintf(stdout, "liftyard simulate: one simulation split across %d source(s) (Ctrl-C to stop)\n", len(routes))
	start := time.Now()
	for done := false; !done; {
		select {
		case <-ctx.Done():
			done = true
		case b := <-blocks:
			for i, o := range split.Split(b) {
				select {
				case ins[i] <- o:
				default: // a transport that cannot keep up (a pty nobody reads) loses the block, as a device would
					dropped[i].Add(1)
				}
			}
		}
	}
	cancel()
	wg.Wait()
	for i, rt := range routes {
		if n := dropped[i].Load(); n > 0 {
			fmt.Fprintf(stdout, "liftyard simulate: source %s: %d blocks not sent (nobody was reading)\n", rt.Source.Name, n)
		}
	}
	for _, p := range pubs {
		fmt.Fprintf(stdout, "liftyard simulate: %d blocks published to %s\n", p.Published.Load(), p.Topic)
	}
	fmt.Fprintf(stdout, "liftyard simulate: stopped after %s\n", time.Since(start).Round(time.Second))
	select {
	case err := <-errs:
		return err
	default:
		return nil
	}
}

// sourceFlag is a repeatable NAME=VALUE flag, one value per rig source.
type sourceFlag map[string]string

func (f sourceFlag) String() string { return "" }

func (f sourceFlag) Set(s string) error {
	name, val, ok := strings.Cut(s, "=")
	if !ok || name == "" || val == "" {
		return fmt.Errorf("want NAME=VALUE, got %q", s)
	}
	if _, dup := f[name]; dup {
		return fmt.Errorf("source %q given twice", name)
	}
	f[name] = val
	return nil
}

// openSimDevice opens the device side of a serial dry run of source src: a
// new pseudo-terminal for "pty" (its port side's path is returned), else
// the serial device at dev with src's line settings.
func openSimDevice(dev string, src rig.Source) (io.WriteCloser, string, error) {
	if dev == "pty" {
		master, path, err := serial.OpenPTY()
		return master, path, err
	}
	w, err := serial.OpenDevice(dev, src)
	return w, dev, err
}

// simulateOne sends every channel of the simulation down one transport:
// JSON blocks to brokerURL (topic: --topic, or the rig's first MQTT
// source's), or CRC frames into device.
func simulateOne(ctx context.Context, r *rig.Rig, s sim.Simulator, brokerURL, topic, device string, stdout io.Writer) error {
	blocks := make(chan acquire.Block, 16)
	var wg sync.WaitGroup
	wg.Go(func() { _ = s.Run(ctx, blocks) })
	defer wg.Wait()

	if brokerURL != "" {
		t := topic
		for _, src := range r.Sources {
			if t == "" && src.Type == rig.SourceMQTT {
				t = src.Topic
			}
		}
		if t == "" {
			return usagef("--topic is required: the rig has no mqtt source to take it from")
		}
		fmt.Fprintf(stdout, "liftyard simulate: %q publishing blocks of %s to %s topic %s (Ctrl-C to stop)\n",
			r.Name, strings.Join(simChannels(s), ", "), brokerURL, t)
		pub := &mqtt.Publisher{Broker: brokerURL, Topic: t, ClientID: "liftyard-simulate-" + r.Name}
		err := pub.Run(ctx, blocks)
		fmt.Fprintf(stdout, "liftyard simulate: %d blocks published\n", pub.Published.Load())
		return err
	}
	channels := simChannels(s)
	w, path, err := openSimDevice(device, rig.Source{Name: "simulate"})
	if err != nil {
		return err
	}
	defer w.Close()
	if device == "pty" {
		fmt.Fprintf(stdout, "liftyard simulate: pseudo-terminal %s (set port = %q in the rig's serial source)\n", path, path)
	}
	stopClose := context.AfterFunc(ctx, func() { w.Close() })
	defer stopClose()
	fmt.Fprintf(stdout, "liftyard simulate: %q writing frames seq,t_us,%s*CRC at %d baud (Ctrl-C to stop)\n",
		r.Name, strings.Join(channels, ","), 115200)
	start := time.Now()
	err = serial.WriteFrames(ctx, w, channels, blocks)
	fmt.Fprintf(stdout, "liftyard simulate: stopped after %s\n", time.Since(start).Round(time.Second))
	if ctx.Err() != nil {
		return nil // stopped by Ctrl-C or --for; a write cut short by the close is expected
	}
	return err
}

// simChannels lists the channels the simulator produces, in its order.
func simChannels(s sim.Simulator) []string {
	b := s.Preview()
	names := make([]string, len(b.Series))
	for i, ser := range b.Series {
		names[i] = ser.Channel
	}
	return names
}
