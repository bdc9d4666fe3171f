package mqtt_test

import (
	"context"
	"fmt"
	"net"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/mqtt"
	"liftyard/internal/mosquittotest"
)

// testBroker is a real broker on 127.0.0.1 that a test can restart.
type testBroker interface {
	URL() string
	// Restart stops the broker, waits outage, and starts it on the same port.
	Restart(t *testing.T, outage time.Duration)
	// Dropped returns messages the broker itself dropped, or 0 if it cannot tell.
	Dropped() int64
}

// embedded is the mochi broker of the demo.
type embedded struct {
	mu sync.Mutex
	b  *mqtt.Broker
}

func (e *embedded) URL() string { e.mu.Lock(); defer e.mu.Unlock(); return e.b.URL() }
func (e *embedded) Dropped() int64 {
	e.mu.Lock()
	defer e.mu.Unlock()
	return e.b.Dropped()
}
func (e *embedded) Restart(t *testing.T, outage time.Duration) {
	e.mu.Lock()
	defer e.mu.Unlock()
	require.NoError(t, e.b.Close())
	time.Sleep(outage)
	b, err := mqtt.StartBroker(e.b.Addr(), nil)
	require.NoError(t, err)
	e.b = b
}

// debian is Debian's mosquitto, run by the test.
type debian struct{ b *mosquittotest.Broker }

func (d debian) URL() string    { return d.b.URL() }
func (d debian) Dropped() int64 { return 0 }
func (d debian) Restart(t *testing.T, outage time.Duration) {
	d.b.Stop()
	time.Sleep(outage)
	d.b.Restart()
}

var brokerKinds = []struct {
	name  string
	start func(t *testing.T) testBroker
}{
	{"embedded", func(t *testing.T) testBroker {
		b, err := mqtt.StartBroker("127.0.0.1:0", nil)
		require.NoError(t, err)
		e := &embedded{b: b}
		t.Cleanup(func() { e.mu.Lock(); defer e.mu.Unlock(); assert.NoError(t, e.b.Close()) })
		return e
	}},
	{"mosquitto", func(t *testing.T) testBroker { return debian{mosquittotest.Start(t)} }},
}

func block(seq uint64) acquire.Block {
	return acquire.Block{Seq: seq, T0Us: int64(seq) * 1000, DtUs: 100, Series: []acquire.Series{
		{Channel: "a", Raw: []float64{float64(seq), float64(seq) + 0.5}},
	}}
}

// blockLen is the data one block() covers: 2 samples × 100 µs.
const blockLen = 200 * time.Microsecond

// events collects source events; safe for paho's goroutines.
type events struct {
	mu  sync.Mutex
	all []acquire.Event
}

func (e *events) add(ev acquire.Event) { e.mu.Lock(); e.all = append(e.all, ev); e.mu.Unlock() }
func (e *events) count() int           { e.mu.Lock(); defer e.mu.Unlock(); return len(e.all) }
func (e *events) of(kind acquire.EventKind) []acquire.Event {
	e.mu.Lock()
	defer e.mu.Unlock()
	var out []acquire.Event
	for _, ev := range e.all {
		if ev.Kind == kind {
			out = append(out, ev)
		}
	}
	return out
}

// running is a Source started by a test.
type running struct {
	src  *mqtt.Source
	out  chan acquire.Block
	done chan error
	stop context.CancelFunc
	ev   *events
}

// runSource starts src and waits until it has subscribed.
func runSource(t *testing.T, ctx context.Context, src *mqtt.Source) *running {
	t.Helper()
	ctx, cancel := context.WithCancel(ctx)
	r := &running{src: src, out: make(chan acquire.Block, 1024), done: make(chan error, 1), stop: cancel, ev: &events{}}
	src.OnEvent = r.ev.add
	go func() { r.done <- src.Run(ctx, r.out) }()
	t.Cleanup(func() { cancel(); <-r.done })
	select {
	case <-src.Ready():
	case err := <-r.done:
		r.done <- err
		t.Fatalf("source ended before subscribing: %v", err)
	case <-ctx.Done():
		t.Fatal("source never subscribed")
	}
	return r
}

