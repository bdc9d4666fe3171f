package process

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// Options sets up a Pipeline. A zero Options takes every default.
type Options struct {
	// Roof sets up a roof rig's stage (block length, epochs, live window);
	// zero fields take estimate's defaults. Other kinds ignore it.
	Roof estimate.RoofConfig
	// Marks, when not empty, set the steady segments of a force-balance
	// rig by hand (estimate.Config.Marks); a kind whose segments are not
	// steady stretches refuses them.
	Marks []estimate.Mark
	// Drift, when set, is a zero drift known in advance (from the
	// flow-off zeros before and after a stored run): it is removed from
	// every calibrated block instead of the zero watch's live zero.
	Drift *calibrate.Drift
	// Now gives the host clock for the stage's staleness warnings and the
	// channel monitor. Nil means time.Now.
	Now func() time.Time
}

// Step is what one block gave.
type Step struct {
	// Events are the channel-health and overload events the block raised,
	// to be stored with the run.
	Events []acquire.Event
	// Segments are the result rows the block completed.
	Segments []estimate.Segment
}

// Pipeline is the one processing chain of liftyard: clock alignment →
// calibration → weight tare and balance matrix (when the rig names them) →
// flow-off zero / zero drift → the rig kind's estimation
// stage, with the channel-health and load monitors beside it. The live
// recorder steps it block by block; import, reprocess, user marks and the
// zero-drift correction Replay stored or file blocks through it. The same
// blocks therefore give the same segments on every path.
//
// A Pipeline is not safe for concurrent use: one goroutine owns it.
type Pipeline struct {
	rig     *rig.Rig
	cal     *calibrate.Calibrator
	aligner acquire.Aligner
	chans   *acquire.Monitor
	loads   *calibrate.LoadMonitor
	zeros   *calibrate.ZeroWatch // nil when the kind or the rig takes no flow-off zero
	drift   *calibrate.Drift     // fixed drift (Options.Drift), or nil
	stage   Stage
	corr    *corrections // weight tare and balance matrix; nil when the rig names neither
	now     func() time.Time
	values  map[string]float64 // each channel's latest block mean, SI, as the stage gets it
}

// ChannelValue is one channel's latest value as the estimation stage gets
// it (calibrated, tared, zeroed): the mean of its newest block, in the SI
// unit of its quantity.
type ChannelValue struct {
	Channel  string
	Quantity rig.Quantity
	ValueSI  float64 // NaN when the newest block held no finite sample
}

// New builds the pipeline of rig r with the calibrations in cal
// (calibrate.NewCalibratorFrom).
func New(r *rig.Rig, cal *calibrate.Calibrator, opt Options) (*Pipeline, error) {
	k, err := kindOf(r)
	if err != nil {
		return nil, err
	}
	if opt.Now == nil {
		opt.Now = time.Now
	}
	st, err := NewStage(r, opt)
	if err != nil {
		return nil, err
	}
	p := &Pipeline{rig: r, cal: cal, chans: acquire.NewMonitor(r), loads: calibrate.NewLoadMonitor(r),
		drift: opt.Drift, stage: st, now: opt.Now, corr: newCorrections(r)}
	if k.flowOffZero {
		p.zeros = calibrate.NewZeroWatch(r)
	}
	return p, nil
}

// Step aligns b's clock in place (b is stored that way), checks its
// channels, calibrates it, removes the zero and hands it to the stage.
func (p *Pipeline) Step(b *acquire.Block) Step {
	cb, st := p.front(b)
	st.Segments = p.stage.Add(cb)
	return st
}

