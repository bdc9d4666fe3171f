package estimate

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"time"

	"liftyard/calibrate"
	"liftyard/rig"
)

// Config sets up an Estimator. A zero Config takes every default.
type Config struct {
	// Window is the length of the live moving window (default 2 s).
	Window time.Duration
	// Steady sets the steady-segment test (see SteadyConfig).
	Steady SteadyConfig
	// MaxSegment caps the samples one segment keeps (default 10 min of
	// samples). A steady stretch longer than this is split into several
	// segments, so memory stays bounded on hour-long records.
	MaxSegment time.Duration
	// Now gives the host clock; Live uses it to warn when no block has
	// arrived for a while (default time.Now).
	Now func() time.Time
	// Design, when set, is the design lift curve: each segment gets its
	// DesignCL and En (DesignAt). The caller loads it (estimate does no
	// I/O): a DesignCurve from the rig's [lift] design CSV, or ThinAirfoil.
	Design Design
	// SpinDesign, when set, is a rotor's design lift against the spin
	// ratio: each segment is compared at its spin ratio (SpinDesignAt) and
	// Design is not used.
	SpinDesign *SpinDesignCurve
	// Marks, when not empty, are steady segments set by hand ("user marks
	// override", docs/design.md §4): the estimator makes exactly one segment per
	// mark from the samples inside it (both ends included, on the clock of
	// Segment.TStart/TEnd) instead of running the automatic steady test,
	// in mark order. A mark is not split by a gap, and MinDuration does not
	// apply; a mark holding fewer than two samples gives no segment
	// (UnusedMarks lists it). The live window is unchanged. Marks must be
	// in time order without overlap and no longer than MaxSegment
	// (CheckMarks); NewEstimator refuses them otherwise.
	Marks []Mark
	// Corrections are the Type B inputs of the weight tare and the balance
	// matrix that the pipeline applied to the loads (process builds them
	// from the rig file); each gets its own budget line. Nil: none.
	Corrections []CorrectionInput
}

// ErrRig is returned by NewEstimator when the rig lacks what the estimator
// needs; the message names each missing piece.
var ErrRig = errors.New("rig cannot give lift coefficients")

// Estimator is the streaming estimation stage: it turns calibrated blocks
// into a live moving-window estimate and one Segment per steady stretch.
//
// An Estimator is not safe for concurrent use: the caller serialises Add,
// Live and Flush (one goroutine owns it). Memory is bounded: it keeps the
// live window, one 0.1 s tick and the open segment (capped by MaxSegment).
type Estimator struct {
	rig   *rig.Rig
	cfg   Config
	roles roles

	primary string               // source whose blocks carry the timeline
	held    map[string]heldValue // latest value (and calibration u) of channels from other sources
	join    joiner               // channels of other sources, joined by time (join.go)
	dtUs    int64
	nextTUs int64 // device time expected for the next primary sample
	started bool
	// wallOffUs maps the timeline source's device clock to UTC wall time
	// (µs): AlignedT0Us − T0Us of the first timeline block, taken again
	// after each gap or clock step. Held fixed in between, so sample times
	// stay evenly spaced and marks select the same samples on every replay.
	wallOffUs int64

	ring ring      // live window
	tick sampleBuf // samples of the tick being filled
	seg  sampleBuf // samples of the open segment
	// lastJoinN is the sample count of the last tick that joined seg.
	lastJoinN int
	// joined is the mean angle and sample count of each tick of seg, for
	// trimming the start of a move off its end.
	joined []joinedTick
	det    detector    //
	capN   int         // max samples per segment
	uB     typeBInputs // latest Type B inputs

	segments  int
	ignored   int  // blocks ignored as unusable
	steadyRun bool // a steady tick has been seen in this run (coefficients are shown from then on)
	lastAddAt time.Time
	lastTUs   int64

	rhoCacheTK, rhoCache float64 // density at the last temperature asked (speed rigs)

	spans   []markSpan // Config.Marks on the wall clock; nil: automatic segments
	markIdx int        // the mark being filled
}

// roles are the channel names the lift roles use.
type roles struct {
	normal, axial []string
	q             string
	qIsSpeed      bool
	pitotC        float64
	pitotCU       float64 // standard uncertainty of pitotC
	angle         string
	angleFixedRad float64
	angleURad     float64
	temp          string
	spin          string
}

type heldValue struct {
	v, u, dof, uRel float64
}