// halt stops the source and returns Run's result.
func (r *running) halt() error {
	r.stop()
	err := <-r.done
	r.done <- err // for the cleanup
	return err
}

// next receives n blocks and returns their seqs.
func (r *running) next(t *testing.T, ctx context.Context, n int) []uint64 {
	t.Helper()
	var seqs []uint64
	for len(seqs) < n {
		select {
		case b := <-r.out:
			require.Equal(t, r.src.Name, b.Source)
			require.Equal(t, []float64{float64(b.Seq), float64(b.Seq) + 0.5}, b.Series[0].Raw, "payload of seq %d", b.Seq)
			require.False(t, b.Received.IsZero())
			seqs = append(seqs, b.Seq)
		case <-ctx.Done():
			t.Fatalf("only %d of %d blocks arrived: %v", len(seqs), n, seqs)
		}
	}
	return seqs
}

// quiet asserts that no further block arrives within d.
func (r *running) quiet(t *testing.T, d time.Duration) {
	t.Helper()
	select {
	case b := <-r.out:
		t.Fatalf("unexpected block seq %d", b.Seq)
	case <-time.After(d):
	}
}

// rawClient connects a plain paho client (no liftyard code) for publishing
// hand-made payloads.
func rawClient(t *testing.T, url, id string) paho.Client {
	t.Helper()
	c := paho.NewClient(paho.NewClientOptions().AddBroker(url).SetClientID(id).
		SetStore(paho.NewOrderedMemoryStore()).SetKeepAlive(10 * time.Second).SetConnectTimeout(5 * time.Second))
	require.NoError(t, paho.WaitTokenTimeout(c.Connect(), 5*time.Second))
	t.Cleanup(func() { c.Disconnect(100) })
	return c
}

func publishRaw(t *testing.T, c paho.Client, topic string, seqs ...uint64) {
	t.Helper()
	for _, seq := range seqs {
		b := block(seq)
		data, err := acquire.EncodePayload(&b)
		require.NoError(t, err)
		require.NoError(t, paho.WaitTokenTimeout(c.Publish(topic, 1, false, data), 5*time.Second))
	}
}

func seqRange(from, to uint64) []uint64 {
	var s []uint64
	for i := from; i < to; i++ {
		s = append(s, i)
	}
	return s
}

// Ensure that blocks published through a real broker arrive in order and
// complete, with nothing dropped by the broker or by us, on both brokers.
func TestPublisherToSource(t *testing.T) {
	for _, kind := range brokerKinds {
		t.Run(kind.name, func(t *testing.T) {
			br := kind.start(t)
			ctx, cancel := context.WithTimeout(t.Context(), 20*time.Second)
			defer cancel()
			r := runSource(t, ctx, &mqtt.Source{Name: "rig", Broker: br.URL(), Topic: "t/raw", ClientID: "test-sub"})

			pub := &mqtt.Publisher{Broker: br.URL(), Topic: "t/raw", ClientID: "test-pub"}
			in := make(chan acquire.Block)
			pubDone := make(chan error, 1)
			go func() { pubDone <- pub.Run(ctx, in) }()
			const n = 300
			go func() {
				for i := range n {
					select {
					case in <- block(uint64(i)):
					case <-ctx.Done():
						return
					}
				}
				close(in)
			}()
			assert.Equal(t, seqRange(0, n), r.next(t, ctx, n), "blocks out of order or missing")
			require.NoError(t, <-pubDone)
			require.NoError(t, r.halt())
			h := r.src.Health.Snapshot("rig")
			assert.Equal(t, uint64(n), h.Frames)
			assert.Equal(t, uint64(2*n), h.Samples)
			assert.Zero(t, h.Gaps+h.Duplicates+h.Rejected+h.BlocksDropped+h.Reconnects)
			assert.Zero(t, br.Dropped())
			assert.Equal(t, uint64(n), pub.Published.Load())
			assert.Zero(t, r.ev.count(), "no events on a clean run")
		})
	}
}

