package estimate

import (
	"math"
	"slices"
	"time"

	"liftyard/rig"
)

// SteadyConfig sets the steady-segment test. A zero field takes its default.
//
// # The test
//
// A steady segment is a plateau of the set-points the rig moves: the angle
// of attack, the flow (carriage speed or fan, seen in q) and, for rotors,
// the spin. Samples are grouped into ticks of 0.1 s (tickDuration); each
// tick gives a mean angle, a mean q (the mean of the last five ticks, 0.5 s)
// and a mean spin (NaN samples skipped; a tick with no angle or no q is
// ignored). A tick belongs to the plateau while each set-point stays within
// its band of the reference:
//
//	angle: |α − α_ref| ≤ max(AngleTolRad, k·s_α)
//	q:     |q − q_ref| ≤ max(QTolFrac, k·s_q)·q_ref
//	spin:  |ω − ω_ref| ≤ max(SpinTolFrac, k·s_ω)·|ω_ref|
//
// where k = TurbulenceK and s is a robust scale of the signal's own
// short-term fluctuation: 1.4826 × the median absolute deviation of the
// tick values from their segment's mean, over the last scaleTicks steady
// ticks of the run (relative to the mean for q and spin). The fixed
// tolerances are floors for quiet flows; in gusty flow the band widens with
// the gusts, so a gust never splits a step while a set-point step larger
// than the band still does. The scale is used once scaleMinTicks steady
// ticks (10 s) have been seen; before that the band is the floor, three
// times the floor for q and spin.
//
// A segment starts when a tick arrives with the flow on. The first Settle
// of ticks are discarded while the rig settles: each must stay within the
// bands of the tick before it, or settling starts again. After that every
// tick joins while it stays within the bands of the references, the means
// of the ticks joined so far. The first tick outside ends the segment (it
// starts a new one, in settling), as does flow off (tick q ≤ 5 % of the
// largest tick q of the run, or q ≤ 0), a gap in the device clock, or the
// end of the run (Flush). A segment is kept when its samples span at least
// MinDuration. User marks (Config.Marks) replace the test.
type SteadyConfig struct {
	AngleTolRad float64       // floor of the angle band's half-width, rad (default 0.25° = 0.004 363 rad)
	QTolFrac    float64       // floor of the q band's half-width, fraction of q (default 0.08)
	SpinTolFrac float64       // floor of the spin band's half-width, fraction of the spin (default 0.03)
	TurbulenceK float64       // band half-width in robust standard deviations of the tick fluctuation (default 6)
	Settle      time.Duration // discarded at the start of each segment (default 0.3 s; negative: none)
	MinDuration time.Duration // shortest segment kept (default 1.5 s)
}

// tickDuration is the block length of the steady test: long enough to
// average sensor noise at 100 Hz–1 kHz, short against a 1.5 s segment.
const tickDuration = 100 * time.Millisecond

// flowOffFrac is the fraction of the run's largest q below which the flow
// counts as off.
const flowOffFrac = 0.05

// scaleTicks is how many recent steady ticks the robust scale of each
// set-point looks back over (60 s): several gust time scales, and short
// enough to follow a change of the flow's turbulence within a run.
// scaleMinTicks (10 s of steady ticks: several of the slowest gusts) is
// the fewest it uses.
// Until then the band of q and spin is startFloorFactor times its floor,
// so the gusts of the run's first seconds do not split its first step
// (the angle keeps its floor: angle noise does not come from the flow).
const (
	scaleTicks       = 600
	scaleMinTicks    = 100
	startFloorFactor = 3
)