// typeBInputs are the Type B standard uncertainties of one sample of each
// derived quantity, with their degrees of freedom.
type typeBInputs struct {
	normalU, normalDof float64
	axialU, axialDof   float64
	qU, qDof           float64 // for a speed channel: u of V, m/s
	alphaU, alphaDof   float64
	spinU, spinDof     float64 // the tachometer's calibration u, rad/s
	// relative span uncertainties (calibrate.Series.URel) and the pitot
	// coefficient's relative u of q
	normalRel, axialRel, qRel, qCoeffRel, spinRel float64
}

// sample is one joined sample time.
type sample struct {
	tUs                            int64
	normalN, axialN, qPa, alphaRad float64
	tempK, spinRadPerS             float64
}

// NewEstimator checks that r has what a force-balance body needs — normal
// force channels, a dynamic pressure (pitot) or speed channel, an angle
// channel or a fixed angle, a positive reference area, and fluid conditions
// the property formulas cover — and returns an Estimator for it. The error
// wraps ErrRig and names every missing or unknown piece.
func NewEstimator(r *rig.Rig, cfg Config) (*Estimator, error) {
	if r == nil {
		return nil, fmt.Errorf("nil rig: %w", ErrRig)
	}
	var problems []error
	need := func(role, name string) {
		if _, ok := r.Channel(name); !ok {
			problems = append(problems, fmt.Errorf("lift.%s names channel %q, which no [[channel]] declares", role, name))
		}
	}
	if r.Kind == rig.KindRoof {
		problems = append(problems, errors.New("kind \"roof\" is reduced per tap, not by the force-balance estimator"))
	}
	ro := roles{normal: r.Lift.Normal, axial: r.Lift.Axial, angle: r.Lift.AngleChannel,
		angleFixedRad: r.Lift.AngleRad, angleURad: r.Lift.AngleURad, temp: r.Lift.Temperature,
		spin: r.Lift.Spin, pitotC: r.Lift.PitotCoeff, pitotCU: r.Lift.PitotCoeffU}
	if len(ro.normal) == 0 {
		problems = append(problems, errors.New("lift.normal is empty: name the normal-force channel(s)"))
	}
	for _, c := range ro.normal {
		need("normal", c)
	}
	for _, c := range ro.axial {
		need("axial", c)
	}
	switch {
	case r.Lift.DynamicPressure != "":
		ro.q = r.Lift.DynamicPressure
		need("dynamic_pressure", ro.q)
		if ro.pitotC < 0 {
			problems = append(problems, fmt.Errorf("lift pitot coefficient %g must be positive", ro.pitotC))
		}
	case r.Lift.Speed != "":
		ro.q, ro.qIsSpeed = r.Lift.Speed, true
		need("speed", ro.q)
	default:
		problems = append(problems, errors.New("no flow reference: set lift.dynamic_pressure (pitot channel) or lift.speed"))
	}
	if ro.angle != "" {
		need("angle", ro.angle)
	}
	if ro.temp != "" {
		need("temperature", ro.temp)
	}
	if ro.spin != "" {
		need("spin", ro.spin)
	}
	if !(r.Reference.AreaM2 > 0) {
		problems = append(problems, errors.New("reference.area_m2 is missing or not positive"))
	}
	if _, err := Properties(r.Fluid, r.Conditions); err != nil {
		problems = append(problems, fmt.Errorf("fluid conditions: %w", err))
	}
	if len(problems) > 0 {
		return nil, fmt.Errorf("rig %q: %w: %w", r.Name, ErrRig, errors.Join(problems...))
	}
	if cfg.Window <= 0 {
		cfg.Window = 2 * time.Second
	}
	if cfg.MaxSegment <= 0 {
		cfg.MaxSegment = 10 * time.Minute
	}
	if cfg.Now == nil {
		cfg.Now = time.Now
	}
	cfg.Steady = cfg.Steady.withDefaults()
	if err := CheckMarks(cfg.Marks, cfg.MaxSegment); err != nil {
		return nil, err
	}
	e := &Estimator{rig: r, cfg: cfg, roles: ro, held: map[string]heldValue{}, det: newDetector(cfg.Steady)}
	if len(cfg.Marks) > 0 {
		e.cfg.Marks = append([]Mark(nil), cfg.Marks...)
		e.spans = newMarkSpans(cfg.Marks)
	}
	e.uB.alphaU = ro.angleURad
	e.uB.alphaDof = math.Inf(1)
	return e, nil
}

