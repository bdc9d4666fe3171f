package serial

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"sync"
	"sync/atomic"
	"time"

	"go.bug.st/serial"

	"liftyard/acquire"
	"liftyard/rig"
)

// The line formats a Source reads.
const (
	FormatFrame     = "frame"     // seq,t_us,v1,...,vN*CCCC (acquire.ParseFrame)
	FormatDelimited = "delimited" // plain delimited lines (acquire.DelimitedFormat)
)

// Defaults for the zero values of Source's tuning fields.
const (
	DefaultBaudRate    = 115200
	DefaultReadTimeout = 100 * time.Millisecond
	DefaultBlockFrames = 50
	DefaultBlockSpan   = 100 * time.Millisecond
	DefaultQueueBlocks = 64
	DefaultBackoffMin  = 100 * time.Millisecond
	DefaultBackoffMax  = 5 * time.Second
)

// hostContinuity is the longest pause between two delimited lines without a
// time column across which their host receive times are still used to
// measure the line spacing.
const hostContinuity = time.Second

// Source reads one serial port and sends its lines, grouped, as Blocks. It
// is an acquire.Source. Set the fields before Run and do not change them
// while it runs; Health, Saturated and Connected may be read at any time.
type Source struct {
	Name string // rig source name; labels blocks, events and errors
	Port string // device path; a /dev/serial/by-id/... link survives re-plugs

	BaudRate int    // default 115200
	DataBits int    // 5–8, default 8
	Parity   string // "none" (default), "even" or "odd"
	StopBits int    // 1 (default) or 2

	Format    string                  // FormatFrame (default) or FormatDelimited
	Channels  []string                // frame: channel names in frame order
	Delimited acquire.DelimitedFormat // delimited: delimiter and column map

	// RawLimits holds, per channel, the raw reading limits [min, max] (an
	// ADC's full scale). A reading at or beyond either is counted as
	// saturated. Channels not in the map are not checked.
	RawLimits map[string][2]float64

	Health  acquire.Health
	OnEvent acquire.EventFunc // may be nil; must not block
	Logger  *slog.Logger      // nil: discard
	Now     func() time.Time  // host clock; nil: time.Now

	// Tuning; zero takes the Default… constant of the same name.
	ReadTimeout time.Duration // longest wait in one read; also flushes a pending block
	BlockFrames int           // most sample times in one block
	BlockSpan   time.Duration // most device time spanned by one block
	QueueBlocks int           // blocks held for a slow consumer before the oldest is dropped
	BackoffMin  time.Duration // first wait before reopening a lost port
	BackoffMax  time.Duration // longest wait between reopen attempts

	connected atomic.Bool
	sat       atomic.Pointer[saturation]
}

// saturation counts saturated readings per channel.
type saturation struct {
	names  []string
	counts []atomic.Uint64
}

// FromRig builds a Source from a rig's serial source. Raw limits come from
// the rig's channels (RawMin/RawMax, when either is non-zero).
func FromRig(s rig.Source, r *rig.Rig) (*Source, error) {
	if s.Type != rig.SourceSerial {
		return nil, fmt.Errorf("source %q: type %q is not %q", s.Name, s.Type, rig.SourceSerial)
	}
	src := &Source{
		Name: s.Name, Port: s.Port,
		BaudRate: s.Baud, DataBits: s.DataBits, Parity: s.Parity, StopBits: s.StopBits,
		Format: s.Format, Channels: s.Channels,
		Delimited: acquire.DelimitedFormat{Delimiter: s.Delimiter, Columns: s.Columns},
	}
	if src.Format == "" {
		src.Format = FormatFrame
	}
	names := src.Channels
	if src.Format == FormatDelimited {
		names = src.Delimited.Channels()
	}
	if r != nil {
		for _, name := range names {
			for _, c := range r.Channels {
				if c.Name == name && (c.RawMin != 0 || c.RawMax != 0) {
					if src.RawLimits == nil {
						src.RawLimits = map[string][2]float64{}
					}
					src.RawLimits[name] = [2]float64{c.RawMin, c.RawMax}
				}
			}
		}
	}
	if _, err := src.mode(); err != nil {
		return nil, err
	}
	if _, err := src.channelNames(); err != nil {
		return nil, err
	}
	return src, nil
}

// Connected reports whether the port is open right now.
func (s *Source) Connected() bool { return s.connected.Load() }

// Saturated returns, per channel with raw limits, how many readings were at
// or beyond a limit since Run started. Channels without limits are absent.
func (s *Source) Saturated() map[string]uint64 {
	sat := s.sat.Load()
	if sat == nil {
		return map[string]uint64{}
	}
	m := make(map[string]uint64, len(sat.names))
	for i, name := range sat.names {
		if name != "" {
			m[name] = sat.counts[i].Load()
		}
	}
	return m
}

