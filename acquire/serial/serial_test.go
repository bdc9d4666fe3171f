package serial_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/serial"
	"liftyard/acquire/sim"
	"liftyard/rig"
)

// safety is the net under every wait in these tests; none asserts speed.
const safety = 10 * time.Second

// newPTY opens a pseudo-terminal pair whose master is closed at cleanup.
func newPTY(t *testing.T) (master *os.File, path string) {
	t.Helper()
	m, p, err := serial.OpenPTY()
	require.NoError(t, err)
	t.Cleanup(func() { m.Close() })
	return m, p
}

// write writes p to the master under a deadline, so a test never hangs.
func write(t *testing.T, m *os.File, p []byte) {
	t.Helper()
	require.NoError(t, m.SetWriteDeadline(time.Now().Add(safety)))
	_, err := m.Write(p)
	require.NoError(t, err)
}

// events records what a source reports.
type events struct {
	mu sync.Mutex
	ev []acquire.Event
}

func (e *events) add(ev acquire.Event) { e.mu.Lock(); e.ev = append(e.ev, ev); e.mu.Unlock() }
func (e *events) of(kind acquire.EventKind) []acquire.Event {
	e.mu.Lock()
	defer e.mu.Unlock()
	var out []acquire.Event
	for _, ev := range e.ev {
		if ev.Kind == kind {
			out = append(out, ev)
		}
	}
	return out
}

// run starts src and returns its output; cleanup cancels it and checks that
// Run returned nil in time.
func run(t *testing.T, src *serial.Source) <-chan acquire.Block {
	t.Helper()
	if src.BackoffMin == 0 {
		src.BackoffMin, src.BackoffMax = 20*time.Millisecond, 200*time.Millisecond
	}
	out := make(chan acquire.Block, 1024)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, out) }()
	t.Cleanup(func() {
		cancel()
		select {
		case err := <-done:
			assert.NoError(t, err)
		case <-time.After(safety):
			t.Error("Run did not return after cancel")
		}
	})
	return out
}

// waitFor polls cond until it holds or the safety net is reached.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(safety)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// sample is one received sample time.
type sample struct {
	tUs    int64
	values []float64
}

// collector gathers samples by seq from blocks.
type collector struct {
	bySeq  map[uint32]sample
	dups   int
	blocks []acquire.Block
}

func (c *collector) add(t *testing.T, b acquire.Block) {
	t.Helper()
	require.Positive(t, b.DtUs, "block %d has DtUs %d", b.Seq, b.DtUs)
	require.False(t, b.Received.IsZero())
	c.blocks = append(c.blocks, b)
	for i := range b.Len() {
		seq := uint32(b.Seq) + uint32(i)
		if _, ok := c.bySeq[seq]; ok {
			c.dups++
		}
		s := sample{tUs: b.T0Us + int64(i)*b.DtUs}
		for _, ser := range b.Series {
			s.values = append(s.values, ser.Raw[i])
		}
		c.bySeq[seq] = s
	}
}

// receive reads blocks until have(n) samples or the safety net.
func (c *collector) receive(t *testing.T, out <-chan acquire.Block, n int) {
	t.Helper()
	timeout := time.After(safety)
	for len(c.bySeq) < n {
		select {
		case b := <-out:
			c.add(t, b)
		case <-timeout:
			t.Fatalf("received %d of %d samples", len(c.bySeq), n)
		}
	}
}

func newCollector() *collector { return &collector{bySeq: map[uint32]sample{}} }

// frameValues are invented raw readings for frame seq k (24-bit counts and
// a pressure count), exactly representable so that equality is exact.
func frameValues(k uint32) []float64 {
	return []float64{float64(int32(k*7919) % 8388607), -float64(k % 1000), float64(k) / 8}
}

var threeChannels = []string{"n_fore", "n_aft", "pitot"}