// Ensure that recording survives a broker restart by itself: the source
// reconnects and re-subscribes, reports the outage and any blocks lost, and
// every block published once it is back arrives.
//
// Neither broker keeps sessions across the restart here (in-memory mochi,
// mosquitto with persistence false), so blocks sent during the outage are
// held in the publisher's ordered paho store and sent once it reconnects;
// they arrive only if the source has re-subscribed by then. Those the broker
// had no subscriber for are lost and must show up as an exact gap.
func TestBrokerRestart(t *testing.T) {
	for _, kind := range brokerKinds {
		t.Run(kind.name, func(t *testing.T) {
			br := kind.start(t)
			ctx, cancel := context.WithTimeout(t.Context(), 25*time.Second)
			defer cancel()
			r := runSource(t, ctx, &mqtt.Source{Name: "pitot_node", Broker: br.URL(), Topic: "yard/raw", ClientID: "restart-sub"})
			pub := &mqtt.Publisher{Broker: br.URL(), Topic: "yard/raw", ClientID: "restart-pub"}
			in := make(chan acquire.Block)
			go func() { _ = pub.Run(ctx, in) }()
			send := func(seqs []uint64) {
				for _, s := range seqs {
					select {
					case in <- block(s):
					case <-ctx.Done():
						return
					}
				}
			}

			send(seqRange(0, 50))
			require.Equal(t, seqRange(0, 50), r.next(t, ctx, 50))

			// Restart with a 300 ms outage; blocks 50..59 are sent into it.
			duringOutage := make(chan struct{})
			go func() { send(seqRange(50, 60)); close(duringOutage) }()
			br.Restart(t, 300*time.Millisecond)
			deadline := time.Now().Add(15 * time.Second)
			for r.src.Subscriptions() < 2 {
				require.True(t, time.Now().Before(deadline), "source did not re-subscribe after the restart")
				time.Sleep(10 * time.Millisecond)
			}
			select {
			case <-duringOutage:
			case <-ctx.Done():
				t.Fatal("publisher stuck after the restart")
			}
			send(seqRange(60, 100))

			// Everything from 60 on arrives; of 50..59 whatever arrived
			// comes in order, and the rest is one exact gap.
			var got []uint64
			for !slices.Contains(got, 99) {
				got = append(got, r.next(t, ctx, 1)...)
			}
			r.quiet(t, 200*time.Millisecond)
			i := slices.Index(got, 60)
			require.GreaterOrEqual(t, i, 0, "seq 60 missing: %v", got)
			assert.Equal(t, seqRange(60, 100), got[i:], "blocks published after the restart")
			early := got[:i]
			assert.True(t, slices.IsSorted(early), "outage blocks out of order: %v", early)
			for _, s := range early {
				assert.True(t, s >= 50 && s < 60, "unexpected seq %d", s)
			}
			lost := uint64(10 - len(early))

			h := r.src.Health.Snapshot("pitot_node")
			assert.GreaterOrEqual(t, h.Reconnects, uint64(1))
			assert.Equal(t, uint64(50+len(got)), h.Frames)
			assert.Equal(t, lost, h.Gaps, "gaps must count exactly the blocks that never came")
			assert.Zero(t, h.Duplicates+h.BlocksDropped+h.Rejected)
			assert.Equal(t, lost, r.src.Missing())

			rec := r.ev.of(acquire.EventReconnected)
			require.NotEmpty(t, rec)
			assert.Greater(t, rec[0].Duration, time.Duration(0), "outage duration")
			assert.Less(t, rec[0].Duration, 15*time.Second)
			assert.NotEmpty(t, r.ev.of(acquire.EventDisconnected))
			gaps := r.ev.of(acquire.EventGap)
			if lost == 0 {
				assert.Empty(t, gaps)
			} else {
				require.Len(t, gaps, 1)
				assert.Equal(t, time.Duration(lost)*blockLen, gaps[0].Duration)
				assert.Contains(t, gaps[0].Message, fmt.Sprintf("%d block(s) missing", lost))
			}
			t.Logf("%s: outage %s, %d of 10 outage blocks arrived, %d lost", kind.name, rec[0].Duration, len(early), lost)
			assert.Zero(t, br.Dropped())
		})
	}
}