func (c SteadyConfig) withDefaults() SteadyConfig {
	if c.AngleTolRad <= 0 {
		c.AngleTolRad = rig.Rad(0.25)
	}
	if c.QTolFrac <= 0 {
		c.QTolFrac = 0.08
	}
	if c.SpinTolFrac <= 0 {
		c.SpinTolFrac = 0.03
	}
	if c.TurbulenceK <= 0 {
		c.TurbulenceK = 6
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

// setpoint is the band test of one set-point with its robust scale.
type setpoint struct {
	floor, k float64
	rel      bool // deviations relative to |ref| (q, spin) or absolute (angle)

	ref  float64 // settling: previous tick; steady: mean of joined ticks
	devs [scaleTicks]float64
	devN int
	// scale caches the robust scale; stale after push.
	scale      float64
	scaleStale bool
	sorted     []float64
}

func (s *setpoint) dev(v, ref float64) float64 {
	d := math.Abs(v - ref)
	if s.rel {
		d /= math.Abs(ref)
	}
	return d
}

// push records a steady tick's deviation from the segment's reference.
func (s *setpoint) push(v float64) {
	if math.IsNaN(v) || math.IsNaN(s.ref) {
		return
	}
	s.devs[s.devN%scaleTicks] = s.dev(v, s.ref)
	s.devN++
	s.scaleStale = true
}

// halfWidth is the band's half-width (fraction of |ref| when rel).
func (s *setpoint) halfWidth() float64 {
	if s.devN < scaleMinTicks {
		if s.rel {
			return startFloorFactor * s.floor
		}
		return s.floor
	}
	if s.scaleStale {
		n := min(s.devN, scaleTicks)
		s.sorted = append(s.sorted[:0], s.devs[:n]...)
		slices.Sort(s.sorted)
		med := s.sorted[n/2]
		if n%2 == 0 {
			med = (s.sorted[n/2-1] + s.sorted[n/2]) / 2
		}
		s.scale = 1.4826 * med // MAD → σ for a normal distribution
		s.scaleStale = false
	}
	return math.Max(s.floor, s.k*s.scale)
}

// within reports whether v is inside the band about ref; a NaN on either
// side (a set-point the rig does not measure) is always within.
func (s *setpoint) within(v, ref float64) bool {
	if math.IsNaN(v) || math.IsNaN(ref) {
		return true
	}
	return s.dev(v, ref) <= s.halfWidth()
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

	state     detectorState
	alpha, q  setpoint
	spin      setpoint
	nJoined   int
	settled   int
	qMaxRunPa float64
	qHist     [qSmoothTicks]float64 // recent tick q, for the smoothed q
	qHistN    int
}

// qSmoothTicks is the number of ticks whose mean q is compared with the
// band (0.5 s): it averages the fastest turbulence, so the robust scale
// and the band follow the slower gusts.
const qSmoothTicks = 5

func newDetector(cfg SteadyConfig) detector {
	return detector{cfg: cfg, settleTicks: int(math.Ceil(float64(cfg.Settle) / float64(tickDuration))),
		alpha: setpoint{floor: cfg.AngleTolRad, k: cfg.TurbulenceK},
		q:     setpoint{floor: cfg.QTolFrac, k: cfg.TurbulenceK, rel: true},
		spin:  setpoint{floor: cfg.SpinTolFrac, k: cfg.TurbulenceK, rel: true},
	}
}

// step judges one tick (spin is NaN when the rig has none). closeSeg
// reports that the open segment ends before this tick; join that this
// tick's samples belong to the (possibly new) open segment.
func (d *detector) step(alphaRad, qPa, spinRadPerS float64) (closeSeg, join bool) {
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
	within := func() bool {
		return d.alpha.within(alphaRad, d.alpha.ref) && d.q.within(qPa, d.q.ref) && d.spin.within(spinRadPerS, d.spin.ref)
	}
	switch d.state {
	case stIdle:
		d.startSettling(alphaRad, qPa, spinRadPerS)
		return false, d.promote(alphaRad, qPa, spinRadPerS)
	case stSettling:
		if !within() {
			d.startSettling(alphaRad, qPa, spinRadPerS)
			return false, d.promote(alphaRad, qPa, spinRadPerS)
		}
		d.alpha.ref, d.q.ref, d.spin.ref = alphaRad, qPa, spinRadPerS
		d.settled++
		return false, d.promote(alphaRad, qPa, spinRadPerS)
	default: // stSteady
		if !within() {
			d.startSettling(alphaRad, qPa, spinRadPerS)
			return true, d.promote(alphaRad, qPa, spinRadPerS)
		}
		d.alpha.push(alphaRad)
		d.q.push(qPa)
		d.spin.push(spinRadPerS)
		d.nJoined++
		f := 1 / float64(d.nJoined)
		d.alpha.ref += (alphaRad - d.alpha.ref) * f
		d.q.ref += (qPa - d.q.ref) * f
		if !math.IsNaN(spinRadPerS) {
			if math.IsNaN(d.spin.ref) {
				d.spin.ref = spinRadPerS
			}
			d.spin.ref += (spinRadPerS - d.spin.ref) * f
		}
		return false, true
	}
}

func (d *detector) startSettling(alphaRad, qPa, spinRadPerS float64) {
	d.state = stSettling
	d.alpha.ref, d.q.ref, d.spin.ref = alphaRad, qPa, spinRadPerS
	d.settled = 0
}

// promote moves a settling detector to steady once enough ticks have been
// discarded; with no settling time the current tick joins at once.
func (d *detector) promote(alphaRad, qPa, spinRadPerS float64) bool {
	if d.state != stSettling {
		return false
	}
	if d.settled < d.settleTicks {
		return false
	}
	d.state = stSteady
	d.alpha.ref, d.q.ref, d.spin.ref = alphaRad, qPa, spinRadPerS
	d.nJoined = 1
	return true
}

// reset returns to idle (gap in the clock, change of sample spacing); the
// run's maximum q and the robust scales are kept.
func (d *detector) reset() { d.state = stIdle; d.qHistN = 0 }
