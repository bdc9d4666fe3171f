package mqtt

import (
	"errors"
	"fmt"
	"log/slog"
	"net"
	"sync"
	"sync/atomic"
	"time"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/hooks/auth"
	"github.com/mochi-mqtt/server/v2/listeners"
)

// Broker is an in-process MQTT broker for the demo and tests. It listens on a
// loopback address only, because it lets every client in.
type Broker struct {
	srv  *mochi.Server
	addr string
	once sync.Once
	err  error
}

// StartBroker starts a broker on addr ("127.0.0.1:0" picks a free port).
// logger may be nil (silence). Close stops it.
func StartBroker(addr string, logger *slog.Logger) (*Broker, error) {
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return nil, fmt.Errorf("broker address %q: %w", addr, err)
	}
	if ip := net.ParseIP(host); host != "localhost" && (ip == nil || !ip.IsLoopback()) {
		return nil, fmt.Errorf("broker address %q: the embedded broker admits every client, so it listens on loopback only", addr)
	}
	if logger == nil {
		logger = slog.New(slog.DiscardHandler)
	}
	srv := mochi.New(&mochi.Options{InlineClient: false, Logger: logger})
	if err := srv.AddHook(new(auth.AllowHook), nil); err != nil {
		return nil, fmt.Errorf("broker auth hook: %w", err)
	}
	l := listeners.NewTCP(listeners.Config{ID: "liftyard", Address: addr})
	if err := srv.AddListener(l); err != nil {
		return nil, fmt.Errorf("broker listen on %s: %w", addr, err)
	}
	if err := srv.Serve(); err != nil {
		return nil, fmt.Errorf("broker serve: %w", err)
	}
	return &Broker{srv: srv, addr: l.Address()}, nil
}

// URL returns the broker's address as tcp://host:port.
func (b *Broker) URL() string { return "tcp://" + b.addr }

// Addr returns host:port.
func (b *Broker) Addr() string { return b.addr }

// Dropped returns the messages the broker itself dropped (full client queues
// or in-flight windows), so a test can tell broker loss from ours.
func (b *Broker) Dropped() int64 {
	return atomic.LoadInt64(&b.srv.Info.MessagesDropped) + atomic.LoadInt64(&b.srv.Info.InflightDropped)
}

// Close stops the broker. It may be called more than once. A broker that does
// not stop within 5 s is abandoned with an error rather than hanging the
// caller (mochi's Close waits for every client goroutine).
func (b *Broker) Close() error {
	b.once.Do(func() {
		done := make(chan error, 1)
		go func() { done <- b.srv.Close() }()
		select {
		case b.err = <-done:
		case <-time.After(5 * time.Second):
			b.err = errors.New("embedded broker did not stop within 5 s")
		}
	})
	return b.err
}
