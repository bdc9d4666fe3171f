package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/internal/mosquittotest"
	"liftyard/storage"
)

// Ensure that `liftyard simulate --mqtt` and `liftyard record` work against
// a real site broker (Debian mosquitto): the recorder subscribes to the
// simulated logger, and with a [publish] table publishes its live results
// and segments back to the broker for other consumers (docs/design.md §7, issue 4).
func TestRecord_SiteBrokerRoundTrip(t *testing.T) {
	br := mosquittotest.Start(t)
	text, err := os.ReadFile("../../testdata/rigs/foil-towtank.toml")
	require.NoError(t, err)
	toml := regexp.MustCompile(`tcp://127\.0\.0\.1:1883`).ReplaceAllString(string(text), br.URL())
	toml += "\n[publish]\nbroker = \"" + br.URL() + "\"\ntopic_prefix = \"yard/towtank\"\n"
	dir := t.TempDir()
	rigPath := filepath.Join(dir, "site.toml")
	require.NoError(t, os.WriteFile(rigPath, []byte(toml), 0o644))

	// A consumer on the site broker.
	var mu sync.Mutex
	got := map[string][][]byte{}
	c := paho.NewClient(paho.NewClientOptions().AddBroker(br.URL()).SetClientID("site-consumer"))
	tok := c.Connect()
	require.True(t, tok.WaitTimeout(5*time.Second))
	require.NoError(t, tok.Error())
	defer c.Disconnect(50)
	st := c.Subscribe("yard/towtank/#", 1, func(_ paho.Client, m paho.Message) {
		mu.Lock()
		got[m.Topic()] = append(got[m.Topic()], append([]byte(nil), m.Payload()...))
		mu.Unlock()
	})
	require.True(t, st.WaitTimeout(5*time.Second))

	db := filepath.Join(dir, "site.db")
	ctx, cancel := context.WithTimeout(t.Context(), 9*time.Second)
	defer cancel()
	var wg sync.WaitGroup
	var recOut, simOut bytes.Buffer
	var recCode, simCode int
	wg.Go(func() {
		recCode = run(ctx, []string{"record", "--rig", rigPath, "--db", db, "--addr", "127.0.0.1:0"}, &recOut, &recOut)
	})
	wg.Go(func() {
		time.Sleep(time.Second) // let the recorder subscribe first
		simCode = run(ctx, []string{"simulate", "--rig", rigPath, "--mqtt", br.URL(), "--seed", "5"}, &simOut, &simOut)
	})
	wg.Wait()
	require.Equal(t, 0, recCode, recOut.String())
	require.Equal(t, 0, simCode, simOut.String())
	assert.Contains(t, simOut.String(), "publishing blocks of")

	r := storedRun(t, db)
	assert.Equal(t, storage.StatusComplete, r.Status)
	require.NotEmpty(t, r.Sources)
	assert.Greater(t, r.Sources[0].Frames, uint64(20), "blocks came through mosquitto")
	assert.Zero(t, r.Sources[0].Rejected)

	mu.Lock()
	defer mu.Unlock()
	require.NotEmpty(t, got["yard/towtank/live"], "live results published to the site broker")
	require.NotEmpty(t, got["yard/towtank/health"])
	var live map[string]any
	require.NoError(t, json.Unmarshal(got["yard/towtank/live"][len(got["yard/towtank/live"])-1], &live))
	for _, k := range []string{"q_pa", "cl", "cl_u95", "alpha_deg", "speed_m_s"} {
		assert.Contains(t, live, k)
	}
	segs := got["yard/towtank/segments"]
	require.NotEmpty(t, segs, "each steady segment is published")
	assert.True(t, strings.Contains(string(segs[0]), `"cl_u95"`))
	assert.Len(t, segs, r.Segments, "one message per stored segment")
}