// Add feeds one calibrated block and returns the segments it completed
// (usually none), numbered from 0 in the order they complete.
//
// # Joining sources
//
// The source that first carries a normal-force channel sets the timeline:
// sample i of its blocks is at T0Us + i·DtUs. Role channels found in the
// same block are read sample by sample. Role channels that come from other
// sources are joined by time: each is kept as a short history on the shared
// host timeline (AlignedT0Us, set by acquire.Aligner; the device clock when
// blocks are not aligned) and read at each timeline sample by linear
// interpolation, or held at the newest value past its end. A timeline block
// waits until every other source has delivered data up to its last sample,
// or until the timeline has run JoinWait ahead of it, so a source that
// arrives late is still joined at the right instant.
//
// # Wall-clock times
//
// Every time the estimator gives out (Segment.TStart/TEnd, Live.T) and every
// Mark it takes is UTC wall time: timeline sample i is at T0Us + i·DtUs +
// offset, where offset = AlignedT0Us − T0Us of the first timeline block
// (acquire.Aligner's map of the device clock onto the host clock), taken
// again after a gap or a clock step. A device that counts from power-up
// therefore shows the time of day, not 1970. Blocks without a receive time
// (a file with no start time) keep their device clock.
//
// Bad input never panics: a nil or empty block, a block without a positive
// DtUs, or series of unequal length (missing samples read as NaN) give fewer
// results, and unusable blocks are counted in a Live warning.
func (e *Estimator) Add(b *calibrate.Block) []Segment {
	e.lastAddAt = e.cfg.Now()
	if b == nil || len(b.Series) == 0 {
		return nil
	}
	if e.primary == "" {
		for _, c := range e.roles.normal {
			if b.Find(c) != nil {
				e.primary = b.Source
				break
			}
		}
	}
	if b.Source != e.primary {
		e.recordOther(b)
		return e.drain(false)
	}
	if b.DtUs <= 0 || b.Len() == 0 {
		e.ignored++
		return nil
	}
	e.join.queue(b)
	return e.drain(false)
}

// JoinWait is how long a timeline block waits for late sources: longer
// than a Wi-Fi node's usual delay, short enough for a live display.
const JoinWait = 500 * time.Millisecond

// drain processes the pending timeline blocks whose other sources have
// caught up (all of them when force is set).
func (e *Estimator) drain(force bool) []Segment {
	var out []Segment
	for b := e.join.next(force); b != nil; b = e.join.next(force) {
		out = append(out, e.addPrimary(b)...)
	}
	return out
}

// alignedStart returns sample 0 of b on the shared timeline.
func alignedStart(b *calibrate.Block) int64 {
	if b.AlignedT0Us != 0 {
		return b.AlignedT0Us
	}
	return b.T0Us
}

// alignedEnd returns the last sample of b on the shared timeline.
func alignedEnd(b *calibrate.Block) int64 {
	return alignedStart(b) + int64(max(b.Len()-1, 0))*b.DtUs
}