// Ensure that duplicates are dropped and a late block fills its gap: the
// raw sequence 0,1,2,2,4,3,5,5 yields each seq once, 2 duplicates, one gap
// counted at the jump to 4 and filled by the late 3.
func TestDuplicatesAndOutOfOrder(t *testing.T) {
	for _, kind := range brokerKinds {
		t.Run(kind.name, func(t *testing.T) {
			br := kind.start(t)
			ctx, cancel := context.WithTimeout(t.Context(), 15*time.Second)
			defer cancel()
			r := runSource(t, ctx, &mqtt.Source{Name: "s", Broker: br.URL(), Topic: "dup/raw", ClientID: "dup-sub"})
			c := rawClient(t, br.URL(), "dup-pub")
			publishRaw(t, c, "dup/raw", 0, 1, 2, 2, 4, 3, 5, 5)
			// A bad payload: counted by reason, reported once.
			require.NoError(t, paho.WaitTokenTimeout(c.Publish("dup/raw", 1, false, []byte(`{"seq":9`)), 5*time.Second))
			require.NoError(t, paho.WaitTokenTimeout(c.Publish("dup/raw", 1, false, []byte(`nope`)), 5*time.Second))
			publishRaw(t, c, "dup/raw", 6)

			assert.Equal(t, []uint64{0, 1, 2, 4, 3, 5, 6}, r.next(t, ctx, 7))
			r.quiet(t, 200*time.Millisecond)
			h := r.src.Health.Snapshot("s")
			assert.Equal(t, uint64(7), h.Frames)
			assert.Equal(t, uint64(2), h.Duplicates)
			assert.Equal(t, uint64(1), h.Gaps, "gap counted at the jump 2→4")
			assert.Equal(t, uint64(1), r.src.Health.Late.Load(), "seq 3 came late")
			assert.Zero(t, r.src.Missing())
			assert.Equal(t, uint64(2), h.Rejected)
			assert.Equal(t, map[string]uint64{"parse": 2}, h.RejectedBy)
			gaps := r.ev.of(acquire.EventGap)
			require.Len(t, gaps, 1)
			assert.Equal(t, blockLen, gaps[0].Duration)
			rej := r.ev.of(acquire.EventRejected)
			require.Len(t, rej, 1, "only the first rejection of a reason is an event")
			assert.Contains(t, rej[0].Message, "parse")
			assert.Zero(t, br.Dropped())
		})
	}
}

// Ensure that with a persistent session, blocks published while the source
// is offline are delivered when it comes back with the same client id
// (mosquitto keeps the session while it runs).
func TestPersistentSession_OfflineBacklog(t *testing.T) {
	br := mosquittotest.Start(t)
	ctx, cancel := context.WithTimeout(t.Context(), 15*time.Second)
	defer cancel()
	newSource := func() *mqtt.Source {
		return &mqtt.Source{Name: "s", Broker: br.URL(), Topic: "sess/raw", ClientID: "liftyard-tank-s"}
	}
	r := runSource(t, ctx, newSource())
	c := rawClient(t, br.URL(), "sess-pub")
	publishRaw(t, c, "sess/raw", 0, 1, 2)
	assert.Equal(t, []uint64{0, 1, 2}, r.next(t, ctx, 3))
	require.NoError(t, r.halt())

	publishRaw(t, c, "sess/raw", seqRange(3, 23)...) // nobody connected now

	r2 := runSource(t, ctx, newSource())
	got := r2.next(t, ctx, 20)
	redelivered := uint64(0)
	if got[0] == 2 {
		// QoS 1 is at least once: seq 2's ack may have been in flight when
		// the first source left, so the broker delivers it again. A new
		// source instance cannot know it was seen (one recorder keeps its
		// window across reconnects).
		redelivered = 1
		got = append(got[1:], r2.next(t, ctx, 1)...)
	}
	assert.Equal(t, seqRange(3, 23), got, "offline backlog")
	publishRaw(t, c, "sess/raw", 23)
	assert.Equal(t, []uint64{23}, r2.next(t, ctx, 1))
	h := r2.src.Health.Snapshot("s")
	assert.Equal(t, 21+redelivered, h.Frames)
	assert.Zero(t, h.Gaps+h.Duplicates)
}

