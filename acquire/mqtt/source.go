package mqtt

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"liftyard/acquire"
)

// QueueSize is the number of payloads held between the paho handler and the
// decoder. 256 blocks is about 25 s of data at 10 blocks/s: enough to ride
// out a slow disk, small enough that a stuck consumer is noticed.
const QueueSize = 256

// Source subscribes to a topic and turns each JSON block payload into an
// acquire.Block. Its Health may be read while it runs.
type Source struct {
	Name     string // rig source name; labels the blocks
	Broker   string // broker URL, tcp://host:port
	Topic    string // topic with block payloads
	ClientID string // stable client id (persistent session); default "liftyard-" + Name
	Username string
	Password string // never logged
	Logger   *slog.Logger
	Now      func() time.Time // host clock; default time.Now

	Health acquire.Health

	readyOnce sync.Once
	ready     chan struct{}

	mu      sync.Mutex
	queue   []received // bounded FIFO, guarded by mu
	wake    chan struct{}
	lastSeq uint64
	haveSeq bool
	seen    map[uint64]struct{} // recent seqs, for duplicate detection
}

type received struct {
	at      time.Time
	payload []byte
}

// seenWindow is how many recent seq values are remembered to spot duplicates:
// QoS 1 redelivers within the in-flight window, which is far smaller.
const seenWindow = 4096

// Run connects (retrying until the broker answers), subscribes at QoS 1 and
// sends decoded blocks on out until ctx is done. A malformed payload is
// counted by reason and skipped. Run returns nil when ctx is cancelled.
func (s *Source) Run(ctx context.Context, out chan<- acquire.Block) error {
	if s.Broker == "" || s.Topic == "" {
		return fmt.Errorf("mqtt source %q: broker and topic are required", s.Name)
	}
	log := s.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	now := s.Now
	if now == nil {
		now = time.Now
	}
	s.wake = make(chan struct{}, 1)
	s.seen = make(map[uint64]struct{}, seenWindow)
	id := s.ClientID
	if id == "" {
		id = "liftyard-" + s.Name
	}
	handler := func(_ paho.Client, m paho.Message) {
		// Never block here: copy, queue, drop the oldest when full.
		p := append([]byte(nil), m.Payload()...)
		s.mu.Lock()
		if len(s.queue) >= QueueSize {
			s.queue = s.queue[1:]
			s.Health.BlocksDropped.Add(1)
		}
		s.queue = append(s.queue, received{at: now(), payload: p})
		s.mu.Unlock()
		select {
		case s.wake <- struct{}{}:
		default:
		}
	}
	var connects sync.Mutex
	connected := 0
	opts := paho.NewClientOptions().
		AddBroker(s.Broker).SetClientID(id).
		SetUsername(s.Username).SetPassword(s.Password).
		SetCleanSession(false).SetOrderMatters(true).
		SetStore(paho.NewOrderedMemoryStore()).
		SetConnectRetry(true).SetConnectRetryInterval(time.Second).
		SetAutoReconnect(true).SetMaxReconnectInterval(5 * time.Second).
		SetKeepAlive(10 * time.Second).SetPingTimeout(5 * time.Second).
		SetConnectTimeout(5 * time.Second)
	opts.SetDefaultPublishHandler(handler)
	opts.SetOnConnectHandler(func(c paho.Client) {
		connects.Lock()
		connected++
		if connected > 1 {
			s.Health.Reconnects.Add(1)
		}
		connects.Unlock()
		t := c.Subscribe(s.Topic, 1, handler)
		if err := paho.WaitTokenTimeout(t, 5*time.Second); err != nil {
			log.Error("subscribe failed", "source", s.Name, "topic", s.Topic, "err", err)
			return
		}
		s.readyOnce.Do(func() { close(s.readyChan()) })
	})
	opts.SetConnectionLostHandler(func(_ paho.Client, err error) {
		log.Warn("broker connection lost", "source", s.Name, "err", err)
	})
	client := paho.NewClient(opts)
	client.AddRoute(s.Topic, handler)
	tok := client.Connect()
	defer client.Disconnect(250)
	go func() {
		<-tok.Done()
		if err := tok.Error(); err != nil && ctx.Err() == nil {
			log.Error("broker connect failed", "source", s.Name, "broker", s.Broker, "err", err)
		}
	}()

	for {
		select {
		case <-ctx.Done():
			return nil
		case <-s.wake:
		}
		for {
			s.mu.Lock()
			if len(s.queue) == 0 {
				s.mu.Unlock()
				break
			}
			r := s.queue[0]
			s.queue = s.queue[1:]
			s.mu.Unlock()
			b, ok := s.accept(r, log)
			if !ok {
				continue
			}
			select {
			case out <- b:
			case <-ctx.Done():
				return nil
			}
		}
	}
}

// Ready returns a channel that is closed once the first subscription is in
// place: blocks published after that reach this source.
func (s *Source) Ready() <-chan struct{} { return s.readyChan() }

func (s *Source) readyChan() chan struct{} {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.ready == nil {
		s.ready = make(chan struct{})
	}
	return s.ready
}

// accept decodes one payload and does the seq accounting.
func (s *Source) accept(r received, log *slog.Logger) (acquire.Block, bool) {
	b, err := acquire.DecodePayload(s.Name, r.payload)
	if err != nil {
		var pe *acquire.PayloadError
		reason := acquire.ReasonParse
		if errors.As(err, &pe) {
			reason = pe.Reason
		}
		if s.Health.Rejected(reason) == 0 {
			log.Warn("rejected payload", "source", s.Name, "reason", reason, "err", err)
		}
		s.Health.Reject(reason)
		return b, false
	}
	if _, dup := s.seen[b.Seq]; dup {
		s.Health.Duplicates.Add(1)
		return b, false
	}
	if len(s.seen) >= seenWindow {
		clear(s.seen)
	}
	s.seen[b.Seq] = struct{}{}
	if s.haveSeq && b.Seq > s.lastSeq+1 {
		s.Health.Gaps.Add(b.Seq - s.lastSeq - 1)
	}
	if !s.haveSeq || b.Seq > s.lastSeq {
		s.lastSeq, s.haveSeq = b.Seq, true
	}
	b.Received = r.at
	s.Health.Frames.Add(1)
	s.Health.Samples.Add(uint64(b.Len()))
	return b, true
}
