package mqtt

import (
	"context"
	"crypto/tls"
	"fmt"
	"log/slog"
	"sync/atomic"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"liftyard/acquire"
)

// Publisher sends blocks as JSON payloads at QoS 1. It is the device side of
// the wire format: the simulator uses it, and so can a bridge from other
// hardware.
type Publisher struct {
	Broker   string
	Topic    string
	ClientID string // stable client id; default "liftyard-pub"
	Username string
	Password string      // never logged
	TLS      *tls.Config // for ssl:// brokers; nil means the system roots
	Logger   *slog.Logger

	Published atomic.Uint64 // payloads handed to paho
	Failed    atomic.Uint64 // payloads paho refused or timed out on
}

// Run connects (retrying until the broker answers) and publishes every block
// received on in, in order, until in is closed or ctx is done. Blocks that
// arrive while the broker is unreachable are queued by paho's ordered store
// and sent after the reconnect.
func (p *Publisher) Run(ctx context.Context, in <-chan acquire.Block) error {
	log := p.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	id := p.ClientID
	if id == "" {
		id = "liftyard-pub"
	}
	broker, isTLS, err := BrokerURL(p.Broker)
	if err != nil {
		return fmt.Errorf("publisher: %w", err)
	}
	l := link{broker: broker, clientID: id, username: p.Username, password: p.Password, tls: p.TLS}
	if isTLS && l.tls == nil {
		l.tls = &tls.Config{MinVersion: tls.VersionTLS12}
	}
	fatal := make(chan error, 1)
	var up atomic.Bool
	opts := l.options()
	opts.SetOnConnectHandler(func(paho.Client) { up.Store(true) })
	opts.SetConnectionNotificationHandler(refusalWatch(broker, fatal, log, up.Load, nil))
	client := paho.NewClient(opts)
	tok := client.Connect()
	defer client.Disconnect(250)
	select {
	case <-tok.Done():
		if err := tok.Error(); err != nil {
			return fmt.Errorf("publisher connect to %s: %w", broker, err)
		}
	case err := <-fatal:
		return fmt.Errorf("publisher: %w", err)
	case <-ctx.Done():
		return nil
	}
	for {
		select {
		case <-ctx.Done():
			return nil
		case b, ok := <-in:
			if !ok {
				return nil
			}
			data, err := acquire.EncodePayload(&b)
			if err != nil {
				p.Failed.Add(1)
				log.Error("encode block", "err", err)
				continue
			}
			t := client.Publish(p.Topic, 1, false, data)
			// Wait (bounded) for the PUBACK so the publisher paces itself to
			// the broker. A timeout is counted, but the message stays in the
			// ordered store and is resent after a reconnect.
			select {
			case <-t.Done():
				if t.Error() != nil {
					p.Failed.Add(1)
					continue
				}
			case <-time.After(10 * time.Second):
				p.Failed.Add(1)
				continue
			case <-ctx.Done():
				return nil
			}
			p.Published.Add(1)
		}
	}
}
