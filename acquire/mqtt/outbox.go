package mqtt

import (
	"context"
	"crypto/tls"
	"fmt"
	"log/slog"
	"sync"
	"sync/atomic"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
)

// DefaultOutboxQueue is the Outbox queue length when Queue is 0: at one
// live-results message a second, about 17 minutes of broker outage.
const DefaultOutboxQueue = 1024

// publishWait bounds the wait for one PUBACK. A message whose ack does not
// come stays in paho's ordered store and is sent again after a reconnect.
const publishWait = 30 * time.Second

// Outbox publishes messages to a broker at QoS 1 from one goroutine, in the
// order they were offered, for consumers elsewhere on a site (docs/design.md §7:
// live results to the site broker). Offer never blocks: while the broker is
// away or slow, messages wait in a bounded queue, and when it is full the
// oldest is dropped and counted. Build one with OutboxFromRig or fill the
// fields; call Run once.
type Outbox struct {
	Broker   string // tcp://host:port, or ssl:// (tls://, mqtts://) with TLS
	ClientID string // stable client id; default "liftyard-outbox"
	Username string
	Password string      // never logged
	TLS      *tls.Config // for ssl:// brokers; nil means the system roots
	Logger   *slog.Logger
	Queue    int // messages held before the oldest is dropped; 0 means DefaultOutboxQueue

	Published atomic.Uint64 // messages the broker acknowledged (see the paho caveat in the package doc)
	Dropped   atomic.Uint64 // messages dropped, oldest first, because the queue was full
	Failed    atomic.Uint64 // messages paho refused (they are not retried)

	init sync.Once
	mu   sync.Mutex
	q    []outMsg // FIFO, guarded by mu
	// sending is set while a message taken from q awaits its ack (guarded by mu).
	sending bool
	wake    chan struct{}
}

type outMsg struct {
	topic   string
	payload []byte
}

func (o *Outbox) setup() {
	o.init.Do(func() { o.wake = make(chan struct{}, 1) })
}

func (o *Outbox) capacity() int {
	if o.Queue > 0 {
		return o.Queue
	}
	return DefaultOutboxQueue
}

// Offer queues payload for topic and returns at once, before or while Run
// runs. It reports false when the queue was full and the oldest message was
// dropped to make room (counted in Dropped). The Outbox keeps payload; the
// caller must not change it afterwards.
func (o *Outbox) Offer(topic string, payload []byte) bool {
	o.setup()
	ok := true
	o.mu.Lock()
	if len(o.q) >= o.capacity() {
		o.q[0] = outMsg{}
		o.q = o.q[1:]
		o.Dropped.Add(1)
		ok = false
	}
	o.q = append(o.q, outMsg{topic, payload})
	o.mu.Unlock()
	select {
	case o.wake <- struct{}{}:
	default:
	}
	return ok
}

// Pending returns the number of messages waiting in the queue, plus the one
// being published until the broker has acknowledged it.
func (o *Outbox) Pending() int {
	o.mu.Lock()
	defer o.mu.Unlock()
	n := len(o.q)
	if o.sending {
		n++
	}
	return n
}

// Run connects (retrying until the broker answers, and reconnecting when
// the link drops) and publishes queued messages in order, one at a time,
// each after the previous one was acknowledged. It returns nil when ctx is
// done; messages still queued then are not sent. Before the first
// connection, a refusal that retrying cannot fix (bad credentials, an
// untrusted certificate) ends Run with an error wrapping ErrRefused.
func (o *Outbox) Run(ctx context.Context) error {
	o.setup()
	broker, isTLS, err := BrokerURL(o.Broker)
	if err != nil {
		return fmt.Errorf("outbox: %w", err)
	}
	log := o.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	id := o.ClientID
	if id == "" {
		id = "liftyard-outbox"
	}
	l := link{broker: broker, clientID: id, username: o.Username, password: o.Password, tls: o.TLS}
	if isTLS && l.tls == nil {
		l.tls = &tls.Config{MinVersion: tls.VersionTLS12}
	}
	var everUp atomic.Bool
	fatal := make(chan error, 1)
	opts := l.options()
	opts.SetOnConnectHandler(func(paho.Client) {
		if everUp.Swap(true) {
			log.Info("outbox connected again", "broker", broker)
		}
	})
	opts.SetConnectionLostHandler(func(_ paho.Client, err error) {
		log.Warn("outbox lost the broker; queueing", "broker", broker, "err", err)
	})
	opts.SetConnectionNotificationHandler(refusalWatch(broker, fatal, log, everUp.Load, nil))
	client := paho.NewClient(opts)
	client.Connect()
	defer client.Disconnect(250)

	tick := time.NewTicker(50 * time.Millisecond)
	defer tick.Stop()
	for {
		// Hold messages in our bounded queue (not in paho's unbounded
		// store) while the broker is away.
		for !client.IsConnectionOpen() {
			select {
			case <-ctx.Done():
				return nil
			case err := <-fatal:
				return fmt.Errorf("outbox: %w", err)
			case <-tick.C:
			}
		}
		o.mu.Lock()
		var m outMsg
		have := len(o.q) > 0
		if have {
			m = o.q[0]
			o.q[0] = outMsg{}
			o.q = o.q[1:]
			o.sending = true
		}
		o.mu.Unlock()
		if !have {
			select {
			case <-ctx.Done():
				return nil
			case <-o.wake:
			case <-tick.C: // notice a lost link while idle
			}
			continue
		}
		t := client.Publish(m.topic, 1, false, m.payload)
		done := func() { o.mu.Lock(); o.sending = false; o.mu.Unlock() }
		select {
		case <-t.Done():
			done()
			if err := t.Error(); err != nil {
				o.Failed.Add(1)
				log.Error("outbox publish failed", "topic", m.topic, "err", err)
				continue
			}
			o.Published.Add(1)
		case <-time.After(publishWait):
			done()
			// Still in paho's ordered store: it goes out after a reconnect.
			log.Warn("outbox: no ack yet; paho resends after a reconnect", "topic", m.topic)
		case <-ctx.Done():
			return nil
		}
	}
}