// Ensure that a source started before its broker waits for it and then
// records, without counting the wait as a reconnect.
func TestSource_BrokerDownAtStart(t *testing.T) {
	b, err := mqtt.StartBroker("127.0.0.1:0", nil)
	require.NoError(t, err)
	addr := b.Addr()
	require.NoError(t, b.Close()) // the port is now free and nobody answers
	ctx, cancel := context.WithTimeout(t.Context(), 15*time.Second)
	defer cancel()
	src := &mqtt.Source{Name: "s", Broker: "tcp://" + addr, Topic: "late/raw", ClientID: "late-sub"}
	out := make(chan acquire.Block, 8)
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, out) }()
	time.Sleep(300 * time.Millisecond)
	select {
	case err := <-done:
		t.Fatalf("Run gave up while the broker was down: %v", err)
	default:
	}
	b2, err := mqtt.StartBroker(addr, nil)
	require.NoError(t, err)
	defer func() { assert.NoError(t, b2.Close()) }()
	select {
	case <-src.Ready():
	case <-ctx.Done():
		t.Fatal("source never subscribed once the broker came up")
	}
	publishRaw(t, rawClient(t, b2.URL(), "late-pub"), "late/raw", 0)
	select {
	case blk := <-out:
		assert.Equal(t, uint64(0), blk.Seq)
	case <-ctx.Done():
		t.Fatal("no block")
	}
	assert.Zero(t, src.Health.Reconnects.Load())
	cancel()
	assert.NoError(t, <-done)
}

// Ensure that when nobody reads the source's output, the paho handler still
// never blocks: the bounded queue keeps the newest QueueSize payloads, drops
// the oldest with an exact count, and the broker link stays up.
func TestSource_FullQueueDropsOldest(t *testing.T) {
	br := brokerKinds[0].start(t)
	ctx, cancel := context.WithTimeout(t.Context(), 15*time.Second)
	defer cancel()
	src := &mqtt.Source{Name: "s", Broker: br.URL(), Topic: "full/raw", ClientID: "full-sub"}
	out := make(chan acquire.Block) // unbuffered and not read: Run holds one block, the queue fills
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, out) }()
	<-src.Ready()
	const n = mqtt.QueueSize + 50
	publishRaw(t, rawClient(t, br.URL(), "full-pub"), "full/raw", seqRange(0, n)...)
	const wantDropped = n - 1 - mqtt.QueueSize // one block waits in Run's hand
	deadline := time.Now().Add(5 * time.Second)
	for src.Health.BlocksDropped.Load() < wantDropped && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	time.Sleep(100 * time.Millisecond) // nothing more may be dropped
	assert.Equal(t, uint64(wantDropped), src.Health.BlocksDropped.Load())

	var seqs []uint64
	for range 1 + mqtt.QueueSize {
		select {
		case b := <-out:
			seqs = append(seqs, b.Seq)
		case <-ctx.Done():
			t.Fatalf("only %d blocks", len(seqs))
		}
	}
	assert.Equal(t, append([]uint64{0}, seqRange(n-mqtt.QueueSize, n)...), seqs, "the oldest queued payloads are the ones dropped")
	assert.Zero(t, src.Health.Reconnects.Load(), "the broker link must survive a stuck consumer")
	assert.Zero(t, br.Dropped())
	// The dropped blocks are also a seq gap once the next block arrives.
	assert.Equal(t, uint64(wantDropped), src.Health.Gaps.Load())
	cancel()
	assert.NoError(t, <-done)
}