// Ensure that in a stream of 2 000 frames with 1 % bad lines every good
// frame arrives with its values and time, and every bad line is counted
// under its reason, exactly.
func TestSource_CorruptedStream(t *testing.T) {
	m, path := newPTY(t)
	var ev events
	src := &serial.Source{Name: "balance", Port: path, Channels: threeChannels, OnEvent: ev.add}
	out := run(t, src)
	waitFor(t, "port open", src.Connected)

	const n = 2000
	const t0, dt = 1_733_061_000_000_000, 1000
	rng := rand.New(rand.NewPCG(4, 2))
	var stream []byte
	var badCRC, torn, garbage int
	for k := uint32(0); k < n; k++ {
		f := acquire.Frame{Seq: k, TUs: t0 + int64(k)*dt, Values: frameValues(k)}
		if k%100 == 50 { // 20 bad lines in all, between good frames
			bad := acquire.AppendFrame(nil, &acquire.Frame{Seq: k + 1_000_000, TUs: 1, Values: frameValues(k)})
			switch (k / 100) % 3 {
			case 0: // one digit flipped after the checksum was made
				bad[0] ^= 0x01
				badCRC++
			case 1: // cut in the middle, as a device reset leaves it
				bad = append(bad[:len(bad)/2:len(bad)/2], '\n')
				torn++
			case 2: // binary garbage of the kind amplifiers send at power-up
				bad = bad[:0]
				for range 10 + rng.IntN(40) {
					c := byte(rng.UintN(256))
					if c == '\n' || c == '*' {
						c = 0xAA
					}
					bad = append(bad, c)
				}
				bad = append(bad, '\n')
				garbage++
			}
			stream = append(stream, bad...)
		}
		stream = acquire.AppendFrame(stream, &f)
	}
	require.Equal(t, 20, badCRC+torn+garbage)
	go func() { // the device side, bounded by the master's deadline
		_ = m.SetWriteDeadline(time.Now().Add(safety))
		for p := stream; len(p) > 0; {
			k := min(len(p), 997) // odd-sized writes tear lines across reads
			if _, err := m.Write(p[:k]); err != nil {
				return
			}
			p = p[k:]
		}
	}()

	c := newCollector()
	c.receive(t, out, n)
	require.Len(t, c.bySeq, n)
	assert.Zero(t, c.dups, "a frame arrived twice")
	for k := uint32(0); k < n; k++ {
		s, ok := c.bySeq[k]
		require.True(t, ok, "frame %d missing", k)
		require.Equal(t, frameValues(k), s.values, "frame %d", k)
		require.Equal(t, int64(t0+int64(k)*dt), s.tUs, "frame %d time", k)
	}
	waitFor(t, "all rejections counted", func() bool { return src.Health.Snapshot("").Rejected == 20 })
	h := src.Health.Snapshot("balance")
	assert.Equal(t, uint64(badCRC), h.RejectedBy["crc"], "crc")
	assert.Equal(t, uint64(torn+garbage), h.RejectedBy["parse"], "parse (torn and garbage)")
	assert.Equal(t, uint64(n), h.Frames)
	assert.Equal(t, uint64(n), h.Samples)
	assert.Zero(t, h.Gaps)
	assert.Zero(t, h.Duplicates)
	assert.Zero(t, h.SamplesDropped)
	assert.Len(t, ev.of(acquire.EventRejected), 2, "one event for the first of each reason")
	for _, b := range c.blocks {
		assert.LessOrEqual(t, b.Len(), serial.DefaultBlockFrames)
		assert.Equal(t, int64(dt), b.DtUs)
	}
}

// Ensure that seq accounting counts gaps across the 32-bit wrap, drops
// duplicates, reports a gap with its duration, and counts overlong lines
// and saturated readings.
func TestSource_SeqGapsDuplicatesOverlongSaturation(t *testing.T) {
	m, path := newPTY(t)
	var ev events
	src := &serial.Source{Name: "b", Port: path, Channels: []string{"a", "b"}, OnEvent: ev.add,
		RawLimits: map[string][2]float64{"a": {-100, 100}}}
	out := run(t, src)
	waitFor(t, "port open", src.Connected)

	const dt = 2000
	var stream []byte
	seqs := []uint32{math.MaxUint32 - 2, math.MaxUint32 - 1, math.MaxUint32 - 1, math.MaxUint32, 0, 3, 4}
	for i, s := range seqs {
		tUs := int64(s+3) * dt // device time advances with seq, across the wrap
		a := float64(i)
		if i == 5 {
			a = 100 // at the limit: saturated
		}
		stream = acquire.AppendFrame(stream, &acquire.Frame{Seq: s, TUs: tUs, Values: []float64{a, 1}})
		if i == 1 {
			stream = append(stream, strings.Repeat("x", 3*acquire.MaxLineBytes)...)
			stream = append(stream, '\n')
		}
	}
	write(t, m, stream)

	c := newCollector()
	c.receive(t, out, 6)
	assert.ElementsMatch(t, []uint32{math.MaxUint32 - 2, math.MaxUint32 - 1, math.MaxUint32, 0, 3, 4}, keys(c.bySeq))
	h := src.Health.Snapshot("b")
	assert.Equal(t, uint64(1), h.Duplicates)
	assert.Equal(t, uint64(2), h.Gaps, "seqs 1 and 2 are missing")
	assert.Equal(t, uint64(1), h.RejectedBy["parse"], "one overlong line, counted once")
	assert.Equal(t, uint64(6), h.Frames)
	gaps := ev.of(acquire.EventGap)
	require.Len(t, gaps, 1)
	assert.Equal(t, 2*dt*time.Microsecond, gaps[0].Duration, "2 missing × 2 ms spacing")
	assert.Equal(t, map[string]uint64{"a": 1}, src.Saturated())
	assert.Len(t, ev.of(acquire.EventSaturated), 1)
}