// addPrimary runs one timeline block through the join, the live window and
// the steady test.
func (e *Estimator) addPrimary(b *calibrate.Block) []Segment {
	n := 0
	for _, s := range b.Series {
		n = max(n, len(s.Values))
	}
	if n == 0 {
		return nil
	}
	var out []Segment
	// A change of spacing, a clock step backwards or a gap longer than a
	// tick ends the open segment.
	if e.started && (b.DtUs != e.dtUs || b.T0Us < e.nextTUs || b.T0Us-e.nextTUs > int64(tickDuration/time.Microsecond)) {
		if !e.marked() { // a mark is not split by a gap
			out = e.closeSegment(out)
		}
		e.wallOffUs = alignedStart(b) - b.T0Us
		e.tick.reset()
		e.det.reset()
		if b.DtUs != e.dtUs || b.T0Us < e.nextTUs {
			e.ring = ring{}
		}
	}
	if !e.started {
		e.wallOffUs = alignedStart(b) - b.T0Us
	}
	if !e.started || b.DtUs != e.dtUs {
		e.dtUs = b.DtUs
		e.capN = int(int64(e.cfg.MaxSegment/time.Microsecond) / e.dtUs)
		e.capN = max(e.capN, 2)
	}
	e.started = true
	if e.ring.cap() == 0 {
		e.ring = newRing(max(2, int(math.Ceil(float64(e.cfg.Window/time.Microsecond)/float64(e.dtUs)))))
	}
	e.readTypeB(b)
	pick := func(name string) []float64 {
		if s := b.Find(name); s != nil {
			return s.Values
		}
		return nil
	}
	normal := make([][]float64, len(e.roles.normal))
	for j, c := range e.roles.normal {
		normal[j] = pick(c)
	}
	axial := make([][]float64, len(e.roles.axial))
	for j, c := range e.roles.axial {
		axial[j] = pick(c)
	}
	qv, av, tv, sv := pick(e.roles.q), pick(e.roles.angle), pick(e.roles.temp), pick(e.roles.spin)
	tickN := max(1, int(int64(tickDuration/time.Microsecond)/e.dtUs))
	at0 := alignedStart(b)
	for i := range n {
		sm := sample{tUs: b.T0Us + int64(i)*b.DtUs + e.wallOffUs}
		at := at0 + int64(i)*b.DtUs
		sm.normalN = e.sum(e.roles.normal, normal, i, at)
		sm.axialN = 0
		if len(e.roles.axial) > 0 {
			sm.axialN = e.sum(e.roles.axial, axial, i, at)
		}
		sm.tempK = e.value(e.roles.temp, tv, i, at, e.rig.Conditions.TempK)
		q := e.value(e.roles.q, qv, i, at, math.NaN())
		if e.roles.qIsSpeed {
			sm.qPa = DynamicPressure(e.rhoAt(sm.tempK), q)
		} else {
			sm.qPa = DynamicPressureFromPitot(q, e.roles.pitotC)
		}
		sm.alphaRad = e.value(e.roles.angle, av, i, at, e.roles.angleFixedRad)
		sm.spinRadPerS = e.value(e.roles.spin, sv, i, at, math.NaN())
		e.ring.push(sm)
		e.tick.push(sm)
		if e.marked() {
			out = e.markSample(sm, out)
		}
		e.lastTUs = sm.tUs
		if e.tick.len() >= tickN {
			out = e.endTick(out)
		}
	}
	e.nextTUs = b.T0Us + int64(n)*b.DtUs
	return out
}

// Flush ends the run: the partial tick is judged and the open segment is
// closed and returned when it is long enough.
func (e *Estimator) Flush() []Segment {
	out := e.drain(true)
	if e.tick.len() > 0 {
		out = e.endTick(out)
	}
	if e.marked() {
		out = e.flushMarks(out)
	} else {
		out = e.closeSegment(out)
	}
	e.det.reset()
	return out
}

// endTick judges the filled tick and moves its samples to the open segment
// when it joins.
func (e *Estimator) endTick(out []Segment) []Segment {
	a, q := nanMean(e.tick.alphaRad), nanMean(e.tick.qPa)
	closeSeg, join := e.det.step(a, q, nanMean(e.tick.spinRadPerS))
	e.steadyRun = e.steadyRun || e.det.state == stSteady
	if e.marked() {
		// The steady test still runs for the live display; marks set the
		// segments (markSample).
		e.tick.reset()
		return out
	}
	if closeSeg {
		// The tick that left the bands shows the rig already moving, so the
		// tick before it straddles the start of the move: drop it too
		// (a 4°/s angle ramp stays inside a ±0.25° band for 60 ms).
		e.seg.truncate(e.seg.len() - e.lastJoinN - e.movingTail())
		out = e.closeSegment(out)
	}
	e.lastJoinN = 0
	if join {
		if e.seg.len()+e.tick.len() > e.capN {
			out = e.closeSegment(out)
		}
		e.seg.appendBuf(&e.tick)
		e.lastJoinN = e.tick.len()
		e.joined = append(e.joined, joinedTick{alphaRad: a, spinRadPerS: nanMean(e.tick.spinRadPerS), n: e.tick.len()})
	}
	e.tick.reset()
	return out
}

// joinedTick is one tick of the open segment.
type joinedTick struct {
	alphaRad, spinRadPerS float64
	n                     int
}

// movingTail is the number of samples at the end of the open segment,
// before its last tick, that belong to a move already under way: the
// ticks whose angle or spin was not still against the tick before (a slow move
// stays inside the plateau band for a while), and the tick where that
// motion began. The last tick is dropped by the caller in any case.
func (e *Estimator) movingTail() int {
	last := len(e.joined) - 2 // the caller drops the very last tick
	i := last
	for i >= 1 && (!e.det.alpha.still(e.joined[i].alphaRad, e.joined[i-1].alphaRad) ||
		!e.det.spin.still(e.joined[i].spinRadPerS, e.joined[i-1].spinRadPerS)) {
		i--
	}
	if i == last {
		return 0
	}
	n := 0
	for j := max(i, 0); j <= last; j++ { // ticks i+1…last moved; i is where it began
		n += e.joined[j].n
	}
	return n
}

