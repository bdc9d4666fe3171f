package estimate

import (
	"math"
	"slices"
	"time"

	"liftyard/calibrate"
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
//	spin:  |ω − ω_ref| ≤ max(SpinTolFrac, k·s_ω)·max(|ω_ref|, SpinTolRadPerS/SpinTolFrac)
//
// where k = TurbulenceK and s is a robust scale of the signal's own
// short-term fluctuation: 1.4826 × the median absolute deviation of the
// tick values from their segment's mean, over the last scaleTicks steady
// ticks of the run (relative to the mean for q and spin; for the spin
// relative to at least SpinTolRadPerS/SpinTolFrac, so a rotor at rest,
// ω_ref = 0, has a band of SpinTolRadPerS and its tachometer's noise does
// not split the step, issue 12). The fixed
// tolerances are floors for quiet flows; in gusty flow the band widens with
// the gusts, so a gust never splits a step while a set-point step larger
// than the band still does. The scale is used once scaleMinTicks steady
// ticks (10 s) have been seen; before that the band is the floor, three
// times the floor for q and spin.
//
// A segment starts when a tick arrives with the flow on. The first Settle
// of ticks are discarded while the rig settles: each must stay within the
// bands of the tick before it, and the angle and the spin must be still
// (within stillFrac of their band of the tick before), or settling starts
// again, so the tail of an angle move or of a spin-up never opens a
// segment. After that every
// tick joins while it stays within the bands of the references, the means
// of the ticks joined so far. The first tick outside ends the segment (it
// starts a new one, in settling), as does flow off (tick q ≤ 5 % of the
// largest tick q of the run, or q ≤ 0), a gap in the device clock, or the
// end of the run (Flush). A segment is kept when its samples span at least
// MinDuration. User marks (Config.Marks) replace the test.
type SteadyConfig struct {
	AngleTolRad float64 // floor of the angle band's half-width, rad (default 0.25° = 0.004 363 rad)
	QTolFrac    float64 // floor of the q band's half-width, fraction of q (default 0.08)
	SpinTolFrac float64 // floor of the spin band's half-width, fraction of the spin (default 0.03)
	// SpinTolRadPerS is the smallest half-width of the spin band, rad/s
	// (default 2 rad/s ≈ 19 rpm): the band of a rotor at rest or turning
	// slowly, where a fraction of the spin would be no band at all.
	SpinTolRadPerS float64
	TurbulenceK    float64       // band half-width in robust standard deviations of the tick fluctuation (default 6)
	Settle         time.Duration // discarded at the start of each segment (default 0.3 s; negative: none)
	MinDuration    time.Duration // shortest segment kept (default 1.5 s)
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
//
// The robust scales are sorted afresh every scaleRefresh ticks (5 s), not
// every tick: a median over 60 s barely moves in 5 s more, and sorting
// it each tick cost most of the estimator's time.
const (
	scaleRefresh     = 50
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
	if c.SpinTolRadPerS <= 0 {
		c.SpinTolRadPerS = 2
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
	// minRef is the smallest |ref| a relative deviation is taken against
	// (spin: SpinTolRadPerS/SpinTolFrac; 0 for q, which is never near 0
	// while the flow is on).
	minRef float64

	ref  float64 // settling: previous tick; steady: mean of joined ticks
	devs [scaleTicks]float64
	devN int
	// scale caches the robust scale; stale after push.
	scale      float64
	scaleStale bool
	sorted     []float64
	// Tick-to-tick differences, for stillness (angle only).
	diffs       [scaleTicks]float64
	diffN       int
	stillWidth  float64
	stillStale  bool
	sortedDiffs []float64
}

func (s *setpoint) dev(v, ref float64) float64 {
	d := math.Abs(v - ref)
	if s.rel {
		d /= math.Max(math.Abs(ref), s.minRef)
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
	s.scaleStale = s.scaleStale || s.devN%scaleRefresh == 0 || s.devN == scaleMinTicks
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
		calibrate.SelectKth(s.sorted, n/2)
		med := s.sorted[n/2]
		if n%2 == 0 {
			med = (slices.Max(s.sorted[:n/2]) + med) / 2
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

// Stillness of the angle: how far one tick's mean may move from the tick
// before while the set-point counts as still. It is k·σ_d, σ_d the robust
// spread of the tick-to-tick differences of the run's angle (1.4826 × the
// median |difference| over the last scaleTicks ticks with the flow on:
// moves are a minority of the ticks, so the median sees the sensor's noise,
// not the moves), with a floor of stillFloorFrac of the band's floor
// (0.01°) for a quantised or noise-free angle. Until stillMinTicks
// differences are known it is stillFrac of the band's floor (0.06° a tick,
// a move of 0.6°/s).
const (
	stillFrac      = 0.25
	stillFloorFrac = 0.04
	stillMinTicks  = 20
)

// pushDiff records the tick-to-tick difference of the set-point from
// prev to v (relative to prev when rel, as still compares it).
func (s *setpoint) pushDiff(v, prev float64) {
	if math.IsNaN(v) || math.IsNaN(prev) {
		return
	}
	s.diffs[s.diffN%scaleTicks] = s.dev(v, prev)
	s.diffN++
	s.stillStale = s.stillStale || s.diffN%scaleRefresh == 0 || s.diffN == stillMinTicks
}

// still reports whether v has moved less than the stillness width from
// the tick before (ref); NaN is always still.
func (s *setpoint) still(v, ref float64) bool {
	if math.IsNaN(v) || math.IsNaN(ref) {
		return true
	}
	if s.diffN < stillMinTicks {
		return s.dev(v, ref) <= stillFrac*s.floor
	}
	if s.stillStale {
		n := min(s.diffN, scaleTicks)
		s.sortedDiffs = append(s.sortedDiffs[:0], s.diffs[:n]...)
		calibrate.SelectKth(s.sortedDiffs, n/2)
		s.stillWidth = math.Max(stillFloorFrac*s.floor, s.k*1.4826*s.sortedDiffs[n/2])
		s.stillStale = false
	}
	return s.dev(v, ref) <= s.stillWidth
}

// detectorState is where the steady test stands.
type detectorState int

const (
	stIdle     detectorState = iota // flow off or nothing seen
	stSettling                      // discarding the first ticks of a segment
	stSteady                        // ticks join the open segment
)

// detector runs the steady test on tick means. It knows nothing of samples
// beyond the tick angles it was given (joined, for trimming a segment's
// end).
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
	prevAlpha float64 // the last tick's angle with the flow on (NaN: none)
	prevSpin  float64 // the last tick's spin with the flow on (NaN: none)
}

// qSmoothTicks is the number of ticks whose mean q is compared with the
// band (0.5 s): it averages the fastest turbulence, so the robust scale
// and the band follow the slower gusts.
const qSmoothTicks = 5

func newDetector(cfg SteadyConfig) detector {
	return detector{cfg: cfg, settleTicks: int(math.Ceil(float64(cfg.Settle) / float64(tickDuration))),
		alpha:     setpoint{floor: cfg.AngleTolRad, k: cfg.TurbulenceK},
		q:         setpoint{floor: cfg.QTolFrac, k: cfg.TurbulenceK, rel: true},
		spin:      setpoint{floor: cfg.SpinTolFrac, k: cfg.TurbulenceK, rel: true, minRef: cfg.SpinTolRadPerS / cfg.SpinTolFrac},
		prevAlpha: math.NaN(), prevSpin: math.NaN(),
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
	prev, prevSpin := d.prevAlpha, d.prevSpin
	d.prevAlpha, d.prevSpin = alphaRad, spinRadPerS
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
		d.prevAlpha, d.prevSpin = math.NaN(), math.NaN()
		return closeSeg, false
	}
	d.alpha.pushDiff(alphaRad, prev)
	d.spin.pushDiff(spinRadPerS, prevSpin)
	within := func() bool {
		return d.alpha.within(alphaRad, d.alpha.ref) && d.q.within(qPa, d.q.ref) && d.spin.within(spinRadPerS, d.spin.ref)
	}
	switch d.state {
	case stIdle:
		d.startSettling(alphaRad, qPa, spinRadPerS)
		return false, d.promote(alphaRad, qPa, spinRadPerS)
	case stSettling:
		// While settling the angle must also be still: a tick-to-tick
		// change inside the plateau band is still a move when it is more
		// than stillFrac of the band (a ramp's tail 0.2° a tick would pass
		// a 0.25° band, and its trend would bias the mean and shrink N_eff).
		if !within() || !d.alpha.still(alphaRad, d.alpha.ref) || !d.spin.still(spinRadPerS, d.spin.ref) {
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
func (d *detector) reset() {
	d.state = stIdle
	d.qHistN = 0
	d.prevAlpha, d.prevSpin = math.NaN(), math.NaN()
}