func keys(m map[uint32]sample) []uint32 {
	var k []uint32
	for s := range m {
		k = append(k, s)
	}
	return k
}

// Ensure that after an unplug (master closed) and a re-plug (a new pty
// behind the same symlink) reading resumes by itself, the outage is
// reported as a gap with its duration, and no frame written while connected
// is lost.
func TestSource_UnplugReplug(t *testing.T) {
	dir := t.TempDir()
	link := filepath.Join(dir, "ttyBALANCE")
	m1, p1 := newPTY(t)
	require.NoError(t, os.Symlink(p1, link))
	var ev events
	src := &serial.Source{Name: "balance", Port: link, Channels: threeChannels, OnEvent: ev.add}
	out := run(t, src)
	waitFor(t, "port open", src.Connected)

	frames := func(from, to uint32) []byte {
		var p []byte
		for k := from; k < to; k++ {
			p = acquire.AppendFrame(p, &acquire.Frame{Seq: k, TUs: int64(k) * 1000, Values: frameValues(k)})
		}
		return p
	}
	c := newCollector()
	write(t, m1, frames(0, 300))
	c.receive(t, out, 300)

	require.NoError(t, m1.Close()) // unplug
	waitFor(t, "disconnect noticed", func() bool { return len(ev.of(acquire.EventDisconnected)) == 1 })
	require.False(t, src.Connected())
	m2, p2 := newPTY(t) // re-plug: a new device node, the same stable link
	require.NoError(t, os.Remove(link))
	require.NoError(t, os.Symlink(p2, link))
	waitFor(t, "reconnect", func() bool { return src.Health.Reconnects.Load() >= 1 && src.Connected() })
	write(t, m2, frames(300, 600))
	c.receive(t, out, 600)

	for k := uint32(0); k < 600; k++ {
		require.Contains(t, c.bySeq, k)
		require.Equal(t, frameValues(k), c.bySeq[k].values)
	}
	h := src.Health.Snapshot("balance")
	assert.GreaterOrEqual(t, h.Reconnects, uint64(1))
	assert.Zero(t, h.Rejected)
	assert.Zero(t, h.Gaps, "the device seq continued: nothing missing")
	rec := ev.of(acquire.EventReconnected)
	require.Len(t, rec, 1)
	assert.Positive(t, rec[0].Duration)
	gaps := ev.of(acquire.EventGap)
	require.Len(t, gaps, 1, "one gap: the outage")
	assert.Equal(t, rec[0].Duration, gaps[0].Duration)
}

// Ensure that a port missing at start (amplifier not yet powered) is opened
// once it appears.
func TestSource_PortAppearsLater(t *testing.T) {
	link := filepath.Join(t.TempDir(), "ttyLATE")
	src := &serial.Source{Name: "late", Port: link, Channels: []string{"a"}}
	out := run(t, src)
	time.Sleep(150 * time.Millisecond) // let it fail a few opens; nothing asserted on timing
	require.False(t, src.Connected())

	m, p := newPTY(t)
	require.NoError(t, os.Symlink(p, link))
	waitFor(t, "port open", src.Connected)
	var stream []byte
	for k := uint32(0); k < 10; k++ {
		stream = acquire.AppendFrame(stream, &acquire.Frame{Seq: k, TUs: int64(k) * 5000, Values: []float64{float64(k)}})
	}
	write(t, m, stream)
	c := newCollector()
	c.receive(t, out, 10)
	for k := uint32(0); k < 10; k++ {
		assert.Equal(t, []float64{float64(k)}, c.bySeq[k].values)
	}
	assert.Zero(t, src.Health.Reconnects.Load(), "a first open is not a reconnect")
}

