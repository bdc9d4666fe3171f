package mqtt_test

import (
	"context"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/mqtt"
)

func startBroker(t *testing.T) *mqtt.Broker {
	t.Helper()
	b, err := mqtt.StartBroker("127.0.0.1:0", nil)
	require.NoError(t, err)
	t.Cleanup(func() { assert.NoError(t, b.Close()) })
	return b
}

func block(seq uint64) acquire.Block {
	return acquire.Block{Seq: seq, T0Us: int64(seq) * 1000, DtUs: 100, Series: []acquire.Series{
		{Channel: "a", Raw: []float64{float64(seq), float64(seq) + 0.5}},
	}}
}

// Ensure that blocks published through a real (embedded) broker arrive in
// order, complete, with nothing dropped by the broker or by us.
func TestPublisherToSource_EmbeddedBroker(t *testing.T) {
	br := startBroker(t)
	ctx, cancel := context.WithTimeout(t.Context(), 20*time.Second)
	defer cancel()

	src := &mqtt.Source{Name: "rig", Broker: br.URL(), Topic: "t/raw", ClientID: "test-sub"}
	out := make(chan acquire.Block, 16)
	srcDone := make(chan error, 1)
	go func() { srcDone <- src.Run(ctx, out) }()
	// Publish only once the subscription is in place.
	select {
	case <-src.Ready():
	case <-ctx.Done():
		t.Fatal("source never subscribed")
	}

	pub := &mqtt.Publisher{Broker: br.URL(), Topic: "t/raw", ClientID: "test-pub"}
	in := make(chan acquire.Block)
	pubDone := make(chan error, 1)
	go func() { pubDone <- pub.Run(ctx, in) }()
	const n = 200
	go func() {
		for i := range n {
			in <- block(uint64(i))
		}
		close(in)
	}()
	for i := range n {
		select {
		case b := <-out:
			require.Equal(t, uint64(i), b.Seq, "blocks out of order")
			require.Equal(t, "rig", b.Source)
			require.Equal(t, []float64{float64(i), float64(i) + 0.5}, b.Series[0].Raw)
			require.False(t, b.Received.IsZero())
		case <-ctx.Done():
			t.Fatalf("only %d of %d blocks arrived", i, n)
		}
	}
	require.NoError(t, <-pubDone)
	cancel()
	require.NoError(t, <-srcDone)
	h := src.Health.Snapshot("rig")
	assert.Equal(t, uint64(n), h.Frames)
	assert.Equal(t, uint64(2*n), h.Samples)
	assert.Zero(t, h.Gaps+h.Duplicates+h.Rejected+h.BlocksDropped)
	assert.Zero(t, br.Dropped())
	assert.Equal(t, uint64(n), pub.Published.Load())
}
