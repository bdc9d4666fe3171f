package main

import (
	"context"
	_ "embed"
	"fmt"
	"io"
	"sync"
	"time"

	"liftyard/acquire"
	"liftyard/acquire/mqtt"
	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/rig"
)

// demoRigTOML is the demo's rig: the example foil on a water tow rig. A test
// keeps it identical to testdata/rigs/foil-towtank.toml.
//
//go:embed demo-rig.toml
var demoRigTOML []byte

// demoTopic is where the simulated carriage publishes its blocks.
const demoTopic = "liftyard/towtank/raw"

// The demo runs the whole job on an embedded default: an in-process MQTT
// broker on loopback, a simulated rig publishing real MQTT block payloads
// through paho, and the recorder (subscribing with paho), estimator, store and
// dashboard of Main.

// demoRig parses the embedded rig and points its MQTT source at brokerURL.
func demoRig(brokerURL string) (*rig.Rig, error) {
	r, err := rig.Parse("demo-rig.toml", demoRigTOML)
	if err != nil {
		return nil, fmt.Errorf("embedded demo rig: %w", err)
	}
	for i := range r.Sources {
		if r.Sources[i].Type == rig.SourceMQTT {
			r.Sources[i].Broker = brokerURL
			r.Sources[i].Topic = demoTopic
		}
	}
	return r, nil
}

// runDemoSession starts the broker and the simulator and records until ctx is
// done. It returns the simulator, so tests can compare with its truth.
func runDemoSession(ctx context.Context, m *Main, simCfg sim.Config) (*sim.Rig, error) {
	broker, err := mqtt.StartBroker("127.0.0.1:0", nil)
	if err != nil {
		return nil, err
	}
	defer broker.Close()
	r, err := demoRig(broker.URL())
	if err != nil {
		return nil, err
	}
	fluid, err := estimate.Properties(r.Fluid, r.Conditions)
	if err != nil {
		return nil, err
	}
	if simCfg.QPa == 0 {
		simCfg.QPa = estimate.DynamicPressure(fluid.RhoKgPerM3, defaultSpeed(r.Fluid))
	}
	simRig, err := sim.New(r, simCfg, fluid.RhoKgPerM3)
	if err != nil {
		return nil, err
	}
	m.Rig, m.RigTOML = r, string(demoRigTOML)
	src := &mqtt.Source{Name: r.Sources[0].Name, Broker: broker.URL(), Topic: demoTopic, ClientID: "liftyard-demo-recorder", Logger: m.Logger, OnEvent: m.onEvent,
		AckOnStore: true}
	m.Sources = []Source{{Name: src.Name, Src: src, Health: &src.Health}}

	// The simulated carriage starts publishing once the recorder has
	// subscribed, so the run starts with the first block.
	simCtx, stopSim := context.WithCancel(ctx)
	defer stopSim()
	var wg sync.WaitGroup
	wg.Go(func() {
		select {
		case <-src.Ready():
		case <-simCtx.Done():
			return
		}
		blocks := make(chan acquire.Block, 16)
		pub := &mqtt.Publisher{Broker: broker.URL(), Topic: demoTopic, ClientID: "liftyard-demo-carriage", Logger: m.Logger}
		var inner sync.WaitGroup
		inner.Go(func() { _ = simRig.Run(simCtx, blocks) })
		inner.Go(func() { _ = pub.Run(simCtx, blocks) })
		inner.Wait()
	})
	err = m.Run(ctx)
	stopSim()
	wg.Wait()
	return simRig, err
}

// runDemo is `liftyard demo [--addr ADDR] [--db FILE] [--for DURATION]`.
func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("demo", "[--addr 127.0.0.1:8470] [--db FILE] [--for DURATION]",
		"run the whole job on a simulated tow rig through an embedded MQTT broker", stdout)
	addr := fs.String("addr", "127.0.0.1:8470", "dashboard listen address")
	db := fs.String("db", "liftyard-demo.db", "bbolt store file")
	dur := fs.Duration("for", 0, "stop after this long, e.g. 30s (0: until Ctrl-C)")
	seed := fs.Uint64("seed", 1, "random seed of the simulated turbulence and sensor noise")
	verbose := fs.Bool("v", false, "log progress to stderr")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	if *dur > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, *dur)
		defer cancel()
	}
	m := &Main{DBPath: *db, Addr: *addr, Logger: newLogger(stderr, *verbose)}
	start := time.Now()
	m.OnReady = func(url string, id uint64) {
		fmt.Fprintf(stdout, "liftyard demo: simulated foil on a water tow rig, via an embedded MQTT broker\n")
		fmt.Fprintf(stdout, "liftyard demo: dashboard on %s (run %d, store %s; Ctrl-C to stop)\n", url, id, *db)
	}
	// The simulated carriage waits 2 s at rest first: the recorder takes
	// its flow-off zero there.
	if _, err := runDemoSession(ctx, m, sim.Config{Seed: *seed, FlowOffBefore: 2 * time.Second}); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "liftyard demo: run %d stored in %s after %s\n", m.RunID(), *db, time.Since(start).Round(time.Second))
	printDrift(stdout, m.Rig, m.Finished)
	fmt.Fprintf(stdout, "  liftyard runs --db %s\n  liftyard export --db %s --run latest --what segments --format json\n", *db, *db)
	return nil
}
