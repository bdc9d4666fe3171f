package main

import (
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
