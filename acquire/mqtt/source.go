package mqtt

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"liftyard/acquire"
)

// QueueSize is the number of payloads held between the paho handler and the
// decoder. 256 blocks is about 25 s of data at 10 blocks/s: enough to ride
// out a slow disk, small enough that a stuck consumer is noticed.
const QueueSize = 256

// QueueBytes bounds the same queue in bytes: 256 payloads at the size limit
// would hold 256 MiB, 32 MiB is a few seconds of the largest honest blocks.
const QueueBytes = 32 << 20

// DefaultMaxPayload is the largest payload a Source decodes when its
// MaxPayload is 0: 1 MiB holds 16 channels × 4096 samples of JSON numbers
// with room to spare. A larger message is counted (reason "size") and
// dropped before it is copied or decoded.
const DefaultMaxPayload = 1 << 20

// AckGrace is how long a stopped Source keeps its broker connection open for
// the acknowledgements of the blocks it handed out (the store's last commit
// comes after the sources stop). A block not acknowledged by then is
// redelivered by the broker at the next connection with the same client id,
// where it is dropped as a duplicate or stored (the store replaces a block it
// has already).
const AckGrace = 5 * time.Second

// QueueWait is how long the handler of an AckOnStore source waits for room
// in a full queue before it drops the oldest payload. The broker keeps
// every message we have not acknowledged, but it does not hold back new ones
// for us (Debian's mosquitto 2.0.11 sends a burst of them for each
// acknowledgement), so a backlog flushed after an outage would otherwise
// overrun the queue: of 1 000 blocks published at once, 3 % to half were
// dropped without the wait, none with it (TestRecord_BacklogBurstAllStored).
// A second is far below paho's
// ping timeout (5 s), so the link survives the wait.
const QueueWait = time.Second

// Source subscribes to a topic and turns each JSON block payload into an
// acquire.Block. Its Health may be read while it runs. Build one with
// FromRig, or fill the fields; a Source runs once.
//
// # Seq accounting
//
// Every payload carries the sender's seq. The Source remembers the last
// SeqWindow seqs below the highest one seen:
//
//   - the same block again (same seq, same t_us, same readings: a QoS 1
//     copy; seq.go has the rule), also of the epoch before a restart, is
//     dropped and counted in Health.Duplicates;
//   - a jump ahead counts the skipped seqs in Health.Gaps and emits an
//     EventGap, whose Duration is skipped × the block's length when known;
//   - a seq below the highest that was not seen yet arrives late: it is
//     delivered and counted in Late. Health.Gaps only increases (the
//     acquire.Health contract), so the blocks missing now are
//     Gaps − Late (see Missing);
//   - a seq more than SeqWindow below the highest, or a seen seq with a
//     different t_us or other readings, means the sender restarted its
//     counter (or a stale block of an earlier power-up): the block is
//     delivered, the window starts over from it, and an EventGap says so.
//
// Blocks reach out in arrival order, so a late block comes after blocks
// with higher seqs; its T0Us places it on the timeline.
type Source struct {
	Name     string      // rig source name; labels the blocks
	Broker   string      // broker URL: tcp://host:port, or ssl:// (tls://, mqtts://) with TLS
	Topic    string      // topic with block payloads
	ClientID string      // stable client id (persistent session); default "liftyard-" + Name
	Username string      //
	Password string      // never logged
	TLS      *tls.Config // for ssl:// brokers; nil means the system roots
	Logger   *slog.Logger
	Now      func() time.Time // host clock; default time.Now
	// OnEvent, when set, receives disconnects, reconnects (Duration is the
	// outage), seq gaps and restarts, and the first rejected payload of each
	// reason. It is called from paho's and Run's goroutines; it must not block.
	OnEvent acquire.EventFunc

	// MaxPayload is the largest payload decoded, bytes; 0 means
	// DefaultMaxPayload.
	MaxPayload int
	// Channels, when not nil, are the channels this source may carry (the
	// rig file's): series of other channels are dropped and counted in
	// Health.UnknownChannels, and a payload with none of them is rejected
	// (reason "channel").
	Channels []string
	// AckOnStore holds back each QoS 1 acknowledgement until the block's
	// Ack is called (the store committed it) instead of sending it when the
	// payload is queued: a crash before the commit then loses nothing the
	// broker still has, since it redelivers unacknowledged messages to the
	// next session with the same client id. Whoever receives the blocks must
	// then call Ack on each, or the broker stops sending once its in-flight
	// window is full. Dropped and rejected payloads are acknowledged when
	// counted. After Run returns, wait for Settled.
	AckOnStore bool

	Health acquire.Health

	readyOnce sync.Once
	ready     chan struct{}
	subs      atomic.Uint64 // subscriptions established (first one and after each reconnect)

	mu     sync.Mutex
	queue  []received // bounded FIFO, guarded by mu
	queued int        // bytes in queue, guarded by mu
	wake   chan struct{}
	room   chan struct{}   // Run took a payload from the queue (AckOnStore's wait)
	quit   chan struct{}   // closed when Run returns
	known  map[string]bool // Channels as a set; nil: any
	warned atomic.Bool     // an unknown channel was reported

	link       sync.Mutex // guards the fields below (paho calls back from several goroutines)
	everUp     bool       // connected at least once
	downSince  time.Time  // start of the current outage; zero while connected
	downReason string

	seq seqTracker // used by Run's goroutine only

	// Acknowledgement after commit (QoS 1, paho's manual ack): a message
	// is acknowledged when its block's Ack is called (the store committed
	// it) or when it is dropped or rejected (counted). Acks go through one
	// goroutine so that the store's writer never waits on the network.
	acks     chan paho.Message
	unacked  atomic.Int64 // blocks handed to out and not yet acknowledged
	stopped  atomic.Bool  // Run has returned: new messages are left unacknowledged
	settleMu sync.Mutex
	settled  chan struct{}
}

