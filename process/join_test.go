package process_test

import (
	"math"
	"math/rand/v2"
	"os"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/rig"
)

// roofSourcesTOML is the example roof rig with an internal-pressure
// transducer (channel p_int) and sources as the toml text src gives them.
func roofSourcesTOML(t *testing.T, src string) string {
	t.Helper()
	text, err := os.ReadFile(roofRig)
	require.NoError(t, err)
	s := regexp.MustCompile(`(?s)\[\[source\]\].*?\n\[\[channel\]\]`).ReplaceAllString(string(text), src+"\n[[channel]]")
	s = regexp.MustCompile(`(?m)^cp = 0\.2 .*$`).ReplaceAllString(s, `channel = "p_int"`)
	s = strings.Replace(s, "[lift]", `[[channel]]
name = "p_int"
quantity = "pressure"
unit = "Pa"
capacity = "1 kPa"
calibration = { poly = [0.1, 0.0305], u = 0.8 }

[lift]`, 1)
	require.Contains(t, s, `channel = "p_int"`)
	return s
}

// Ensure the issue 15 "must show" through the real pipeline: a roof whose
// taps and vane come from a serial scanner, whose mast pitot and internal
// pressure come from two MQTT nodes, each device on its own clock (minutes
// apart, drifting up to 100 ppm), gives a result row for every zone of
// every block — the same rows, within a small fraction of their U95, as the
// same simulation with every channel on one source, and each zone's mean Cp
// within 2 U95 of the simulator's truth.
func TestPipeline_RoofJoinsSources(t *testing.T) {
	joined := roofSourcesTOML(t, `[[source]]
name = "scanner"
type = "serial"
port = "/dev/ttyUSB0"
channels = ["p01", "p02", "p03", "p04", "p05", "p06", "p07", "p08", "p09", "p10", "p11", "p12", "vane"]

[[source]]
name = "mast"
type = "mqtt"
broker = "tcp://127.0.0.1:1883"
topic = "yard/mast"
channels = ["q_ref"]

[[source]]
name = "inside"
type = "mqtt"
broker = "tcp://127.0.0.1:1883"
topic = "yard/inside"
channels = ["p_int"]
`)
	single := roofSourcesTOML(t, `[[source]]
name = "scanner"
type = "serial"
port = "/dev/ttyUSB0"
channels = ["p01", "p02", "p03", "p04", "p05", "p06", "p07", "p08", "p09", "p10", "p11", "p12", "vane", "q_ref", "p_int"]
`)
	const blockLen = 20 * time.Second
	run := func(toml string) ([]estimate.Segment, *sim.Roof) {
		t.Helper()
		r, err := rig.Parse("roof-sources.toml", []byte(toml))
		require.NoError(t, err)
		s, err := sim.NewRoof(r, sim.RoofConfig{QPa: 90, Seed: 15})
		require.NoError(t, err)
		routes, unrouted, err := sim.Routes(r, []string{"p01", "p02", "p03", "p04", "p05", "p06", "p07", "p08", "p09", "p10", "p11", "p12", "q_ref", "vane", "p_int"})
		require.NoError(t, err)
		require.Empty(t, unrouted)
		clocks := make([]sim.DeviceClock, len(routes))
		for i := range clocks {
			clocks[i] = sim.DefaultClock(i)
		}
		sp := &sim.Splitter{Routes: routes, Clocks: clocks}
		delay := map[string]time.Duration{"scanner": 300 * time.Microsecond, "mast": 8 * time.Millisecond, "inside": 15 * time.Millisecond}
		rng := rand.New(rand.NewPCG(3, 4))
		host := time.Date(2026, 12, 2, 9, 0, 0, 0, time.UTC)
		var blocks []acquire.Block
		for range 62 * 10 { // 62 s in blocks of 100 ms
			b := s.Next()
			sent := host.Add(time.Duration(b.T0Us+int64(b.Len())*b.DtUs) * time.Microsecond)
			for _, o := range sp.Split(b) {
				o.Received = sent.Add(delay[o.Source] + time.Duration(rng.ExpFloat64()*float64(2*time.Millisecond)))
				blocks = append(blocks, o)
			}
		}
		slices.SortStableFunc(blocks, func(a, b acquire.Block) int { return a.Received.Compare(b.Received) })
		cal, err := calibrate.NewCalibrator(r)
		require.NoError(t, err)
		p, err := process.New(r, cal, process.Options{Roof: estimate.RoofConfig{Block: blockLen}, Now: func() time.Time { return host }})
		require.NoError(t, err)
		segs, err := process.Replay(t.Context(), acquire.Blocks(blocks), p, nil)
		require.NoError(t, err)
		return segs, s
	}
	zonesOf := func(segs []estimate.Segment) []estimate.Segment {
		var out []estimate.Segment
		for _, s := range segs {
			if s.Tap == "" {
				out = append(out, s)
			}
		}
		return out
	}
	got, s := run(joined)
	want, _ := run(single)
	gotZ, wantZ := zonesOf(got), zonesOf(want)
	require.Len(t, wantZ, 3*4, "three blocks of 20 s, three zones and the whole roof")
	require.Len(t, gotZ, len(wantZ), "every zone of every block from the joined sources")
	for i, g := range gotZ {
		w := wantZ[i]
		require.Equal(t, w.Zone, g.Zone)
		t.Logf("block %d zone %-6s: joined Cp %.4f ± %.4f, one source %.4f, truth %.4f", g.Block, g.Zone, g.CpMean.X, g.CpMean.U95(), w.CpMean.X, s.TrueCp(g.Zone))
		assert.InDelta(t, w.CpMean.X, g.CpMean.X, 0.05*w.CpMean.U95(), "block %d zone %s: joined as if from one source", g.Block, g.Zone)
		assert.InDelta(t, w.CpPeak, g.CpPeak, 0.05*math.Abs(w.CpPeak)+0.01, "block %d zone %s: peak", g.Block, g.Zone)
		assert.Greater(t, g.N, int(blockLen/(5*time.Millisecond))*9/10, "block %d zone %s: samples", g.Block, g.Zone)
		assert.LessOrEqual(t, math.Abs(g.CpMean.X-s.TrueCp(g.Zone)), 2*g.CpMean.U95(), "block %d zone %s: truth", g.Block, g.Zone)
	}
}
