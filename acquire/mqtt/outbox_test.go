package mqtt_test

import (
	"context"
	"fmt"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire/mqtt"
	"liftyard/internal/mosquittotest"
)

// Ensure that Offer never blocks while the broker is down, that a full
// queue drops the oldest messages with an exact count, and that the rest
// arrive in order once the broker is back.
//
// The site consumer has a persistent session on a mosquitto that saves it
// (persistence true), so it is subscribed before, during and after the
// outage without racing the outbox.
func TestOutbox_BrokerDownThenUp(t *testing.T) {
	br := mosquittotest.Start(t, mosquittotest.Persistent())
	ctx, cancel := context.WithTimeout(t.Context(), 20*time.Second)
	defer cancel()

	got := make(chan string, 100)
	handler := func(_ paho.Client, m paho.Message) { got <- m.Topic() + " " + string(m.Payload()) }
	opts := paho.NewClientOptions().AddBroker(br.URL()).SetClientID("site-consumer").
		SetCleanSession(false).SetAutoReconnect(true).SetMaxReconnectInterval(500 * time.Millisecond).
		SetConnectRetry(true).SetConnectRetryInterval(200 * time.Millisecond).SetKeepAlive(10 * time.Second)
	opts.SetDefaultPublishHandler(handler)
	consumer := paho.NewClient(opts)
	require.NoError(t, paho.WaitTokenTimeout(consumer.Connect(), 5*time.Second))
	defer consumer.Disconnect(100)
	require.NoError(t, paho.WaitTokenTimeout(consumer.Subscribe("yard/#", 1, handler), 5*time.Second))

	br.Stop()

	ob := &mqtt.Outbox{Broker: br.URL(), ClientID: "liftyard-publish-tank", Queue: 10}
	runDone := make(chan error, 1)
	go func() { runDone <- ob.Run(ctx) }()
	offered := make(chan []bool, 1)
	go func() {
		var oks []bool
		for i := range 15 {
			oks = append(oks, ob.Offer("yard/tank/live", fmt.Appendf(nil, `{"n":%d}`, i)))
		}
		offered <- oks
	}()
	select {
	case oks := <-offered:
		want := make([]bool, 15)
		for i := range 10 {
			want[i] = true
		}
		assert.Equal(t, want, oks, "Offer reports a drop once the queue is full")
	case <-time.After(5 * time.Second):
		t.Fatal("Offer blocked with the broker down")
	}
	assert.Equal(t, uint64(5), ob.Dropped.Load())
	assert.Equal(t, 10, ob.Pending())
	assert.Zero(t, ob.Published.Load())

	br.Restart()
	for i := 5; i < 15; i++ {
		select {
		case m := <-got:
			require.Equal(t, fmt.Sprintf(`yard/tank/live {"n":%d}`, i), m, "messages out of order or the oldest not dropped")
		case <-ctx.Done():
			t.Fatalf("message %d never arrived", i)
		}
	}
	select {
	case m := <-got:
		t.Fatalf("unexpected extra message %s", m)
	case <-time.After(200 * time.Millisecond):
	}
	deadline := time.Now().Add(5 * time.Second)
	for ob.Published.Load() < 10 && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	assert.Equal(t, uint64(10), ob.Published.Load())
	assert.Equal(t, uint64(5), ob.Dropped.Load())
	assert.Zero(t, ob.Failed.Load())
	assert.Zero(t, ob.Pending())

	// Once connected, new messages go straight through.
	assert.True(t, ob.Offer("yard/tank/segments", []byte(`{"segment":1}`)))
	select {
	case m := <-got:
		assert.Equal(t, `yard/tank/segments {"segment":1}`, m)
	case <-ctx.Done():
		t.Fatal("message after reconnect never arrived")
	}
	cancel()
	assert.NoError(t, <-runDone)
}

// Ensure that an Outbox pointed at a broker that refuses it says so.
func TestOutbox_Refused(t *testing.T) {
	br := mosquittotest.Start(t, mosquittotest.Config("allow_anonymous false"))
	ctx, cancel := context.WithTimeout(t.Context(), 10*time.Second)
	defer cancel()
	ob := &mqtt.Outbox{Broker: br.URL(), ClientID: "refused"}
	ob.Offer("x", []byte("1"))
	err := ob.Run(ctx)
	assert.ErrorIs(t, err, mqtt.ErrRefused)
	assert.Contains(t, err.Error(), "outbox:")
	assert.Equal(t, 1, ob.Pending(), "nothing is lost from the queue")
}
