package estimate

import (
	"math"
	"time"

	"liftyard/rig"
)

// SteadyConfig sets the steady-segment test. A zero field takes its default.
//
// # The test
//
// Samples are grouped into ticks of 0.1 s (tickDuration); each tick gives a
// mean angle and a mean q (NaN samples skipped; a tick with no angle or no q
// is ignored). The q compared is the mean of the last five ticks (0.5 s), so
// that single gusts do not end a segment. A segment starts when a tick arrives with the flow on. The
// first Settle of ticks are discarded while the rig settles: each must stay
// within the tolerances of the tick before it, or settling starts again.
// After that every tick joins the segment while its angle stays within
// ±AngleTolRad of the segment's reference angle and its q within
// ±QTolFrac·q_ref, the references being the means of the ticks joined so
// far. The first tick outside ends the segment (it starts a new one, in
// settling), as does flow off (tick q ≤ 5 % of the largest tick q of the run,
// or q ≤ 0), a gap in the device clock, or the end of the run (Flush). A
// segment is kept when its samples span at least MinDuration.
type SteadyConfig struct {
	AngleTolRad float64       // half-width of the angle band, rad (default 0.25° = 0.004 363 rad)
	QTolFrac    float64       // half-width of the q band as a fraction of q (default 0.08)
	Settle      time.Duration // discarded at the start of each segment (default 0.3 s; negative: none)
	MinDuration time.Duration // shortest segment kept (default 1.5 s)
}

// tickDuration is the block length of the steady test: long enough to
// average sensor noise at 100 Hz–1 kHz, short against a 1.5 s segment.
const tickDuration = 100 * time.Millisecond

// flowOffFrac is the fraction of the run's largest q below which the flow
// counts as off.
const flowOffFrac = 0.05

func (c SteadyConfig) withDefaults() SteadyConfig {
	if c.AngleTolRad <= 0 {
		c.AngleTolRad = rig.Rad(0.25)
	}
	if c.QTolFrac <= 0 {
		c.QTolFrac = 0.08
	}
	if c.Settle == 0 {
		c.Settle = 300 * time.Millisecond
	}
	if c.Settle < 0 {
		c.Settle = 0
	}
	if c.MinDuration <= 0 {
		c.MinDuration = 1500 * time.Millisecond
	}
	return c
}

// detectorState is where the steady test stands.
type detectorState int

const (
	stIdle     detectorState = iota // flow off or nothing seen
	stSettling                      // discarding the first ticks of a segment
	stSteady                        // ticks join the open segment
)

// detector runs the steady test on tick means. It knows nothing of samples.
type detector struct {
	cfg         SteadyConfig
	settleTicks int

	state      detectorState
	refA, refQ float64 // settling: previous tick; steady: mean of joined ticks
	nJoined    int
	settled    int
	qMaxRunPa  float64
	qHist      [qSmoothTicks]float64 // recent tick q, for the smoothed q
	qHistN     int
}

// qSmoothTicks is the number of ticks whose mean q is compared with the
// band (0.5 s): gusts shorter than that must not end a segment, while a
// change of carriage speed or fan setting still does.
const qSmoothTicks = 5

func newDetector(cfg SteadyConfig) detector {
	return detector{cfg: cfg, settleTicks: int(math.Ceil(float64(cfg.Settle) / float64(tickDuration)))}
}

// step judges one tick. closeSeg reports that the open segment ends before
// this tick; join that this tick's samples belong to the (possibly new) open
// segment.
func (d *detector) step(alphaRad, qPa float64) (closeSeg, join bool) {
	if math.IsNaN(alphaRad) || math.IsNaN(qPa) {
		return false, false
	}
	d.qMaxRunPa = math.Max(d.qMaxRunPa, qPa)
	d.qHist[d.qHistN%qSmoothTicks] = qPa
	d.qHistN++
	qPa = 0
	k := min(d.qHistN, qSmoothTicks)
	for _, v := range d.qHist[:k] {
		qPa += v
	}
	qPa /= float64(k)
	if qPa <= 0 || qPa <= flowOffFrac*d.qMaxRunPa {
		closeSeg = d.state == stSteady
		d.state = stIdle
		return closeSeg, false
	}
	within := func(a, q float64) bool {
		return math.Abs(alphaRad-a) <= d.cfg.AngleTolRad && math.Abs(qPa-q) <= d.cfg.QTolFrac*math.Abs(q)
	}
	switch d.state {
	case stIdle:
		d.startSettling(alphaRad, qPa)
		return false, d.promote(alphaRad, qPa)
	case stSettling:
		if !within(d.refA, d.refQ) {
			d.startSettling(alphaRad, qPa)
			return false, d.promote(alphaRad, qPa)
		}
		d.refA, d.refQ = alphaRad, qPa
		d.settled++
		return false, d.promote(alphaRad, qPa)
	default: // stSteady
		if !within(d.refA, d.refQ) {
			d.startSettling(alphaRad, qPa)
			return true, d.promote(alphaRad, qPa)
		}
		d.nJoined++
		d.refA += (alphaRad - d.refA) / float64(d.nJoined)
		d.refQ += (qPa - d.refQ) / float64(d.nJoined)
		return false, true
	}
}

func (d *detector) startSettling(alphaRad, qPa float64) {
	d.state = stSettling
	d.refA, d.refQ = alphaRad, qPa
	d.settled = 0
}

// promote moves a settling detector to steady once enough ticks have been
// discarded; with no settling time the current tick joins at once.
func (d *detector) promote(alphaRad, qPa float64) bool {
	if d.state != stSettling {
		return false
	}
	if d.settled < d.settleTicks {
		return false
	}
	d.state = stSteady
	d.refA, d.refQ = alphaRad, qPa
	d.nJoined = 1
	return true
}

// reset returns to idle (gap in the clock, change of sample spacing); the
// run's maximum q is kept.
func (d *detector) reset() { d.state = stIdle; d.qHistN = 0 }