// Ensure that a seq jump the device clock does not confirm is a counter
// restart rather than a huge gap, that a confirmed jump is counted with its
// duration, and that recording goes on.
func TestSource_WildJumpAndRestart(t *testing.T) {
	br := brokerKinds[0].start(t)
	ctx, cancel := context.WithTimeout(t.Context(), 15*time.Second)
	defer cancel()
	r := runSource(t, ctx, &mqtt.Source{Name: "s", Broker: br.URL(), Topic: "wild/raw", ClientID: "wild-sub"})
	c := rawClient(t, br.URL(), "wild-pub")
	const far = 1 << 62
	publishRaw(t, c, "wild/raw", 0, far, 1, 2, 50)
	assert.Equal(t, []uint64{0, far, 1, 2, 50}, r.next(t, ctx, 5))
	// issue 16: the device clock does not confirm the jump to far (its
	// time wraps), so it is a counter restart, not 2^62 missing blocks;
	// the jump from 2 to 50 is confirmed and counted.
	assert.Equal(t, uint64(47), r.src.Health.Gaps.Load())
	gaps := r.ev.of(acquire.EventGap)
	require.Len(t, gaps, 3)
	assert.Contains(t, gaps[0].Message, "restarted its counter")
	assert.Contains(t, gaps[1].Message, "restarted its counter")
	assert.Contains(t, gaps[2].Message, "47 block(s) missing")
	assert.Equal(t, 47*blockLen, gaps[2].Duration)
	assert.Zero(t, r.src.Health.Duplicates.Load())
}

// Ensure that hostile payloads leave good blocks flowing (issue 16): an
// oversize payload is refused before it is decoded, a payload naming
// 200 000 channels is refused by the same limit, series of channels the rig
// does not declare are dropped and counted, and a payload with none of the
// rig's channels is rejected.
func TestSource_HostilePayloads(t *testing.T) {
	br := brokerKinds[0].start(t)
	ctx, cancel := context.WithTimeout(t.Context(), 15*time.Second)
	defer cancel()
	r := runSource(t, ctx, &mqtt.Source{Name: "s", Broker: br.URL(), Topic: "hostile/raw", ClientID: "hostile-sub",
		Channels: []string{"a"}, MaxPayload: 64 << 10})
	c := rawClient(t, br.URL(), "hostile-pub")
	pub := func(data []byte) {
		t.Helper()
		require.NoError(t, paho.WaitTokenTimeout(c.Publish("hostile/raw", 1, false, data), 5*time.Second))
	}
	publishRaw(t, c, "hostile/raw", 0)
	// 200 000 channels: about 3 MB of JSON.
	var many strings.Builder
	many.WriteString(`{"seq":1,"t_us":1000,"dt_us":100,"v":{`)
	for i := range 200_000 {
		if i > 0 {
			many.WriteString(",")
		}
		fmt.Fprintf(&many, `"c%d":[1]`, i)
	}
	many.WriteString("}}")
	for range 40 {
		pub([]byte(many.String()))
	}
	// A known channel beside an unknown one, then only unknown ones.
	pub([]byte(`{"seq":1,"t_us":1000,"dt_us":100,"v":{"a":[1,1.5],"zz":[7,8]}}`))
	pub([]byte(`{"seq":2,"t_us":2000,"dt_us":100,"v":{"zz":[7,8]}}`))
	publishRaw(t, c, "hostile/raw", 3, 4)
	assert.Equal(t, []uint64{0, 1, 3, 4}, r.next(t, ctx, 4))
	assert.Equal(t, uint64(40), r.src.Health.Rejected(acquire.ReasonSize))
	assert.Equal(t, uint64(1), r.src.Health.Rejected(acquire.ReasonChannel))
	assert.Equal(t, uint64(2), r.src.Health.UnknownChannels.Load(), `"zz" twice`)
	assert.Zero(t, r.src.Health.BlocksDropped.Load(), "no good block was pushed out")
	rej := r.ev.of(acquire.EventRejected)
	require.NotEmpty(t, rej)
	for _, ev := range rej {
		assert.Less(t, len(ev.Message), 300, "messages quote an excerpt, not the payload")
	}
}

