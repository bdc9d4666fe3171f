package sim_test

import (
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire/sim"
	"liftyard/rig"
)

// Ensure that the simulator's channels are split across the rig's sources
// as each declares them: a delimited amplifier its channel columns, an MQTT
// node without a channel list what no one else carries; simulated sources
// get nothing; two MQTT sources without channel lists are refused (issue 15).
func TestRoutes(t *testing.T) {
	made := []string{"n_fore", "n_aft", "axial", "pitot", "alpha"}
	amp := rig.Source{Name: "amp", Type: rig.SourceSerial, Format: "delimited", Columns: []string{"t_ms", "n_fore", "_", "n_aft", "axial", "rh"}}
	node := rig.Source{Name: "node", Type: rig.SourceMQTT}
	frame := rig.Source{Name: "frame", Type: rig.SourceSerial, Format: "frame", Channels: []string{"alpha"}}
	tests := []struct {
		name     string
		sources  []rig.Source
		want     map[string][]string
		missing  map[string][]string
		unrouted []string
		err      string
	}{
		{"delimited and open mqtt", []rig.Source{amp, node},
			map[string][]string{"amp": {"n_fore", "n_aft", "axial", "rh"}, "node": {"pitot", "alpha"}},
			map[string][]string{"amp": {"rh"}}, nil, ""},
		{"frame, delimited, simulated: pitot unrouted", []rig.Source{frame, amp, {Name: "s", Type: rig.SourceSimulated}},
			map[string][]string{"frame": {"alpha"}, "amp": {"n_fore", "n_aft", "axial", "rh"}},
			map[string][]string{"amp": {"rh"}}, []string{"pitot"}, ""},
		{"two open mqtt sources", []rig.Source{node, {Name: "node2", Type: rig.SourceMQTT}}, nil, nil, nil,
			`mqtt sources "node" and "node2" both have no channels list`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := &rig.Rig{Sources: tt.sources}
			routes, unrouted, err := sim.Routes(r, made)
			if tt.err != "" {
				require.ErrorContains(t, err, tt.err)
				return
			}
			require.NoError(t, err)
			got, missing := map[string][]string{}, map[string][]string{}
			for _, rt := range routes {
				got[rt.Source.Name] = rt.Channels
				if len(rt.Missing) > 0 {
					missing[rt.Source.Name] = rt.Missing
				}
			}
			assert.Equal(t, tt.want, got)
			assert.Equal(t, tt.missing, missing)
			assert.Equal(t, tt.unrouted, unrouted)
		})
	}
}

// Ensure that the Splitter cuts one simulation into per-source blocks that
// carry the same readings (one physics), each with its own seq from 0 and
// its own device clock: started where the clock says and drifting by its
// ppm over the run.
func TestSplitter(t *testing.T) {
	r := testRig()
	r.Sources = []rig.Source{
		{Name: "amp", Type: rig.SourceSerial, Format: "frame", Channels: []string{"n_fore", "n_aft", "axial", "alpha", "rh"}},
		{Name: "node", Type: rig.SourceMQTT, Channels: []string{"pitot", "rh"}},
	}
	s, err := sim.New(r, sim.Config{QPa: 2000, Seed: 7}, 0)
	require.NoError(t, err)
	routes, _, err := sim.Routes(r, []string{"n_fore", "n_aft", "axial", "pitot", "alpha"})
	require.NoError(t, err)
	sp := &sim.Splitter{Routes: routes, Clocks: []sim.DeviceClock{{StartUs: 3600e6, DriftPPM: 100}, {StartUs: 777e6, DriftPPM: -50}}}
	const blocks = 3000 // 300 s at 200 Hz in blocks of 20
	for k := range blocks {
		b := s.Next()
		out := sp.Split(b)
		require.Len(t, out, 2)
		amp, node := out[0], out[1]
		assert.Equal(t, uint64(k), amp.Seq)
		assert.Equal(t, uint64(k), node.Seq)
		assert.Equal(t, "amp", amp.Source)
		assert.Equal(t, "node", node.Source)
		assert.Equal(t, b.Raw("n_fore"), amp.Raw("n_fore"), "the same readings")
		assert.Equal(t, b.Raw("pitot"), node.Raw("pitot"))
		assert.Equal(t, make([]float64, b.Len()), amp.Raw("rh"), "a serial channel not simulated is sent as raw 0")
		assert.Nil(t, node.Raw("rh"), "MQTT leaves a channel not simulated out")
		assert.Nil(t, node.Raw("n_fore"))
		if k == 0 {
			assert.Equal(t, int64(3600e6), amp.T0Us)
			assert.Equal(t, int64(777e6), node.T0Us)
		}
		if k == blocks-1 {
			elapsed := float64(b.T0Us) // the simulator's clock starts at 0
			assert.InDelta(t, 3600e6+elapsed*(1+100e-6), float64(amp.T0Us), 1, "+100 ppm")
			assert.InDelta(t, 777e6+elapsed*(1-50e-6), float64(node.T0Us), 1, "−50 ppm")
			assert.InDelta(t, 29.99e3, float64(amp.T0Us-3600e6)-elapsed, 1, "100 ppm of 299.9 s is 29.99 ms")
		}
	}
}