// mode checks and converts the line settings.
func (s *Source) mode() (*serial.Mode, error) {
	m := &serial.Mode{BaudRate: s.BaudRate, DataBits: s.DataBits}
	if m.BaudRate == 0 {
		m.BaudRate = DefaultBaudRate
	}
	if m.DataBits == 0 {
		m.DataBits = 8
	}
	if m.BaudRate < 0 {
		return nil, fmt.Errorf("source %q: baud rate %d must be positive", s.Name, m.BaudRate)
	}
	if m.DataBits < 5 || m.DataBits > 8 {
		return nil, fmt.Errorf("source %q: data bits %d, want 5 to 8", s.Name, m.DataBits)
	}
	switch s.Parity {
	case "", "none":
		m.Parity = serial.NoParity
	case "even":
		m.Parity = serial.EvenParity
	case "odd":
		m.Parity = serial.OddParity
	default:
		return nil, fmt.Errorf(`source %q: parity %q, want "none", "even" or "odd"`, s.Name, s.Parity)
	}
	switch s.StopBits {
	case 0, 1:
		m.StopBits = serial.OneStopBit
	case 2:
		m.StopBits = serial.TwoStopBits
	default:
		return nil, fmt.Errorf("source %q: stop bits %d, want 1 or 2", s.Name, s.StopBits)
	}
	// InitialStatusBits stays nil: DTR/RTS as the driver sets them. Setting
	// them fails on a pseudo-terminal ("inappropriate ioctl for device").
	return m, nil
}

// channelNames returns the names of the values in a line, in order.
func (s *Source) channelNames() ([]string, error) {
	switch s.Format {
	case "", FormatFrame:
		if len(s.Channels) == 0 {
			return nil, fmt.Errorf("source %q: no channels for the frame format (list them in frame order)", s.Name)
		}
		return s.Channels, nil
	case FormatDelimited:
		if len(s.Delimited.Columns) == 0 {
			return nil, fmt.Errorf(`source %q: no columns for the delimited format (e.g. ["t_ms", "n_fore", "_", "pitot"])`, s.Name)
		}
		times := 0
		for _, c := range s.Delimited.Columns {
			if _, ok := rig.TimeColumns[c]; ok {
				times++
			}
		}
		if times > 1 {
			return nil, fmt.Errorf("source %q: more than one time column", s.Name)
		}
		names := s.Delimited.Channels()
		if len(names) == 0 {
			return nil, fmt.Errorf("source %q: the columns name no channel", s.Name)
		}
		return names, nil
	}
	return nil, fmt.Errorf(`source %q: format %q, want "frame" or "delimited"`, s.Name, s.Format)
}

// Run opens the port, retrying with back-off until it exists, and sends
// blocks on out until ctx is done; then it returns nil. A lost port is
// closed and reopened by the same path, with back-off, for as long as ctx
// lasts. Run returns an error at once only for a configuration the port can
// never accept (no port, bad format, bad line settings).
func (s *Source) Run(ctx context.Context, out chan<- acquire.Block) error {
	if s.Port == "" {
		return fmt.Errorf("source %q: no serial port given", s.Name)
	}
	mode, err := s.mode()
	if err != nil {
		return err
	}
	names, err := s.channelNames()
	if err != nil {
		return err
	}
	r := s.newReader(names)

	ctx, cancel := context.WithCancel(ctx)
	q := &blockQueue{max: s.QueueBlocks, health: &s.Health, wake: make(chan struct{}, 1)}
	if q.max <= 0 {
		q.max = DefaultQueueBlocks
	}
	r.queue = q
	// The forwarder outlives the read loop: it stops only after the loop's
	// last flush, so the block being filled when ctx ends is still sent.
	fctx, stopForward := context.WithCancel(context.WithoutCancel(ctx))
	var wg sync.WaitGroup
	wg.Go(func() { q.forward(fctx, out) })
	defer wg.Wait()
	defer stopForward()
	defer cancel()

	minWait, maxWait := s.BackoffMin, s.BackoffMax
	if minWait <= 0 {
		minWait = DefaultBackoffMin
	}
	if maxWait < minWait {
		maxWait = max(DefaultBackoffMax, minWait)
	}
	wait := minWait
	var down time.Time // when the port was lost; zero before the first open
	warned := false
	for ctx.Err() == nil {
		port, err := s.open(mode)
		if err != nil {
			var pe *serial.PortError
			if errors.As(err, &pe) {
				switch pe.Code() {
				case serial.InvalidSpeed, serial.InvalidDataBits, serial.InvalidParity, serial.InvalidStopBits:
					return fmt.Errorf("source %q: port %s: %w", s.Name, s.Port, err)
				}
			}
			if !warned {
				r.log.Warn("serial port not available; retrying", "port", s.Port, "err", err, "hint", openHint(err))
				warned = true
			}
			select {
			case <-ctx.Done():
			case <-time.After(wait):
			}
			wait = min(2*wait, maxWait)
			continue
		}
		wait, warned = minWait, false
		s.connected.Store(true)
		if down.IsZero() {
			r.log.Info("serial port open", "port", s.Port, "baud", mode.BaudRate)
		} else {
			outage := r.now().Sub(down)
			s.Health.Reconnects.Add(1)
			r.emit(acquire.EventReconnected, outage, fmt.Sprintf("serial port %s back after %s", s.Port, outage.Round(time.Millisecond)))
			r.emit(acquire.EventGap, outage, fmt.Sprintf("no data from %s for %s (port lost)", s.Port, outage.Round(time.Millisecond)))
			r.log.Info("serial port back", "port", s.Port, "outage", outage)
			r.afterOutage = true
		}
		err = r.readPort(ctx, port)
		s.connected.Store(false)
		r.logTotals()
		if ctx.Err() != nil {
			break
		}
		down = r.now()
		r.emit(acquire.EventDisconnected, 0, fmt.Sprintf("serial port %s lost: %v", s.Port, err))
		r.log.Warn("serial port lost; reopening", "port", s.Port, "err", err)
	}
	return nil
}