// Ensure that a broker that cannot be reached at start is visible at once
// (issue 16): a counter and an event from the first failed attempt.
func TestSource_UnreachableBrokerIsVisible(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	require.NoError(t, err)
	addr := ln.Addr().String()
	require.NoError(t, ln.Close()) // nothing listens there now
	ctx, cancel := context.WithTimeout(t.Context(), 10*time.Second)
	defer cancel()
	src := &mqtt.Source{Name: "s", Broker: "tcp://" + addr, Topic: "x/raw", ClientID: "unreachable"}
	ev := &events{}
	src.OnEvent = ev.add
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, make(chan acquire.Block, 1)) }()
	deadline := time.Now().Add(5 * time.Second)
	for src.Health.ConnectFailures.Load() == 0 && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	assert.Positive(t, src.Health.ConnectFailures.Load(), "a failed attempt is counted within 5 s")
	require.Eventually(t, func() bool { return len(ev.of(acquire.EventDisconnected)) > 0 }, time.Second, 20*time.Millisecond)
	assert.Contains(t, ev.of(acquire.EventDisconnected)[0].Message, "cannot reach")
	cancel()
	assert.NoError(t, <-done)
}

// Ensure that with AckOnStore a QoS 1 message is acknowledged only when its
// block's Ack is called (issue 16): a source that stops before the store
// committed some blocks leaves them with Debian's mosquitto, which
// redelivers exactly those to the next session with the same client id.
func TestSource_AckOnStore_RedeliversUncommitted(t *testing.T) {
	br := mosquittotest.Start(t)
	ctx, cancel := context.WithTimeout(t.Context(), 30*time.Second)
	defer cancel()
	newSource := func() *mqtt.Source {
		return &mqtt.Source{Name: "s", Broker: br.URL(), Topic: "ack/raw", ClientID: "liftyard-ack-s", AckOnStore: true}
	}
	r := runSource(t, ctx, newSource())
	c := rawClient(t, br.URL(), "ack-pub")
	publishRaw(t, c, "ack/raw", seqRange(0, 10)...)
	got := drain(t, ctx, r.out, 10)
	for _, b := range got {
		require.NotNil(t, b.Ack, "a block of an AckOnStore source carries its Ack")
	}
	for _, b := range got[:6] { // the store committed 0–5; 6–9 were still in memory
		b.Ack()
	}
	got[0].Ack() // a second call is harmless
	require.NoError(t, r.halt())
	select {
	case <-r.src.Settled(): // waits AckGrace for 6–9, then disconnects
	case <-ctx.Done():
		t.Fatal("the stopped source never settled")
	}

	r2 := runSource(t, ctx, newSource())
	var again []uint64
	for _, b := range drain(t, ctx, r2.out, 4) {
		again = append(again, b.Seq)
		b.Ack()
	}
	assert.Equal(t, []uint64{6, 7, 8, 9}, again, "the broker redelivers what was not acknowledged, and only that")
	r2.quiet(t, 300*time.Millisecond)
	publishRaw(t, c, "ack/raw", 10)
	for _, b := range drain(t, ctx, r2.out, 1) {
		assert.Equal(t, uint64(10), b.Seq)
		b.Ack()
	}
	require.NoError(t, r2.halt())
	select {
	case <-r2.src.Settled():
	case <-time.After(mqtt.AckGrace):
		t.Fatal("a source whose blocks were all acknowledged kept its connection")
	}
}

// drain receives n blocks from out.
func drain(t *testing.T, ctx context.Context, out <-chan acquire.Block, n int) []acquire.Block {
	t.Helper()
	var bs []acquire.Block
	for len(bs) < n {
		select {
		case b := <-out:
			bs = append(bs, b)
		case <-ctx.Done():
			t.Fatalf("only %d of %d blocks", len(bs), n)
		}
	}
	return bs
}