// Ensure that delimited lines without a time column get host receive times,
// with the header line counted once as parse.
func TestSource_DelimitedHostTime(t *testing.T) {
	m, path := newPTY(t)
	src := &serial.Source{Name: "amp", Port: path, Format: serial.FormatDelimited,
		Delimited: acquire.DelimitedFormat{Delimiter: ";", Columns: []string{"lift", "_", "pitot"}}}
	out := run(t, src)
	waitFor(t, "port open", src.Connected)

	before := time.Now()
	var stream strings.Builder
	stream.WriteString("Lift N ; status ; Pitot Pa\r\n")
	for k := range 20 {
		fmt.Fprintf(&stream, " %d.5 ; OK ; %d \r\n", k, 200+k)
	}
	write(t, m, []byte(stream.String()))
	c := newCollector()
	c.receive(t, out, 20)
	after := time.Now()
	for k := range 20 {
		s := c.bySeq[uint32(k)]
		require.Equal(t, []float64{float64(k) + 0.5, float64(200 + k)}, s.values, "line %d", k)
		assert.GreaterOrEqual(t, s.tUs, before.UnixMicro()-time.Second.Microseconds(), "host time of line %d", k)
		assert.LessOrEqual(t, s.tUs, after.UnixMicro(), "host time of line %d", k)
	}
	assert.Equal(t, uint64(1), src.Health.Rejected(acquire.ReasonParse), "the header line, once")
	assert.Equal(t, uint64(20), src.Health.Frames.Load())
}

// Ensure that delimited lines with a t_ms column carry the device time.
func TestSource_DelimitedDeviceTime(t *testing.T) {
	m, path := newPTY(t)
	src := &serial.Source{Name: "amp", Port: path, Format: serial.FormatDelimited,
		Delimited: acquire.DelimitedFormat{Delimiter: "\t", Columns: []string{"t_ms", "lift", "pitot"}}}
	out := run(t, src)
	waitFor(t, "port open", src.Connected)
	var stream strings.Builder
	for k := range 30 {
		fmt.Fprintf(&stream, "%d.0\t%d\t%d\n", 1000+10*k, k, -k)
	}
	stream.WriteString("1300.0\t1\n") // one field short
	write(t, m, []byte(stream.String()))
	c := newCollector()
	c.receive(t, out, 30)
	for k := range 30 {
		s := c.bySeq[uint32(k)]
		assert.Equal(t, int64(1000+10*k)*1000, s.tUs, "line %d", k)
		assert.Equal(t, []float64{float64(k), -float64(k)}, s.values)
	}
	assert.Equal(t, int64(10_000), c.blocks[0].DtUs)
	waitFor(t, "short line counted", func() bool { return src.Health.Rejected(acquire.ReasonFieldCount) == 1 })
}

// simRig is an invented foil rig for the round trip (counts in, no real
// instrument): two normal load cells, one axial, a pitot and an angle encoder.
func simRig() *rig.Rig {
	force := rig.Calibration{Poly: []float64{-12.5, 0.0025}, U: 0.1}
	return &rig.Rig{
		Name: "serial round trip", Kind: rig.KindFoil, Fluid: rig.FluidFreshWater,
		Conditions: rig.Conditions{TempK: 288.15, PressurePa: 101325},
		Reference:  rig.Reference{AreaM2: 0.09, LengthM: 0.15, SpanM: 0.6},
		Sources:    []rig.Source{{Name: "carriage", Type: rig.SourceSerial, Channels: []string{"n_fore", "n_aft", "axial", "pitot", "alpha"}}},
		Channels: []rig.Channel{
			{Name: "n_fore", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, CapacitySI: 500, Calibration: force},
			{Name: "n_aft", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, CapacitySI: 500, Calibration: force},
			{Name: "axial", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, CapacitySI: 200, Calibration: rig.Calibration{Poly: []float64{3.0, -0.001}}},
			{Name: "pitot", Quantity: rig.QuantityPressure, Unit: "kPa", ToSI: rig.Affine{Scale: 1000}, CapacitySI: 5000, Calibration: rig.Calibration{Poly: []float64{0, 1e-6, 1e-14}}},
			{Name: "alpha", Quantity: rig.QuantityAngle, Unit: "deg", ToSI: rig.Affine{Scale: math.Pi / 180}, Calibration: rig.Calibration{Poly: []float64{0, 0.01}}},
		},
		Lift: rig.Lift{Normal: []string{"n_fore", "n_aft"}, Axial: []string{"axial"}, AngleChannel: "alpha", DynamicPressure: "pitot", PitotCoeff: 1},
	}
}