// closeSegment reduces the open segment, appends it to out when it spans at
// least MinDuration, and empties it.
func (e *Estimator) closeSegment(out []Segment) []Segment {
	defer func() { e.joined = e.joined[:0] }()
	defer e.seg.reset()
	n := e.seg.len()
	if n < 2 || time.Duration(int64(n)*e.dtUs)*time.Microsecond < e.cfg.Steady.MinDuration {
		return out
	}
	seg, ok := e.reduceBuf(&e.seg)
	if !ok {
		return out
	}
	seg.Index = e.segments
	e.segments++
	return append(out, seg)
}

// reduceBuf runs Reduce on a buffer of samples and fills a Segment.
func (e *Estimator) reduceBuf(buf *sampleBuf) (Segment, bool) {
	fl, _ := e.fluidFor(nanMean(buf.tempK))
	w := e.window(buf, fl)
	p, err := Reduce(&w)
	if err != nil {
		return Segment{}, false
	}
	seg := Segment{
		Kind:   e.rig.Kind,
		TStart: time.UnixMicro(buf.tUs[0]).UTC(), TEnd: time.UnixMicro(buf.tUs[len(buf.tUs)-1]).UTC(),
		N: p.N, NEff: p.NEff, AlphaRad: p.AlphaRad, QPa: p.QPa, SpeedMPerS: p.SpeedMPerS,
		RhoKgPerM3: fl.RhoKgPerM3, MuPaS: fl.MuPaS, Re: p.Re, LiftN: p.LiftN, DragN: p.DragN,
		CL: p.CL, CD: p.CD, En: math.NaN(), CLBudget: p.CLBudget, CDBudget: p.CDBudget,
	}
	if sr, ok := e.spinRatio(buf.spinRadPerS, p.SpeedMPerS); ok {
		seg.SpinRatio, seg.SpinRatioU, seg.SpinRatioDof = sr.X, sr.U, sr.Dof
	}
	seg.Fn = e.froude(p.SpeedMPerS.X)
	if e.cfg.SpinDesign != nil {
		// A rotor is compared at its spin ratio, never at its angle.
		if dv, en, ok := SpinDesignAt(e.cfg.SpinDesign, seg.SpinRatioValue(), seg.CL); ok {
			seg.DesignCL, seg.En = dv, en
		}
	} else if dv, en, ok := DesignAt(e.cfg.Design, seg.AlphaRad, seg.CL); ok {
		seg.DesignCL, seg.En = dv, en
	}
	return seg, true
}

// spinRatio returns the spin ratio S = ω̄R/V̄ of a segment with its
// standard uncertainty (docs/physics.md "Spin ratio"): by the GUM law of
// propagation for a product of powers (JCGM 100 eq. 12),
//
//	u(S)² = (R/V)²·u(ω̄)² + (ω̄/V)²·u(R)² + (S/V)²·u(V)²
//	u(ω̄)² = u_A(ω̄)² + u_cal² + (u_rel·ω̄)²
//
// u_A is the Type A of the mean spin (TypeAMean), u_cal the tachometer
// calibration's u (one error common to the whole segment, so not reduced
// by averaging), u_rel its span uncertainty, u(R) the rig's radius_u_m and
// u(V) the segment's speed u. At rest (ω̄ = 0) u(S) = R·u(ω̄)/V. The
// degrees of freedom are Welch–Satterthwaite's. ok is false without a spin
// channel, a radius or a speed.
func (e *Estimator) spinRatio(omega []float64, v calibrate.Value) (calibrate.Value, bool) {
	w := nanMean(omega)
	rM, speed := e.rig.Reference.RadiusM, math.Abs(v.X)
	if math.IsNaN(w) || !(rM > 0) || !(speed > 0) || !finite(speed) {
		return calibrate.Value{}, false
	}
	s := w * rM / speed
	ta := TypeAMean(omega)
	cs := []Contribution{
		{Input: "spin (type A)", U: ta.U, Sensitivity: rM / speed, UY: rM / speed * ta.U, Dof: ta.Dof, TypeA: true},
		{Input: "tachometer calibration", U: e.uB.spinU, Sensitivity: rM / speed, UY: rM / speed * e.uB.spinU, Dof: dofOrInf(e.uB.spinDof)},
		{Input: "tachometer span", U: e.uB.spinRel * math.Abs(w), Sensitivity: rM / speed, UY: e.uB.spinRel * math.Abs(s), Dof: math.Inf(1)},
		{Input: "radius", U: e.rig.Reference.RadiusUM, Sensitivity: w / speed, UY: math.Abs(w/speed) * e.rig.Reference.RadiusUM, Dof: math.Inf(1)},
		{Input: "speed", U: v.U, Sensitivity: -s / speed, UY: math.Abs(s/speed) * v.U, Dof: dofOrInf(v.Dof)},
	}
	out := Combine(cs)
	out.X = s
	return out, true
}

