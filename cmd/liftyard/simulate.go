package main

import (
	"context"
	"fmt"
	"io"
	"strings"
	"sync"
	"time"

	goserial "go.bug.st/serial"

	"liftyard/acquire"
	"liftyard/acquire/mqtt"
	"liftyard/acquire/serial"
	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/rig"
)

// runSimulate is `liftyard simulate --rig RIG.toml --mqtt URL | --serial DEVICE [--for DURATION]`.
func runSimulate(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("simulate", "--rig RIG.toml (--mqtt URL [--topic T] | --serial DEVICE|pty) [--for DURATION] [--seed N]",
		"emit synthetic sensor traffic in the wire formats, for dry runs before real hardware arrives", stdout)
	rigPath := fs.String("rig", "", "rig file whose channels and calibrations the traffic follows")
	brokerURL := fs.String("mqtt", "", "publish JSON blocks to this broker, e.g. tcp://127.0.0.1:1883")
	topic := fs.String("topic", "", "MQTT topic (default: the topic of the rig's first mqtt source)")
	device := fs.String("serial", "", `write CRC frames to this serial device; "pty" makes a pseudo-terminal and prints its path`)
	dur := fs.Duration("for", 0, "stop after this long (0: until Ctrl-C)")
	seed := fs.Uint64("seed", 1, "random seed of the turbulence and sensor noise")
	speed := fs.Float64("speed-m-s", 0, "flow speed, m/s (default 2 in water, 12 in air)")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	switch {
	case *rigPath == "":
		return usagef("--rig is required")
	case (*brokerURL == "") == (*device == ""):
		return usagef("give exactly one of --mqtt URL or --serial DEVICE")
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
	s, err := sim.ForRig(r, sim.Common{QPa: q, Seed: *seed, RhoKgPerM3: fluid.RhoKgPerM3})
	if err != nil {
		return fmt.Errorf("simulate %q: %w", r.Name, err)
	}
	if *dur > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, *dur)
		defer cancel()
	}
	blocks := make(chan acquire.Block, 16)
	var wg sync.WaitGroup
	wg.Go(func() { _ = s.Run(ctx, blocks) })
	defer wg.Wait()

	if *brokerURL != "" {
		t := *topic
		for _, src := range r.Sources {
			if t == "" && src.Type == rig.SourceMQTT {
				t = src.Topic
			}
		}
		if t == "" {
			return usagef("--topic is required: the rig has no mqtt source to take it from")
		}
		fmt.Fprintf(stdout, "liftyard simulate: %q publishing blocks of %s to %s topic %s (Ctrl-C to stop)\n",
			r.Name, strings.Join(simChannels(s), ", "), *brokerURL, t)
		pub := &mqtt.Publisher{Broker: *brokerURL, Topic: t, ClientID: "liftyard-simulate-" + r.Name}
		err := pub.Run(ctx, blocks)
		fmt.Fprintf(stdout, "liftyard simulate: %d blocks published\n", pub.Published.Load())
		return err
	}
	channels := simChannels(s)
	baud := 115200
	for _, src := range r.Sources {
		if src.Type == rig.SourceSerial && src.Format == "frame" && len(src.Channels) > 0 {
			channels, baud = src.Channels, src.Baud
			break
		}
	}
	var w io.WriteCloser
	if *device == "pty" {
		master, path, err := serial.OpenPTY()
		if err != nil {
			return err
		}
		w = master
		fmt.Fprintf(stdout, "liftyard simulate: pseudo-terminal %s (set port = %q in the rig's serial source)\n", path, path)
	} else {
		p, err := goserial.Open(*device, &goserial.Mode{BaudRate: baud})
		if err != nil {
			return fmt.Errorf("open %s: %w", *device, err)
		}
		w = p
	}
	defer w.Close()
	// A write blocks while nobody reads the port (a pty with no reader
	// holds a few kilobytes): closing the device on Ctrl-C or --for ends it.
	stopClose := context.AfterFunc(ctx, func() { w.Close() })
	defer stopClose()
	fmt.Fprintf(stdout, "liftyard simulate: %q writing frames seq,t_us,%s*CRC at %d baud (Ctrl-C to stop)\n",
		r.Name, strings.Join(channels, ","), baud)
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