// open opens and sets up the port.
func (s *Source) open(mode *serial.Mode) (serial.Port, error) {
	port, err := serial.Open(s.Port, mode)
	if err != nil {
		return nil, err
	}
	rt := s.ReadTimeout
	if rt <= 0 {
		rt = DefaultReadTimeout
	}
	if err := port.SetReadTimeout(rt); err != nil {
		port.Close()
		return nil, err
	}
	return port, nil
}

// openHint says what to do about an open error.
func openHint(err error) string {
	var pe *serial.PortError
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return "device not present: check the cable and power; prefer a /dev/serial/by-id/ path"
	case errors.As(err, &pe) && pe.Code() == serial.PermissionDenied:
		return "permission denied: add the user to the dialout group (then log in again)"
	case errors.As(err, &pe) && pe.Code() == serial.PortBusy:
		return "port busy: another program has it open"
	case errors.As(err, &pe) && pe.Code() == serial.InvalidSerialPort:
		return "not a serial device: check the port path"
	}
	return "will retry"
}

// blockQueue holds blocks between the read loop and out. Full: the oldest
// block is dropped and its samples are counted in SamplesDropped, so the
// reader never waits for the consumer.
type blockQueue struct {
	mu     sync.Mutex
	q      []acquire.Block
	max    int
	health *acquire.Health
	wake   chan struct{}
}

func (q *blockQueue) push(b acquire.Block) {
	q.mu.Lock()
	if len(q.q) >= q.max {
		q.health.SamplesDropped.Add(uint64(q.q[0].Len()))
		q.q[0] = acquire.Block{}
		q.q = q.q[1:]
	}
	q.q = append(q.q, b)
	q.mu.Unlock()
	select {
	case q.wake <- struct{}{}:
	default:
	}
}

func (q *blockQueue) pop() (acquire.Block, bool) {
	q.mu.Lock()
	defer q.mu.Unlock()
	if len(q.q) == 0 {
		return acquire.Block{}, false
	}
	b := q.q[0]
	q.q[0] = acquire.Block{}
	q.q = q.q[1:]
	return b, true
}

// forward sends queued blocks on out until ctx is done, then hands over
// what is left without waiting and counts the rest as dropped.
func (q *blockQueue) forward(ctx context.Context, out chan<- acquire.Block) {
	for {
		select {
		case <-ctx.Done():
			q.drain(out)
			return
		case <-q.wake:
		}
		for {
			b, ok := q.pop()
			if !ok {
				break
			}
			select {
			case out <- b:
			case <-ctx.Done():
				q.tryHand(out, b)
				q.drain(out)
				return
			}
		}
	}
}

func (q *blockQueue) drain(out chan<- acquire.Block) {
	for {
		b, ok := q.pop()
		if !ok {
			return
		}
		q.tryHand(out, b)
	}
}

// tryHand sends one of the last blocks at shutdown. The consumer reads until
// every source has returned, so a short wait suffices; past it the block is
// dropped and counted rather than hanging the shutdown.
func (q *blockQueue) tryHand(out chan<- acquire.Block, b acquire.Block) {
	t := time.NewTimer(time.Second)
	defer t.Stop()
	select {
	case out <- b:
	case <-t.C:
		q.health.SamplesDropped.Add(uint64(b.Len()))
	}
}

// clampDt returns dt when it is a usable spacing, else fallback, else 1 µs.
func clampDt(dt, fallback int64) int64 {
	if dt > 0 {
		return dt
	}
	if fallback > 0 {
		return fallback
	}
	return 1
}

// saturated reports whether v is at or beyond a limit.
func saturated(v float64, lim [2]float64) bool {
	return v <= lim[0] || v >= lim[1]
}