// Ensure that simulator blocks written by WriteFrames into a pty come back
// from a Source with every value bit for bit and every sample time.
func TestWriteFrames_RoundTrip(t *testing.T) {
	r := simRig()
	s, err := sim.New(r, sim.Config{QPa: 2000, Seed: 3, Start: time.UnixMicro(1_733_061_000_000_000)}, 0)
	require.NoError(t, err)
	src, err := serial.FromRig(r.Sources[0], r)
	require.NoError(t, err)
	m, path := newPTY(t)
	src.Port = path
	out := run(t, src)
	waitFor(t, "port open", src.Connected)

	const nBlocks = 25
	in := make(chan acquire.Block, nBlocks)
	var sent []acquire.Block
	for range nBlocks {
		b := s.Next()
		sent = append(sent, b)
		in <- b
	}
	close(in)
	ctx, cancel := context.WithTimeout(context.Background(), safety)
	defer cancel()
	require.NoError(t, serial.WriteFrames(ctx, m, r.Sources[0].Channels, in))

	c := newCollector()
	total := nBlocks * sent[0].Len()
	c.receive(t, out, total)
	k := uint32(0)
	for _, b := range sent {
		for i := range b.Len() {
			got := c.bySeq[k]
			require.Equal(t, b.T0Us+int64(i)*b.DtUs, got.tUs, "sample %d time", k)
			for j, ch := range r.Sources[0].Channels {
				require.Equal(t, math.Float64bits(b.Raw(ch)[i]), math.Float64bits(got.values[j]), "sample %d channel %s", k, ch)
			}
			k++
		}
	}
	assert.Zero(t, src.Health.Snapshot("").Rejected)
}

// Ensure that WriteFrames refuses a block without a listed channel.
func TestWriteFrames_MissingChannel(t *testing.T) {
	in := make(chan acquire.Block, 1)
	in <- acquire.Block{Source: "x", DtUs: 1, Series: []acquire.Series{{Channel: "a", Raw: []float64{1}}}}
	close(in)
	var sb strings.Builder
	err := serial.WriteFrames(context.Background(), &sb, []string{"a", "b"}, in)
	assert.ErrorContains(t, err, `no channel "b"`)
}

// Ensure that bad configurations are refused with a message that says what
// to fix, before any port is touched.
func TestSource_BadConfig(t *testing.T) {
	tests := []struct {
		name string
		src  *serial.Source
		msg  string
	}{
		{"no port", &serial.Source{Name: "s", Channels: []string{"a"}}, "no serial port"},
		{"no channels", &serial.Source{Name: "s", Port: "/dev/null"}, "no channels"},
		{"bad format", &serial.Source{Name: "s", Port: "/dev/null", Format: "csv", Channels: []string{"a"}}, `format "csv"`},
		{"bad parity", &serial.Source{Name: "s", Port: "/dev/null", Parity: "mark", Channels: []string{"a"}}, `parity "mark"`},
		{"bad stop bits", &serial.Source{Name: "s", Port: "/dev/null", StopBits: 3, Channels: []string{"a"}}, "stop bits 3"},
		{"bad data bits", &serial.Source{Name: "s", Port: "/dev/null", DataBits: 9, Channels: []string{"a"}}, "data bits 9"},
		{"no columns", &serial.Source{Name: "s", Port: "/dev/null", Format: "delimited"}, "no columns"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.src.Run(context.Background(), make(chan acquire.Block))
			assert.ErrorContains(t, err, tt.msg)
		})
	}
}

// Ensure that FromRig takes line settings, format and raw limits from the rig.
func TestFromRig(t *testing.T) {
	r := simRig()
	r.Channels[3].RawMin, r.Channels[3].RawMax = -8388608, 8388607
	rs := rig.Source{Name: "amp", Type: rig.SourceSerial, Port: "/dev/ttyUSB0", Baud: 57600, Parity: "even", StopBits: 2,
		Format: "delimited", Delimiter: ";", Columns: []string{"t_ms", "n_fore", "_", "pitot"}}
	src, err := serial.FromRig(rs, r)
	require.NoError(t, err)
	assert.Equal(t, 57600, src.BaudRate)
	assert.Equal(t, "even", src.Parity)
	assert.Equal(t, 2, src.StopBits)
	assert.Equal(t, []string{"n_fore", "pitot"}, src.Delimited.Channels())
	assert.Equal(t, map[string][2]float64{"pitot": {-8388608, 8388607}}, src.RawLimits)

	_, err = serial.FromRig(rig.Source{Name: "m", Type: rig.SourceMQTT}, r)
	assert.ErrorContains(t, err, "not")
}

