package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/serial"
	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// serialRig is the example foil rig with its MQTT source replaced by a
// serial amplifier on port.
func serialRig(t *testing.T, port string) (*rig.Rig, string) {
	t.Helper()
	text, err := os.ReadFile("../../testdata/rigs/foil-towtank.toml")
	require.NoError(t, err)
	src := "[[source]]\nname = \"carriage\"\ntype = \"serial\"\nport = \"" + port + "\"\nbaud = 115200\nformat = \"frame\"\n" +
		"channels = [\"n_fore\", \"n_aft\", \"a_main\", \"pitot\", \"alpha\", \"t_water\"]\n\n"
	re := regexp.MustCompile(`(?s)\[\[source\]\].*?\n# Channels\.`)
	toml := re.ReplaceAllString(string(text), src+"# Channels.")
	require.NotEqual(t, string(text), toml, "the source table was replaced")
	r, err := rig.Parse("serial-rig.toml", []byte(toml))
	require.NoError(t, err)
	return r, toml
}

// Ensure that the whole job runs from a serial amplifier: simulated readings
// written as CRC frames into a real pseudo-terminal, read by the serial
// source through go.bug.st/serial, recorded, estimated and stored, with
// C_L within U95 of the truth and no frame lost or rejected (issue 4).
func TestRecord_SerialEndToEnd(t *testing.T) {
	master, path, err := serial.OpenPTY()
	require.NoError(t, err)
	t.Cleanup(func() { master.Close() })
	r, toml := serialRig(t, path)

	fluid, err := estimate.Properties(r.Fluid, r.Conditions)
	require.NoError(t, err)
	s, err := sim.New(r, sim.Config{QPa: estimate.DynamicPressure(fluid.RhoKgPerM3, 2), Seed: 21,
		StepsDeg: []float64{2, 7}, Hold: 2200 * time.Millisecond, Move: 300 * time.Millisecond}, fluid.RhoKgPerM3)
	require.NoError(t, err)

	db := filepath.Join(t.TempDir(), "serial.db")
	m := &Main{Rig: r, RigTOML: toml, DBPath: db, Addr: "127.0.0.1:0"}
	ctx, cancel := context.WithTimeout(t.Context(), 8*time.Second)
	defer cancel()
	var wg sync.WaitGroup
	blocks := make(chan acquire.Block, 64)
	wg.Go(func() { _ = s.Run(ctx, blocks) })
	wg.Go(func() { _ = serial.WriteFrames(ctx, master, r.Sources[0].Channels, blocks) })
	require.NoError(t, m.Run(ctx))
	cancel()
	wg.Wait()

	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	run, err := st.LatestRun()
	require.NoError(t, err)
	segs, err := st.Segments(run.ID)
	require.NoError(t, err)
	require.NotEmpty(t, segs)
	checked := 0
	for _, seg := range segs {
		if seg.N < 300 {
			continue
		}
		step := 2.0
		if rig.Deg(seg.AlphaRad.X) > 4.5 {
			step = 7
		}
		clTrue, _ := s.Foil().Truth(rig.Rad(step))
		assert.LessOrEqual(t, abs(seg.CL.X-clTrue), seg.CL.U95(), "segment at %g°: C_L %.4f ± %.4f vs %.4f", step, seg.CL.X, seg.CL.U95(), clTrue)
		checked++
	}
	assert.GreaterOrEqual(t, checked, 1)
	require.NotEmpty(t, run.Sources)
	h := run.Sources[0]
	assert.Equal(t, "carriage", h.Source)
	assert.Greater(t, h.Samples, uint64(1000))
	assert.Zero(t, h.Rejected, "no frame rejected: %+v", h.RejectedBy)
	assert.Equal(t, h.Samples, run.Samples, "every sample read was stored")
	require.NotEmpty(t, run.Channels, "channel health is stored with the run")
	names := []string{}
	for _, c := range run.Channels {
		names = append(names, c.Channel)
	}
	assert.Contains(t, strings.Join(names, ","), "n_fore")
}

// corrupter writes frame lines to w, turning every 100th line into a bad
// one: a flipped digit (CRC error), a torn line, or binary garbage.
type corrupter struct {
	mu      sync.Mutex
	w       *os.File
	lines   int
	bad     map[string]int // reason → lines spoiled
	pending []byte
}