// front is Step up to the stage: everything but the estimation, which
// Replay runs on a goroutine of its own.
func (p *Pipeline) front(b *acquire.Block) (*calibrate.Block, Step) {
	var st Step
	p.aligner.Align(b)
	st.Events = append(st.Events, p.chans.Observe(b)...)
	cb := p.cal.Apply(b)
	p.corr.applyTare(&cb)    // weight tare at the measured angle (corrections.go)
	p.corr.applyBalance(&cb) // interaction matrix: outputs → components
	switch {
	case p.drift != nil:
		p.drift.Correct(&cb)
	case p.zeros != nil:
		p.zeros.Observe(&cb)
		if z := p.zeros.Live(); z != nil {
			z.Correct(&cb) // the flow-off zero taken before the run
		}
		for _, n := range p.zeros.Notes() {
			st.Events = append(st.Events, acquire.Event{T: b.Received, Source: b.Source, Kind: EventFlowOffZero, Message: n})
		}
	}
	p.keepValues(&cb)
	for _, l := range p.loads.Observe(&cb) {
		st.Events = append(st.Events, acquire.Event{T: b.Received, Source: b.Source, Kind: EventOverload,
			Message: fmt.Sprintf("channel %s at %.0f %% of its rated %g %s (%s)", l.Channel, 100*l.PeakFrac, l.CapacitySI, l.Unit, l.State)})
	}
	return &cb, st
}

// EventFlowOffZero is the kind of the event raised when a run has no
// proper flow-off zero (no steady rest before the flow came on, or after it
// went off): its values carry the balance's zero offsets.
const EventFlowOffZero acquire.EventKind = "flow_off_zero"

// EventOverload is the kind of the event a channel loaded past its warning
// or alarm level raises.
const EventOverload acquire.EventKind = "overload"

// Live is the stage's moving-window estimate; false until there is one.
func (p *Pipeline) Live() (estimate.Live, bool) { return p.stage.Live() }

// Block is the length of a roof stage's result block; 0 for kinds whose
// segments are not fixed blocks.
func (p *Pipeline) Block() time.Duration {
	if b, ok := p.stage.(interface{ Block() time.Duration }); ok {
		return b.Block()
	}
	return 0
}

// Flush closes the open segment at the end of the data.
func (p *Pipeline) Flush() []estimate.Segment { return p.stage.Flush() }

// Channels is each channel's health now.
func (p *Pipeline) Channels() []acquire.ChannelHealth { return p.chans.Snapshot(p.now()) }

// Loads is each rated channel's largest load against its capacity.
func (p *Pipeline) Loads() []calibrate.LoadHealth { return p.loads.Snapshot() }

// keepValues keeps the mean of each series of cb for Values.
func (p *Pipeline) keepValues(cb *calibrate.Block) {
	if p.values == nil {
		p.values = map[string]float64{}
	}
	for _, s := range cb.Series {
		sum, n := 0.0, 0
		for _, v := range s.Values {
			if !math.IsNaN(v) && !math.IsInf(v, 0) {
				sum += v
				n++
			}
		}
		p.values[s.Channel] = math.NaN()
		if n > 0 {
			p.values[s.Channel] = sum / float64(n)
		}
	}
}

// Values is the latest value of every rig channel seen, in rig order.
func (p *Pipeline) Values() []ChannelValue {
	var out []ChannelValue
	for _, c := range p.rig.Channels {
		if v, ok := p.values[c.Name]; ok {
			out = append(out, ChannelValue{Channel: c.Name, Quantity: c.Quantity, ValueSI: v})
		}
	}
	return out
}

// Ages is each source's data-age clock now (acquire.Monitor.Ages).
func (p *Pipeline) Ages() []acquire.SourceAge { return p.chans.Ages(p.now()) }

// AcknowledgeLoad releases the held overload alarm of channel
// (calibrate.LoadMonitor.Acknowledge); false when none was held.
func (p *Pipeline) AcknowledgeLoad(channel string) bool { return p.loads.Acknowledge(channel) }

// Drift returns the zero drift between the flow-off zeros seen before and
// after the data, or an error saying why there is none (the kind takes no
// flow-off zero, the flow was never off at one end, ...).
func (p *Pipeline) Drift() (calibrate.Drift, error) {
	if p.zeros == nil {
		return calibrate.Drift{}, fmt.Errorf("rig kind %q takes no flow-off zero", p.rig.Kind)
	}
	return p.zeros.Drift()
}

// Rests returns the flow-off rest stretches seen so far, one per angle,
// before the flow came on and (at the end of the data) after it went off:
// the inputs of a flow-off weight tare. Nil when the kind takes no flow-off
// zero.
func (p *Pipeline) Rests() []calibrate.Rest {
	if p.zeros == nil {
		return nil
	}
	return p.zeros.Rests()
}