// Ensure that lines written by WriteDelimited parse back with the rig's
// own DelimitedFormat: every value bit for bit, each time column to the
// microsecond it can carry, with every delimiter kind (issue 15).
func TestWriteDelimited_ParsesBack(t *testing.T) {
	tests := []struct {
		name, delim, timeCol string
	}{
		{"comma t_us", ",", "t_us"},
		{"semicolon t_ms", ";", "t_ms"},
		{"spaces t_s", " ", "t_s"},
		{"tab no time", "\t", ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cols := []string{"n_fore", "_", "pitot"}
			if tt.timeCol != "" {
				cols = append([]string{tt.timeCol}, cols...)
			}
			f := acquire.DelimitedFormat{Delimiter: tt.delim, Columns: cols}
			b := acquire.Block{Source: "amp", T0Us: 3_600_123_457, DtUs: 5000, Series: []acquire.Series{
				{Channel: "pitot", Raw: []float64{1.25e-3, -7, 0.1 + 0.2}},
				{Channel: "n_fore", Raw: []float64{8388607, -8388608, 12345.678901234}},
			}}
			in := make(chan acquire.Block, 1)
			in <- b
			close(in)
			var sb strings.Builder
			require.NoError(t, serial.WriteDelimited(context.Background(), &sb, f, in))
			lines := strings.SplitAfter(sb.String(), "\n")
			require.Len(t, lines, 4) // three lines and the empty rest
			for i, line := range lines[:3] {
				var rec acquire.DelimitedRecord
				require.NoError(t, f.Parse([]byte(line), &rec), "line %q", line)
				assert.Equal(t, math.Float64bits(b.Raw("n_fore")[i]), math.Float64bits(rec.Values[0]), "n_fore of line %d", i)
				assert.Equal(t, math.Float64bits(b.Raw("pitot")[i]), math.Float64bits(rec.Values[1]), "pitot of line %d", i)
				assert.Equal(t, tt.timeCol != "", rec.HasTime)
				if rec.HasTime {
					assert.Equal(t, b.T0Us+int64(i)*b.DtUs, rec.TUs, "time of line %d", i)
				}
			}
		})
	}
}

// Ensure that WriteDelimited refuses a block without a column's channel.
func TestWriteDelimited_MissingChannel(t *testing.T) {
	in := make(chan acquire.Block, 1)
	in <- acquire.Block{Source: "x", DtUs: 1, Series: []acquire.Series{{Channel: "a", Raw: []float64{1}}}}
	close(in)
	var sb strings.Builder
	err := serial.WriteDelimited(context.Background(), &sb, acquire.DelimitedFormat{Columns: []string{"a", "b"}}, in)
	assert.ErrorContains(t, err, `channel "b" has 0 samples`)
}

// Ensure that OpenDevice opens a port with the rig source's line settings
// and that what is written there comes out at the other end (a pty stands
// for the null-modem cable of a dry run); bad settings are refused.
func TestOpenDevice(t *testing.T) {
	m, path := newPTY(t)
	w, err := serial.OpenDevice(path, rig.Source{Name: "amp", Baud: 9600, DataBits: 7, Parity: "even", StopBits: 2})
	require.NoError(t, err)
	defer w.Close()
	_, err = w.Write([]byte("1250.0;812.4\r\n"))
	require.NoError(t, err)
	require.NoError(t, m.SetReadDeadline(time.Now().Add(safety)))
	buf := make([]byte, 64)
	n, err := m.Read(buf)
	require.NoError(t, err)
	assert.Equal(t, "1250.0;812.4\r\n", string(buf[:n]))

	_, err = serial.OpenDevice(path, rig.Source{Name: "amp", Parity: "mark"})
	assert.ErrorContains(t, err, `source "amp": parity "mark"`)
	_, err = serial.OpenDevice(path+"-gone", rig.Source{Name: "amp"})
	assert.ErrorContains(t, err, "open "+path+"-gone")
}