func (c *corrupter) Write(p []byte) (int, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.pending = append(c.pending, p...)
	var out []byte
	for {
		i := bytes.IndexByte(c.pending, '\n')
		if i < 0 {
			break
		}
		line := append([]byte(nil), c.pending[:i+1]...)
		c.pending = c.pending[i+1:]
		c.lines++
		if c.lines%100 == 0 {
			switch (c.lines / 100) % 3 {
			case 0: // a flipped digit in the values: the CRC no longer matches
				j := bytes.IndexByte(line, ',') + 1
				if line[j] == '1' {
					line[j] = '2'
				} else {
					line[j] = '1'
				}
				c.bad["crc"]++
			case 1: // torn: the end of the line never came
				line = append(line[:len(line)/2:len(line)/2], '\n')
				c.bad["parse"]++
			case 2: // garbage from an amplifier at power-up
				line = []byte("\x00\xff\x13garbage\x7f\n")
				c.bad["parse"]++
			}
		}
		out = append(out, line...)
	}
	if _, err := c.w.Write(out); err != nil {
		return 0, err
	}
	return len(p), nil
}

// Ensure that a serial record survives the field: with 1 % of the lines
// spoiled, every good frame is stored and every bad one counted by reason;
// after the amplifier is unplugged and plugged back (a new pty behind the
// same by-id style link), recording resumes by itself, the outage is stored
// as a gap event with its duration, and a reconnect is counted (issue 4).
func TestRecord_SerialSurvivesTheField(t *testing.T) {
	link := filepath.Join(t.TempDir(), "usb-amp-if00")
	master, path, err := serial.OpenPTY()
	require.NoError(t, err)
	require.NoError(t, os.Symlink(path, link))
	r, toml := serialRig(t, link)
	fluid, err := estimate.Properties(r.Fluid, r.Conditions)
	require.NoError(t, err)
	s, err := sim.New(r, sim.Config{QPa: estimate.DynamicPressure(fluid.RhoKgPerM3, 2), Seed: 8}, fluid.RhoKgPerM3)
	require.NoError(t, err)

	db := filepath.Join(t.TempDir(), "field.db")
	m := &Main{Rig: r, RigTOML: toml, DBPath: db, Addr: "127.0.0.1:0"}
	recCtx, stopRec := context.WithCancel(t.Context())
	defer stopRec()
	recDone := make(chan error, 1)
	go func() { recDone <- m.Run(recCtx) }()

	c := &corrupter{w: master, bad: map[string]int{}}
	write := func(d time.Duration) {
		ctx, cancel := context.WithTimeout(t.Context(), d)
		defer cancel()
		blocks := make(chan acquire.Block, 64)
		var wg sync.WaitGroup
		wg.Go(func() { _ = s.Run(ctx, blocks) })
		require.NoError(t, serial.WriteFrames(ctx, c, r.Sources[0].Channels, blocks))
		wg.Wait()
	}
	write(2500 * time.Millisecond)

	// Unplug: the device side goes away; a new one appears behind the link.
	time.Sleep(300 * time.Millisecond) // let the reader take what was written
	require.NoError(t, master.Close())
	time.Sleep(700 * time.Millisecond)
	master2, path2, err := serial.OpenPTY()
	require.NoError(t, err)
	defer master2.Close()
	require.NoError(t, os.Remove(link))
	require.NoError(t, os.Symlink(path2, link))
	// Re-plugged: wait until the source has reopened the port before
	// writing, as a device only talks once the port is open.
	require.Eventually(t, func() bool { return m.Sources[0].Health.Reconnects.Load() >= 1 }, 10*time.Second, 20*time.Millisecond)
	c.mu.Lock()
	c.w, c.pending = master2, nil
	c.mu.Unlock()
	write(2500 * time.Millisecond)
	time.Sleep(500 * time.Millisecond) // let the reader drain the pty
	stopRec()
	require.NoError(t, <-recDone)

	run := storedRun(t, db)
	h := run.Sources[0]
	good := uint64(c.lines - c.bad["crc"] - c.bad["parse"])
	assert.Equal(t, good, h.Frames, "every good frame read (%d lines written, %v spoiled)", c.lines, c.bad)
	assert.Equal(t, h.Samples, run.Samples, "every good frame stored")
	assert.Equal(t, uint64(c.bad["crc"]), h.RejectedBy["crc"])
	assert.Equal(t, uint64(c.bad["parse"]), h.RejectedBy["parse"])
	assert.GreaterOrEqual(t, h.Reconnects, uint64(1))

	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	evs, err := st.Events(run.ID)
	require.NoError(t, err)
	var gap *storage.Event
	for i := range evs {
		if evs[i].Kind == string(acquire.EventGap) {
			gap = &evs[i]
		}
	}
	require.NotNil(t, gap, "the outage is stored as a gap: %+v", evs)
	assert.Regexp(t, `\(\d+(\.\d+)?m?s\)`, gap.Message, "the gap carries its duration")
}