// froude is the Froude number on the reference length for water rigs (a
// body near a free surface); 0 for air rigs or without a length.
func (e *Estimator) froude(speedMPerS float64) float64 {
	if e.rig.Fluid == rig.FluidAir || !(e.rig.Reference.LengthM > 0) || !finite(speedMPerS) {
		return 0
	}
	return Froude(speedMPerS, e.rig.Reference.LengthM)
}

// window builds the Reduce input from a sample buffer.
func (e *Estimator) window(buf *sampleBuf, fl Fluid) Window {
	w := Window{
		NormalN: buf.normalN, QPa: buf.qPa, AlphaRad: buf.alphaRad,
		NormalUN: e.uB.normalU, NormalDof: e.uB.normalDof,
		AxialUN: e.uB.axialU, AxialDof: e.uB.axialDof,
		QUPa: e.uB.qU, QDof: e.uB.qDof,
		AlphaURad: e.uB.alphaU, AlphaDof: e.uB.alphaDof,
		NormalSpanURel: e.uB.normalRel, AxialSpanURel: e.uB.axialRel, QSpanURel: e.uB.qRel, QCoeffURel: e.uB.qCoeffRel,
		AreaM2: e.rig.Reference.AreaM2, AreaUM2: e.rig.Reference.AreaUM2,
		LengthM: e.rig.Reference.LengthM, Fluid: fl,
		Corrections: e.cfg.Corrections, Blockage: BlockageOf(e.rig),
	}
	if len(e.roles.axial) > 0 {
		w.AxialN = buf.axialN
	}
	if e.roles.qIsSpeed {
		// u(q) = ρ·V̄·u(V) for q = ½ρV².
		w.QUPa = fl.RhoKgPerM3 * SpeedFromQ(math.Max(0, nanMean(buf.qPa)), fl.RhoKgPerM3) * e.uB.qU
	}
	return w
}

// Live returns the estimate over the most recent Config.Window of samples,
// computed by Reduce like a segment. ok is false until the window holds two
// complete samples.
func (e *Estimator) Live() (lv Live, ok bool) {
	if e.ring.len() < 2 {
		return lv, false
	}
	buf := e.ring.ordered()
	fl, flErr := e.fluidFor(nanMean(buf.tempK))
	w := e.window(&buf, fl)
	p, err := Reduce(&w)
	if err != nil {
		return lv, false
	}
	lv = Live{
		T: time.UnixMicro(e.lastTUs).UTC(), Window: e.cfg.Window, N: p.N,
		AlphaRad: p.AlphaRad, QPa: p.QPa, SpeedMPerS: p.SpeedMPerS, RhoKgPerM3: fl.RhoKgPerM3,
		Re: p.Re, Fn: e.froude(p.SpeedMPerS.X), LiftN: p.LiftN, DragN: p.DragN, CL: p.CL, CD: p.CD,
		// Steady only when the whole window lies inside the open segment: a
		// window that still holds the end of a move is not steady, whatever
		// the tick-by-tick test says (issue 13: α 8.75 ± 1.87° "steady").
		Steady:   e.det.state == stSteady && e.seg.len() > 0 && buf.tUs[0] >= e.seg.tUs[0],
		Segments: e.segments,
	}
	lv.TempK, lv.TempMeasured = e.rig.Conditions.TempK, false
	if tK := nanMean(buf.tempK); e.roles.temp != "" && flErr == nil && !math.IsNaN(tK) {
		lv.TempK, lv.TempMeasured = tK, true
	}
	if sr, ok := e.spinRatio(buf.spinRadPerS, p.SpeedMPerS); ok {
		lv.SpinRatio, lv.OmegaRadPerS = sr, nanMean(buf.spinRadPerS)
	}
	if flErr != nil {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("fluid temperature channel out of range (%v): using the rig's fixed conditions", flErr))
	}
	if qMax := e.det.qMaxRunPa; p.QPa.X <= flowOffFrac*qMax || p.QPa.X <= 0 {
		lv.Steady, lv.FlowOff = false, true
		lv.Warnings = append(lv.Warnings, "q below 5 % of the run's maximum: flow off, coefficients meaningless")
	}
	switch {
	case lv.FlowOff:
		lv.Withheld = "flow off"
	case !e.steadyRun:
		lv.Withheld = "waiting for the first steady window"
	}
	if lv.Withheld != "" {
		lv.CL, lv.CD = calibrate.Value{}, calibrate.Value{}
	}
	if FewIndependent(p.NEff) {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("C_L from %.0f independent samples (N_eff < %d): the window is short against the flow's correlation time, so its U95 is wide and rests on few degrees of freedom", p.NEff, MinNEff))
	}
	if e.rig.Fluid == rig.FluidAir {
		tK := nanMean(buf.tempK)
		if math.IsNaN(tK) {
			tK = e.rig.Conditions.TempK
		}
		if mach := math.Abs(p.SpeedMPerS.X) / SpeedOfSoundMPerS(tK); mach > 0.3 {
			lv.Warnings = append(lv.Warnings, fmt.Sprintf("Mach %.2f > 0.3: compressibility is not corrected (pitot Δp exceeds ½ρV², so C_L is understated)", mach))
		}
	}
	if idle := e.cfg.Now().Sub(e.lastAddAt); idle > 2*e.cfg.Window+time.Second {
		lv.Steady = false
		lv.Warnings = append(lv.Warnings, fmt.Sprintf(IdleWarningPrefix+"%s: is the source running?", idle.Round(time.Second)))
	}
	if e.ignored > 0 {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("%d blocks ignored: no positive sample spacing", e.ignored))
	}
	return lv, true
}