type received struct {
	at      time.Time
	payload []byte
	msg     paho.Message // to acknowledge
}

// Missing returns the blocks currently missing: counted in gaps and not
// (yet) arrived late.
func (s *Source) Missing() uint64 {
	g, l := s.Health.Gaps.Load(), s.Health.Late.Load()
	if l > g {
		return 0
	}
	return g - l
}

func (s *Source) emit(now time.Time, kind acquire.EventKind, d time.Duration, msg string) {
	if s.OnEvent != nil {
		s.OnEvent(acquire.Event{T: now, Source: s.Name, Kind: kind, Duration: d, Message: msg})
	}
}

// Run connects (retrying until the broker answers), subscribes at QoS 1 and
// sends decoded blocks on out until ctx is done; it returns nil then. It
// reconnects and re-subscribes by itself when the link drops. Before the
// first connection, a refusal that retrying cannot fix (bad credentials, an
// untrusted certificate) ends Run with an error wrapping ErrRefused.
// A malformed payload is counted by reason and skipped.
func (s *Source) Run(ctx context.Context, out chan<- acquire.Block) error {
	connected := false
	defer func() {
		if !connected { // never connected: nothing to settle
			close(s.settledChan())
		}
	}()
	if s.Broker == "" || s.Topic == "" {
		return fmt.Errorf("mqtt source %q: broker and topic are required", s.Name)
	}
	broker, isTLS, err := BrokerURL(s.Broker)
	if err != nil {
		return fmt.Errorf("mqtt source %q: %w", s.Name, err)
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
	s.room, s.quit = make(chan struct{}, 1), make(chan struct{})
	id := s.ClientID
	if id == "" {
		id = "liftyard-" + s.Name
	}
	maxPayload := s.MaxPayload
	if maxPayload <= 0 {
		maxPayload = DefaultMaxPayload
	}
	if s.Channels != nil {
		s.known = make(map[string]bool, len(s.Channels))
		for _, c := range s.Channels {
			s.known[c] = true
		}
	}
	s.acks = make(chan paho.Message, QueueSize+ackSlack)
	ackerDone, ackerExited := make(chan struct{}), make(chan struct{})
	go func() { s.acker(ackerDone); close(ackerExited) }()
	handler := func(_ paho.Client, m paho.Message) {
		if s.stopped.Load() {
			return // not ours to take any more: the broker keeps it for the next session
		}
		// Never block here: refuse what is too large before copying it,
		// copy, queue, drop the oldest when full.
		if n := len(m.Payload()); n > maxPayload {
			s.reject(now(), acquire.ReasonSize, fmt.Errorf("payload of %d bytes, the limit is %d", n, maxPayload), log)
			s.ack(m)
			return
		}
		p := append([]byte(nil), m.Payload()...)
		if s.AckOnStore {
			s.waitRoom(len(p))
		}
		s.mu.Lock()
		for len(s.queue) > 0 && (len(s.queue) >= QueueSize || s.queued+len(p) > QueueBytes) {
			s.queued -= len(s.queue[0].payload)
			s.ack(s.queue[0].msg)
			s.queue[0] = received{}
			s.queue = s.queue[1:]
			s.Health.BlocksDropped.Add(1)
		}
		if !s.AckOnStore {
			s.ack(m) // it is in memory: all a consumer without a store can ask
			m = nil
		}
		s.queue = append(s.queue, received{at: now(), payload: p, msg: m})
		s.queued += len(p)
		s.mu.Unlock()
		select {
		case s.wake <- struct{}{}:
		default:
		}
	}
	fatal := make(chan error, 1)
	l := link{broker: broker, clientID: id, username: s.Username, password: s.Password, tls: s.TLS}
	if isTLS && l.tls == nil {
		l.tls = &tls.Config{MinVersion: tls.VersionTLS12}
	}
	opts := l.options()
	opts.SetAutoAckDisabled(true)          // acknowledged after the store commits (Block.Ack)
	opts.SetDefaultPublishHandler(handler) // the session backlog arrives before OnConnect re-subscribes
	opts.SetOnConnectHandler(func(c paho.Client) {
		t := now()
		s.link.Lock()
		again, down, why := s.everUp, s.downSince, s.downReason
		s.everUp, s.downSince, s.downReason = true, time.Time{}, ""
		s.link.Unlock()
		if again {
			s.Health.Reconnects.Add(1)
			var d time.Duration
			if !down.IsZero() {
				d = t.Sub(down)
			}
			log.Info("broker connection back", "source", s.Name, "outage", d)
			s.emit(t, acquire.EventReconnected, d, fmt.Sprintf("connected to %s again after %s (%s)", broker, d.Round(time.Millisecond), why))
		}
		tok := c.Subscribe(s.Topic, 1, handler)
		if err := paho.WaitTokenTimeout(tok, 5*time.Second); err != nil {
			log.Error("subscribe failed", "source", s.Name, "topic", s.Topic, "err", err)
			return
		}
		if st, ok := tok.(*paho.SubscribeToken); ok {
			if qos := st.Result()[s.Topic]; qos == 0x80 {
				log.Error("broker refused the subscription", "source", s.Name, "topic", s.Topic)
				return
			}
		}
		s.subs.Add(1)
		s.readyOnce.Do(func() { close(s.readyChan()) })
	})
	// markDown starts an outage at t unless one is running. It returns the
	// start of the outage and whether this call started it.
	markDown := func(t time.Time, why string) (time.Time, bool) {
		s.link.Lock()
		defer s.link.Unlock()
		if !s.downSince.IsZero() {
			if why != "" && s.downReason == "" {
				s.downReason = why
			}
			return s.downSince, false
		}
		s.downSince, s.downReason = t, why
		return t, true
	}
	opts.SetReconnectingHandler(func(paho.Client, *paho.ClientOptions) {
		// Runs before every reconnect attempt, always before OnConnect:
		// it makes sure the outage has a start even if the lost handler
		// has not run yet.
		markDown(now(), "")
	})
	opts.SetConnectionLostHandler(func(c paho.Client, err error) {
		why := "connection lost"
		if err != nil {
			why = err.Error()
		}
		at := now()
		if !c.IsConnectionOpen() {
			// paho runs this handler in its own goroutine, so on a very
			// quick reconnect it can come after OnConnect: then the outage
			// is over and must not be restarted.
			at, _ = markDown(at, why)
		}
		log.Warn("broker connection lost", "source", s.Name, "err", why)
		s.emit(at, acquire.EventDisconnected, 0, fmt.Sprintf("lost %s: %s; reconnecting", broker, why))
	})
	everUp := func() bool {
		s.link.Lock()
		defer s.link.Unlock()
		return s.everUp
	}
	opts.SetConnectionNotificationHandler(refusalWatch(broker, fatal, log, everUp, func(err error) {
		// Visible from the first failed attempt: an unreachable broker
		// must not look like a quiet one.
		if s.Health.ConnectFailures.Add(1) == 1 && !everUp() {
			log.Warn("cannot reach the broker; retrying", "source", s.Name, "broker", broker, "err", err)
			s.emit(now(), acquire.EventDisconnected, 0, fmt.Sprintf("cannot reach %s: %v; retrying until it answers", broker, err))
		}
	}))
	client := paho.NewClient(opts)
	client.AddRoute(s.Topic, handler)
	client.Connect()
	connected = true
	defer func() {
		s.stopped.Store(true)
		close(s.quit)
		go s.settle(client, ackerDone, ackerExited)
	}()

	for {
		select {
		case <-ctx.Done():
			return nil
		case err := <-fatal:
			log.Error("broker refused", "source", s.Name, "err", err)
			return fmt.Errorf("mqtt source %q: %w", s.Name, err)
		case <-s.wake:
		}
		for {
			s.mu.Lock()
			if len(s.queue) == 0 {
				s.mu.Unlock()
				break
			}
			r := s.queue[0]
			s.queue[0] = received{}
			s.queue = s.queue[1:]
			s.queued -= len(r.payload)
			s.mu.Unlock()
			select {
			case s.room <- struct{}{}:
			default:
			}
			b, ok := s.accept(r, log)
			if !ok {
				s.ack(r.msg)
				continue
			}
			if r.msg != nil {
				b.Ack = s.blockAck(r.msg)
				s.unacked.Add(1)
			}
			select {
			case out <- b:
			case <-ctx.Done():
				if r.msg != nil {
					s.unacked.Add(-1) // not handed out: the broker redelivers it
				}
				return nil
			}
		}
	}
}

// waitRoom waits, at most QueueWait, until the queue has room for n more
// bytes, or Run has returned.
func (s *Source) waitRoom(n int) {
	deadline := time.NewTimer(QueueWait)
	defer deadline.Stop()
	for {
		s.mu.Lock()
		full := len(s.queue) >= QueueSize || (len(s.queue) > 0 && s.queued+n > QueueBytes)
		s.mu.Unlock()
		if !full {
			return
		}
		select {
		case <-s.room:
		case <-s.quit:
			return
		case <-deadline.C:
			return
		}
	}
}

// ackSlack is room in the ack queue beyond the payload queue: blocks on
// their way through the pipeline and the store's batch.
const ackSlack = 4096

// ack queues m's acknowledgement without waiting. If the queue is full (the
// network is stuck), a goroutine of its own sends it.
func (s *Source) ack(m paho.Message) {
	if m == nil {
		return
	}
	select {
	case s.acks <- m:
	default:
		go m.Ack()
	}
}

// blockAck returns the Ack of a block handed out: it acknowledges m once.
func (s *Source) blockAck(m paho.Message) func() {
	var once sync.Once
	return func() {
		once.Do(func() {
			s.ack(m)
			s.unacked.Add(-1)
		})
	}
}

// acker sends acknowledgements in the order they were queued until done is
// closed, then sends what is queued and returns.
func (s *Source) acker(done <-chan struct{}) {
	for {
		select {
		case m := <-s.acks:
			m.Ack()
		case <-done:
			for {
				select {
				case m := <-s.acks:
					m.Ack()
				default:
					return
				}
			}
		}
	}
}

// settle runs after Run has returned: it keeps the connection until every
// block handed out is acknowledged, or AckGrace has passed, then sends the
// queued acknowledgements, disconnects and closes Settled.
func (s *Source) settle(client paho.Client, ackerDone, ackerExited chan struct{}) {
	deadline := time.Now().Add(AckGrace)
	for s.unacked.Load() > 0 && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	close(ackerDone)
	select { // paho takes an ack at once unless its connection is stuck
	case <-ackerExited:
	case <-time.After(time.Second):
	}
	client.Disconnect(250)
	close(s.settledChan())
}

// Settled returns a channel that is closed once a Source whose Run has
// returned has acknowledged what the store committed (at most AckGrace
// after Run returned) and closed its connection. Wait for it before the
// process exits, or the broker redelivers the last blocks to the next
// session.
func (s *Source) Settled() <-chan struct{} { return s.settledChan() }

func (s *Source) settledChan() chan struct{} {
	s.settleMu.Lock()
	defer s.settleMu.Unlock()
	if s.settled == nil {
		s.settled = make(chan struct{})
	}
	return s.settled
}

// Subscriptions returns how often the subscription was established: 1 after
// the first connect, and one more after each reconnect. Blocks published
// after it went up reach this source.
func (s *Source) Subscriptions() uint64 { return s.subs.Load() }

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

// reject counts a payload refused for reason; the first of each reason is
// logged and reported as an event.
func (s *Source) reject(at time.Time, reason acquire.Reason, err error, log *slog.Logger) {
	if s.Health.Rejected(reason) == 0 {
		log.Warn("rejected payload", "source", s.Name, "reason", reason, "err", err)
		s.emit(at, acquire.EventRejected, 0, fmt.Sprintf("first payload rejected for %s: %v (later ones are counted)", reason, err))
	}
	s.Health.Reject(reason)
}

// accept decodes one payload, drops the channels the rig does not declare
// and does the seq accounting.
func (s *Source) accept(r received, log *slog.Logger) (acquire.Block, bool) {
	b, err := acquire.DecodePayload(s.Name, r.payload)
	if err != nil {
		var pe *acquire.PayloadError
		reason := acquire.ReasonParse
		if errors.As(err, &pe) {
			reason = pe.Reason
		}
		s.reject(r.at, reason, err, log)
		return b, false
	}
	if s.known != nil {
		kept := b.Series[:0]
		var unknown []string
		for _, ser := range b.Series {
			if s.known[ser.Channel] {
				kept = append(kept, ser)
			} else if len(unknown) < 3 {
				unknown = append(unknown, ser.Channel)
			}
		}
		if n := len(b.Series) - len(kept); n > 0 {
			s.Health.UnknownChannels.Add(uint64(n))
			if !s.warned.Swap(true) {
				log.Warn("payload names channels the rig file does not declare; they are dropped", "source", s.Name, "channels", unknown)
				s.emit(r.at, acquire.EventRejected, 0, fmt.Sprintf("%d channel(s) not in the rig file, e.g. %s, dropped (later ones are counted)", n, excerpt(unknown)))
			}
		}
		b.Series = kept
		if len(kept) == 0 {
			s.reject(r.at, acquire.ReasonChannel, errors.New("none of its channels is declared in the rig file"), log)
			return b, false
		}
	}
	v, missing := s.seq.observe(b.Seq, b.T0Us, blockSum(&b), int64(b.Len())*b.DtUs)
	switch v {
	case seqDuplicate:
		s.Health.Duplicates.Add(1)
		return b, false
	case seqJump:
		s.Health.Gaps.Add(missing)
		// Duration: missing × this block's length, 0 (unknown) if that
		// does not fit in a Duration (a wild jump).
		var d time.Duration
		if blockUs := int64(b.Len()) * b.DtUs; blockUs > 0 && b.DtUs < math.MaxInt64/int64(b.Len()) &&
			missing < uint64(math.MaxInt64/blockUs/int64(time.Microsecond)) {
			d = time.Duration(missing) * time.Duration(blockUs) * time.Microsecond
		}
		s.emit(r.at, acquire.EventGap, d, fmt.Sprintf("%d block(s) missing before seq %d (about %s of data)", missing, b.Seq, d))
	case seqLate:
		s.Health.Late.Add(1)
	case seqRestart:
		log.Warn("sender restarted its seq counter", "source", s.Name, "seq", b.Seq)
		s.emit(r.at, acquire.EventGap, 0, fmt.Sprintf("seq went back to %d: the sender restarted its counter; counting starts over", b.Seq))
	}
	b.Received = r.at
	s.Health.Frames.Add(1)
	s.Health.Samples.Add(uint64(b.Len()))
	return b, true
}

// excerpt lists a few names for a message, each cut to 40 characters.
func excerpt(names []string) string {
	out := make([]string, len(names))
	for i, n := range names {
		if len(n) > 40 {
			n = n[:40] + "…"
		}
		out[i] = fmt.Sprintf("%q", n)
	}
	return strings.Join(out, ", ")
}