// UnusedMarks returns the user marks that held too few samples to give a
// segment (none for a stage without marks).
func (p *Pipeline) UnusedMarks() []estimate.Mark {
	if e, ok := p.stage.(interface{ UnusedMarks() []estimate.Mark }); ok {
		return e.UnusedMarks()
	}
	return nil
}

// Replay steps every block of src through p, then flushes it, and returns
// every segment in order. each, when not nil, is called after every step
// with the block (nil for the final step, which holds the segments Flush
// closed); its error stops the replay and is returned. each may look at p
// (Live, Values): everything runs on the caller's goroutine. Replay is the
// one offline path: import, reprocess, user marks, the zero-drift
// correction and a run's timeline all go through it (ReplayStaged where
// each leaves p alone).
func Replay(ctx context.Context, src acquire.Replayer, p *Pipeline, each func(b *acquire.Block, st Step) error) ([]estimate.Segment, error) {
	var segs []estimate.Segment
	err := src.Replay(ctx, func(b acquire.Block) error {
		st := p.Step(&b)
		segs = append(segs, st.Segments...)
		if each != nil {
			return each(&b, st)
		}
		return nil
	})
	if err != nil {
		return segs, err
	}
	last := Step{Segments: p.Flush()}
	segs = append(segs, last.Segments...)
	if each != nil {
		if err := each(nil, last); err != nil {
			return segs, err
		}
	}
	return segs, nil
}

// StageAhead is how many calibrated blocks ReplayStaged lets the
// estimation stage fall behind the rest of the pipeline.
const StageAhead = 64

// ReplayStaged is Replay with the estimation stage on a goroutine of its
// own, up to StageAhead blocks behind the clock alignment, calibration and
// zero, so that on two cores the two halves of the pipeline overlap (and
// a file's parse, and the store's writer, on theirs). It gives the same
// segments in the same order: the stage sees the same calibrated blocks
// in the same order. each is called on the caller's goroutine after every
// block with its events and the segments the stage has completed since
// the last call (a segment therefore comes with a later block than the one
// that closed it); the final call has a nil block, the segments still to
// come and those Flush closed. When the source fails, a last call with a
// nil block hands on the segments the blocks before the failure closed. each must not look at p's stage (Live)
// while the replay runs.
func ReplayStaged(ctx context.Context, src acquire.Replayer, p *Pipeline, each func(b *acquire.Block, st Step) error) ([]estimate.Segment, error) {
	var segs []estimate.Segment
	in := make(chan *calibrate.Block, StageAhead)
	// Every block gives one result; the stage is at most StageAhead blocks
	// (and the one in hand) ahead of the reader of done.
	done := make(chan []estimate.Segment, StageAhead+2)
	go func() {
		defer close(done)
		for cb := range in {
			done <- p.stage.Add(cb)
		}
	}()
	ready := func(wait bool) []estimate.Segment {
		var out []estimate.Segment
		for {
			if wait {
				s, ok := <-done
				if !ok {
					return out
				}
				out = append(out, s...)
				continue
			}
			select {
			case s := <-done:
				out = append(out, s...)
			default:
				return out
			}
		}
	}
	eachFailed := false
	err := src.Replay(ctx, func(b acquire.Block) error {
		cb, st := p.front(&b)
		in <- cb
		st.Segments = ready(false)
		segs = append(segs, st.Segments...)
		if each != nil {
			if err := each(&b, st); err != nil {
				eachFailed = true
				return err
			}
		}
		return nil
	})
	close(in)
	rest := ready(true)
	segs = append(segs, rest...)
	if err != nil {
		// The blocks before the error closed these segments: hand them on
		// as Replay would have, unless each itself failed.
		if each != nil && !eachFailed && len(rest) > 0 {
			err = errors.Join(err, each(nil, Step{Segments: rest}))
		}
		return segs, err
	}
	last := Step{Segments: append(rest, p.Flush()...)}
	segs = append(segs, last.Segments[len(rest):]...)
	if each != nil {
		if err := each(nil, last); err != nil {
			return segs, err
		}
	}
	return segs, nil
}