// fluidFor returns the fluid properties at temperature tK (the rig's fixed
// conditions when tK is NaN or outside the formulas' range; the error says so).
func (e *Estimator) fluidFor(tK float64) (Fluid, error) {
	c := e.rig.Conditions
	var err error
	if !math.IsNaN(tK) && tK != c.TempK {
		c.TempK = tK
		f, ferr := Properties(e.rig.Fluid, c)
		if ferr == nil {
			return f, nil
		}
		err = ferr
		c = e.rig.Conditions
	}
	f, _ := Properties(e.rig.Fluid, c) // checked by NewEstimator
	return f, err
}

// rhoAt returns the density at tK, cached for repeated temperatures (the
// held or fixed temperature is the same for many samples).
func (e *Estimator) rhoAt(tK float64) float64 {
	if tK == e.rhoCacheTK && e.rhoCache > 0 {
		return e.rhoCache
	}
	f, _ := e.fluidFor(tK)
	e.rhoCacheTK, e.rhoCache = tK, f.RhoKgPerM3
	return f.RhoKgPerM3
}

// historyLen bounds the joined history of each channel from another
// source: 4096 samples is 4 s at 1 kHz, far longer than JoinWait.
const historyLen = 4096

// history is one channel's recent samples on the shared timeline.
type history struct {
	tUs []int64
	v   []float64
}

func (h *history) push(tUs int64, v float64) {
	if n := len(h.tUs); n > 0 && tUs <= h.tUs[n-1] {
		return // out of order or repeated: keep the timeline monotonic
	}
	if len(h.tUs) == historyLen {
		copy(h.tUs, h.tUs[historyLen/2:])
		copy(h.v, h.v[historyLen/2:])
		h.tUs, h.v = h.tUs[:historyLen/2], h.v[:historyLen/2]
	}
	h.tUs = append(h.tUs, tUs)
	h.v = append(h.v, v)
}

// at interpolates linearly at tUs; past the newest sample it holds the
// newest value; before the oldest it gives NaN.
func (h *history) at(tUs int64) float64 {
	n := len(h.tUs)
	if n == 0 || tUs < h.tUs[0] {
		return math.NaN()
	}
	if tUs >= h.tUs[n-1] {
		return h.v[n-1]
	}
	i := sort.Search(n, func(i int) bool { return h.tUs[i] > tUs }) // h.tUs[i-1] ≤ t < h.tUs[i]
	t0, t1 := h.tUs[i-1], h.tUs[i]
	f := float64(tUs-t0) / float64(t1-t0)
	return h.v[i-1] + f*(h.v[i]-h.v[i-1])
}

// recordOther keeps the samples of a block from a source other than the
// timeline's, for joining by time, and its calibration uncertainties.
func (e *Estimator) recordOther(b *calibrate.Block) {
	ok := e.join.record(b, func(s *calibrate.Series, v float64) {
		e.held[s.Channel] = heldValue{v: v, u: s.U, dof: s.Dof, uRel: s.URel}
	})
	if !ok {
		e.ignored++
	}
}

// value reads channel name at sample i from vals (this block) or, at
// timeline time atUs, from the history of another source; def applies when
// the role has no channel.
func (e *Estimator) value(name string, vals []float64, i int, atUs int64, def float64) float64 {
	if name == "" {
		return def
	}
	if vals != nil {
		if i < len(vals) {
			return vals[i]
		}
		return math.NaN()
	}
	return e.join.at(name, atUs)
}

// sum adds the channels of one force role at sample i; any missing channel
// makes the sum NaN.
func (e *Estimator) sum(names []string, vals [][]float64, i int, atUs int64) float64 {
	s := 0.0
	for j, name := range names {
		s += e.value(name, vals[j], i, atUs, math.NaN())
	}
	return s
}

// readTypeB updates the Type B inputs from the calibration uncertainties of
// the block's series (or of held channels). Channels summed into one force
// have independent calibrations: u = √(Σ u_j²), ν by Welch–Satterthwaite.
func (e *Estimator) readTypeB(b *calibrate.Block) {
	uOf := func(name string) (u, dof float64, ok bool) {
		if s := b.Find(name); s != nil {
			return s.U, s.Dof, true
		}
		if h, found := e.held[name]; found {
			return h.u, h.dof, true
		}
		return 0, 0, false
	}
	group := func(names []string) (u, dof float64) {
		cs := make([]Contribution, 0, len(names))
		for _, n := range names {
			if uu, d, ok := uOf(n); ok {
				cs = append(cs, Contribution{UY: uu, Dof: dofOrInf(d)})
			}
		}
		v := Combine(cs)
		return v.U, v.Dof
	}
	relOf := func(name string) float64 {
		if s := b.Find(name); s != nil {
			return s.URel
		}
		return e.held[name].uRel
	}
	groupRel := func(names []string) float64 {
		r := 0.0
		for _, n := range names {
			r = max(r, relOf(n))
		}
		return r
	}
	e.uB.normalU, e.uB.normalDof = group(e.roles.normal)
	e.uB.axialU, e.uB.axialDof = group(e.roles.axial)
	e.uB.normalRel, e.uB.axialRel = groupRel(e.roles.normal), groupRel(e.roles.axial)
	if e.roles.q != "" {
		e.uB.qRel = relOf(e.roles.q)
		if e.roles.qIsSpeed {
			e.uB.qRel *= 2 // q = ½ρV²: twice the relative u of V
		} else if c := e.roles.pitotC; c > 0 {
			e.uB.qCoeffRel = 2 * e.roles.pitotCU / c // q = C²·Δp
		}
	}
	if u, d, ok := uOf(e.roles.q); ok {
		if e.roles.qIsSpeed {
			e.uB.qU, e.uB.qDof = u, dofOrInf(d)
		} else {
			c := e.roles.pitotC
			if c == 0 {
				c = 1
			}
			e.uB.qU, e.uB.qDof = u*c*c, dofOrInf(d)
		}
	}
	if e.roles.spin != "" {
		if u, d, ok := uOf(e.roles.spin); ok {
			e.uB.spinU, e.uB.spinDof = u, dofOrInf(d)
		}
		e.uB.spinRel = relOf(e.roles.spin)
	}
	// The angle's u is stated once (docs/physics.md "Type B inputs"): with an
	// angle channel, [lift] angle_u_deg, when given, is the angle's whole
	// standard uncertainty and replaces the channel calibration's u (both
	// describe the same reading; adding them counted it twice, issue 10);
	// without it the channel's u stands. A fixed angle has angle_u_deg only.
	if e.roles.angle != "" {
		if u, d, ok := uOf(e.roles.angle); ok {
			e.uB.alphaU, e.uB.alphaDof = u, dofOrInf(d)
			if e.roles.angleURad > 0 {
				e.uB.alphaU, e.uB.alphaDof = e.roles.angleURad, math.Inf(1)
			}
		}
	}
}

func dofOrInf(d float64) float64 {
	if d == 0 || math.IsNaN(d) {
		return math.Inf(1)
	}
	return d
}

// nanMean is the mean of the finite values of x (NaN when there are none).
func nanMean(x []float64) float64 {
	s, n := 0.0, 0
	for _, v := range x {
		if finite(v) {
			s += v
			n++
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return s / float64(n)
}
