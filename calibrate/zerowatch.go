package calibrate

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"time"

	"liftyard/rig"
)

// Rest, the flow-off test of the zero watch (docs/physics.md "Flow-off
// zero"). The flow is off when the dynamic pressure is small against the
// run's own flow and steady; the pitot's rated range plays no part in it,
// so the same record gives the same zero whatever range the pitot is rated
// for.
const (
	// RestFrac is how small q must be against the run's flow level (the
	// FlowQuantile of the chunk means of q once the flow has come on) for
	// the flow to count as off: 5 % (our choice; a carriage at rest reads
	// a few per mille of its q, and 5 % of q is 22 % of the speed, far
	// below any test condition).
	RestFrac = 0.05
	// FlowQuantile is the quantile of the chunk means of q after the flow
	// came on that stands for the run's flow level: robust to a spike,
	// and to ramps and pauses taking up to 90 % of the time.
	FlowQuantile = 0.9
	// FlowOnSigma: the flow has come on when the mean of q over a chunk
	// rises above the rest level by this many standard deviations of the
	// chunk means at rest (robust, from their median absolute deviation).
	FlowOnSigma = 6
	// FlowOnFloorFrac is the least rise, as a fraction of the pitot's rated
	// capacity when it has one, that counts as the flow coming on (for a
	// noise-free pitot). Only when the flow is noticed depends on it: the
	// rest stretch is then traced back to where q began to change.
	FlowOnFloorFrac = 0.002
	// SteadySigma: a rest chunk is steady when its mean of q lies within
	// this many robust standard deviations of the rest level (or within
	// 0.1 % of the flow, for a noise-free pitot).
	SteadySigma = 4
)

// ZeroKeep bounds the flow-off stretch kept at each end of a run: 30 s of a
// 200 Hz logger is plenty for a mean and little memory.
const ZeroKeep = 30 * time.Second

// ZeroMin is the shortest flow-off stretch that makes a zero (after the
// guard interval).
const ZeroMin = 500 * time.Millisecond

// ZeroGuard is the guard interval dropped from a rest stretch on the side
// of the flow (before the flow comes on, after it goes off), beyond the
// part where q is seen to change: the first and last of a ramp hide in the
// noise, and the balance settles after the carriage stops (our choice).
const ZeroGuard = 500 * time.Millisecond

// ZeroChunk is the length of the chunks of samples whose mean q the rest
// test looks at: long enough to average a sample's noise, short against a
// ramp.
const ZeroChunk = 100 * time.Millisecond

// RestAngleTolRad is how far the angle may move inside one rest stretch:
// a flow-off stretch at several angles (a weight-tare sweep) gives one
// Rest per angle (0.1°, our choice).
const RestAngleTolRad = 0.1 * math.Pi / 180

// restKeep bounds the chunks kept before the flow and after it: a rest
// stretch of ZeroKeep plus its guard plus room to trace a ramp back.
const restKeep = 2 * ZeroKeep

// Rest is one flow-off stretch at one angle: the flow off and steady, the
// angle still. A flow-off angle sweep gives one Rest per angle; they are
// what a weight tare (FitTare) is fitted to.
type Rest struct {
	Zero     Zero    // the mean of each zeroed channel (load cells and pitot) over the stretch
	AlphaRad float64 // mean angle of attack over the stretch, rad; NaN when the rig has no angle channel
	Start    time.Time
	End      time.Time
	After    bool // true for a stretch after the flow went off, false for one before it came on
}

// chunk is ZeroChunk of calibrated samples.
type chunk struct {
	blocks   []Block // the zeroed channels only
	qPa      float64 // mean q
	alphaRad float64 // mean angle, NaN without one
	t0, t1   time.Time
}

func (c chunk) dur() time.Duration { return c.t1.Sub(c.t0) }

// ZeroWatch finds the flow-off stretches at the start and the end of a run
// (docs/design.md §4: flow-off zero before and after each run) and gives the
// zero before the run, to apply live, and the drift between the two. It is
// not safe for concurrent use; the recorder loop owns it.
type ZeroWatch struct {
	q, angle string
	floorPa  float64 // least rise that counts as the flow coming on
	channels []string

	pending   []Block
	pendAlpha []float64
	sources   map[string]bool // sources seen: a chunk holds ZeroChunk of each
	pre       []chunk         // before the flow came on (rolling, restKeep)
	tail      []chunk         // after (rolling, restKeep)
	flowQ     []float64       // chunk means of q after the flow came on
	on        bool            // the flow has come on
	start     []Rest          // rest stretches before the run, per angle
	startSeen bool            // a candidate start rest was found (confirmed or not)
	startOK   bool            // … and it is small against the flow
	startQPa  float64         // the rest level of q before the run
	live      *Drift
	startNote string   // why there is no proper rest before the run
	notes     []string // notes not yet taken by Notes
}

// NewZeroWatch returns nil when the rig has no dynamic-pressure channel to
// tell flow-off by.
func NewZeroWatch(r *rig.Rig) *ZeroWatch {
	ch, ok := r.Channel(r.Lift.DynamicPressure)
	if !ok {
		return nil
	}
	z := &ZeroWatch{q: ch.Name, angle: r.Lift.AngleChannel, floorPa: FlowOnFloorFrac * ch.CapacitySI}
	if z.floorPa <= 0 {
		z.floorPa = 1e-9
	}
	z.channels = append(append(append(z.channels, r.Lift.Normal...), r.Lift.Axial...), ch.Name)
	return z
}

// Observe looks at one calibrated block (before the estimator sees it).
func (z *ZeroWatch) Observe(b *Block) {
	if b.Len() == 0 {
		return
	}
	z.pending = append(z.pending, z.keep(b))
	if s := b.Find(z.angle); s != nil && z.angle != "" {
		z.pendAlpha = append(z.pendAlpha, s.Values...)
	}
	if z.sources == nil {
		z.sources = map[string]bool{}
	}
	z.sources[b.Source] = true
	if z.chunkFull() {
		z.chunkDone()
	}
}

// chunkFull reports whether the pending blocks make a chunk: ZeroChunk of
// samples from every source seen so far, so that a chunk of a rig whose
// load cells and pitot are on different devices holds both (issue 15).
// A source that fell silent does not hold the chunk open: four ZeroChunks
// of any one source close it. With one source this is ZeroChunk of its
// samples, as it always was.
func (z *ZeroWatch) chunkFull() bool {
	per := map[string]time.Duration{}
	for _, b := range z.pending {
		per[b.Source] += time.Duration(int64(b.Len())*b.DtUs) * time.Microsecond
	}
	all := true
	for src := range z.sources {
		if per[src] >= 4*ZeroChunk {
			return true
		}
		all = all && per[src] >= ZeroChunk
	}
	return all
}

// chunkDone closes the pending chunk and runs the rest test on it.
func (z *ZeroWatch) chunkDone() {
	c := chunk{blocks: z.pending, qPa: meanOf(z.pending, z.q), alphaRad: nanMean(z.pendAlpha)}
	c.t0, c.t1 = bounds(z.pending)
	z.pending, z.pendAlpha = nil, nil
	if math.IsNaN(c.qPa) {
		return // no pitot reading in it: neither rest nor flow
	}
	if z.on {
		z.tail = trimChunks(append(z.tail, c))
		z.flowQ = append(z.flowQ, c.qPa)
		z.confirmStart(c.qPa)
		return
	}
	z.pre = trimChunks(append(z.pre, c))
	if len(z.pre) < 6 {
		return
	}
	rest := z.pre[:len(z.pre)-1]
	base, sig := robustLevel(rest)
	thr := max(FlowOnSigma*sig, z.floorPa)
	if base-c.qPa > thr && math.Abs(c.qPa) < RestFrac*math.Abs(base) {
		// q fell to rest without having risen: the record began with the
		// flow on, and there is no rest before the run to take a zero from.
		z.on = true
		for _, p := range z.pre {
			z.flowQ = append(z.flowQ, p.qPa)
		}
		z.tail = z.pre
		z.startNote = fmt.Sprintf("no proper flow-off rest before the run: the record began with the flow on (q %.3g Pa); start the record with the flow off", base)
		z.notes = append(z.notes, z.startNote)
		return
	}
	if c.qPa-base <= thr {
		return
	}
	// The flow has come on. Trace back past the part of the ramp already
	// seen (q off its rest level) to the steady rest before it.
	z.on = true
	z.flowQ = append(z.flowQ, c.qPa)
	z.tail = append(z.tail, c)
	tol := max(SteadySigma*sig, 1e-3*(c.qPa-base))
	i := len(rest)
	for i > 0 && math.Abs(rest[i-1].qPa-base) > tol {
		i--
	}
	j := i
	for j > 0 && math.Abs(rest[j-1].qPa-base) <= tol {
		j--
	}
	// rest[j:i] is steady; rest[:j] is what came before a change (an
	// earlier ramp), which is not this rest.
	steady := dropTime(rest[j:i], ZeroGuard, false)
	z.startSeen = true
	z.startQPa = base
	z.start = restsOf(steady, false)
	if len(z.start) == 0 {
		z.startSeen = false
		z.startNote = fmt.Sprintf("no proper flow-off rest before the run: less than %s of steady flow-off before the flow came on (record at least %s at rest first)",
			ZeroMin, ZeroMin+ZeroGuard)
		z.notes = append(z.notes, z.startNote)
		return
	}
	z.confirmStart(c.qPa)
}

// confirmStart accepts the rest before the run once the flow has been seen
// to be well above it (the rest level of q below RestFrac of the flow): a
// record that began with the flow on has no rest to take a zero from.
func (z *ZeroWatch) confirmStart(qPa float64) {
	if !z.startSeen || z.startOK {
		return
	}
	if math.Abs(z.startQPa) < RestFrac*qPa {
		z.startOK = true
		zs := z.start[len(z.start)-1].Zero // the angle the run starts from
		z.live = &Drift{Start: zs, End: zs}
	}
}

// Notes returns the notes about the flow-off zero raised since the last call
// (e.g. no proper rest before the run), for the run's log.
func (z *ZeroWatch) Notes() []string {
	n := z.notes
	z.notes = nil
	return n
}

// Rests returns the flow-off stretches before the run (the rest before the
// flow came on, split by angle) and after it (once Drift has found them),
// in time order. They are what a flow-off weight tare is fitted to.
func (z *ZeroWatch) Rests() []Rest {
	out := slices.Clone(z.start)
	if !z.startOK {
		out = nil
	}
	if end, _, err := z.endRests(); err == nil {
		out = append(out, end...)
	}
	return out
}

// endRests finds the rest stretches at the end of the data.
func (z *ZeroWatch) endRests() ([]Rest, float64, error) {
	if len(z.pending) > 0 {
		z.chunkDone()
	}
	flow := quantile(z.flowQ, FlowQuantile)
	i := len(z.tail)
	for i > 0 && math.Abs(z.tail[i-1].qPa) < RestFrac*flow {
		i--
	}
	end := z.tail[i:]
	if span0(end) < ZeroMin {
		return nil, flow, fmt.Errorf("no flow-off zero after the run (stop the flow for at least %s before ending)", ZeroMin+ZeroGuard)
	}
	// Steady: q at the level it settled to, judged against the second half.
	level, sig := robustLevel(end[len(end)/2:])
	tol := max(SteadySigma*sig, 1e-3*flow)
	j := len(end)
	for j > 0 && math.Abs(end[j-1].qPa-level) <= tol {
		j--
	}
	rests := restsOf(dropTime(end[j:], ZeroGuard, true), true)
	if len(rests) == 0 {
		return nil, flow, fmt.Errorf("no proper flow-off rest after the run: less than %s of steady flow-off after the flow went off (stop the flow for at least %s before ending)",
			ZeroMin, ZeroMin+ZeroGuard)
	}
	return rests, flow, nil
}

// Drift returns the zeros before and after the run, when the run began and
// ended with the flow off and steady long enough.
func (z *ZeroWatch) Drift() (Drift, error) {
	if !z.on {
		return Drift{}, errors.New("the flow never came on")
	}
	end, flow, err := z.endRests()
	switch {
	case z.startNote != "":
		return Drift{}, errors.New(z.startNote)
	case !z.startOK:
		return Drift{}, fmt.Errorf("no proper flow-off rest before the run: q there was %.3g Pa, not below %g %% of the run's flow of %.3g Pa (start the record with the flow off)",
			z.startQPa, 100*RestFrac, flow)
	case err != nil:
		return Drift{}, err
	}
	start := z.start[len(z.start)-1]
	// The end zero at the angle nearest the start's, so that a weight tare
	// that turns with the angle does not pass for a drift.
	best := end[0]
	for _, r := range end[1:] {
		if math.Abs(r.AlphaRad-start.AlphaRad) < math.Abs(best.AlphaRad-start.AlphaRad) {
			best = r
		}
	}
	return Drift{Start: start.Zero, End: best.Zero}, nil
}

// Live returns the zero taken before the run, as a constant Drift to apply
// to live blocks, once the flow has come on well above it; nil until then
// or when there was no proper flow-off stretch before it.
func (z *ZeroWatch) Live() *Drift { return z.live }

// keep copies the series of the zeroed channels (load cells and pitot; an
// angle or a temperature has no zero to take).
func (z *ZeroWatch) keep(b *Block) Block {
	out := Block{Source: b.Source, T0Us: b.T0Us, DtUs: b.DtUs, AlignedT0Us: b.AlignedT0Us}
	for _, s := range b.Series {
		if slices.Contains(z.channels, s.Channel) {
			s.Values = slices.Clone(s.Values)
			out.Series = append(out.Series, s)
		}
	}
	return out
}

// restsOf splits a steady flow-off stretch where the angle moves and makes a
// Rest of each piece at least ZeroMin long.
func restsOf(cs []chunk, after bool) []Rest {
	var out []Rest
	for len(cs) > 0 {
		n := 1
		for n < len(cs) && sameAngle(cs[n].alphaRad, cs[0].alphaRad) {
			n++
		}
		piece := cs[:n]
		cs = cs[n:]
		if span0(piece) < ZeroMin {
			continue
		}
		var bs []Block
		alpha := 0.0
		for _, c := range piece {
			bs = append(bs, c.blocks...)
			alpha += c.alphaRad
		}
		t0, t1 := piece[0].t0, piece[len(piece)-1].t1
		zs, err := CaptureZero(t0.Add(t1.Sub(t0)/2), bs)
		if err != nil {
			continue
		}
		out = append(out, Rest{Zero: zs, AlphaRad: alpha / float64(len(piece)), Start: t0, End: t1, After: after})
	}
	return out
}

func sameAngle(a, b float64) bool {
	if math.IsNaN(a) || math.IsNaN(b) {
		return math.IsNaN(a) == math.IsNaN(b)
	}
	return math.Abs(a-b) <= RestAngleTolRad
}

// dropTime drops d of chunks from the end of cs (fromFront false) or from
// its front.
func dropTime(cs []chunk, d time.Duration, fromFront bool) []chunk {
	for len(cs) > 0 && d > 0 {
		if fromFront {
			d -= cs[0].dur()
			cs = cs[1:]
		} else {
			d -= cs[len(cs)-1].dur()
			cs = cs[:len(cs)-1]
		}
	}
	return cs
}

// trimChunks keeps the chunks of the last restKeep.
func trimChunks(cs []chunk) []chunk {
	for len(cs) > 1 && cs[len(cs)-1].t1.Sub(cs[1].t0) >= restKeep {
		cs = cs[1:]
	}
	return cs
}

// span0 is the time the chunks cover.
func span0(cs []chunk) time.Duration {
	var d time.Duration
	for _, c := range cs {
		d += c.dur()
	}
	return d
}

// robustLevel is the median of the chunk means of q and their robust
// standard deviation, 1.4826 × the median absolute deviation (the normal
// consistency factor, common practice).
func robustLevel(cs []chunk) (level, sd float64) {
	v := make([]float64, len(cs))
	for i, c := range cs {
		v[i] = c.qPa
	}
	level = quantile(v, 0.5)
	for i := range v {
		v[i] = math.Abs(v[i] - level)
	}
	return level, 1.4826 * quantile(v, 0.5)
}

// quantile is the p-quantile of v by linear interpolation between order
// statistics (NaN for no values). It selects the two order statistics it
// needs in a copy (quickselect, linear time) rather than sorting it: the
// zero watch takes a median of its recent chunks at every chunk.
func quantile(v []float64, p float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := slices.Clone(v)
	h := p * float64(len(s)-1)
	lo := int(math.Floor(h))
	if slices.ContainsFunc(s, math.IsNaN) {
		slices.Sort(s) // NaN first, as sorting orders it
	} else {
		SelectKth(s, min(lo, len(s)-1))
		if lo < len(s)-1 {
			// s[lo+1] is the least of the values above s[lo].
			j := lo + 1
			for i := lo + 2; i < len(s); i++ {
				if s[i] < s[j] {
					j = i
				}
			}
			s[lo+1], s[j] = s[j], s[lo+1]
		}
	}
	if lo >= len(s)-1 {
		return s[len(s)-1]
	}
	return s[lo] + (h-float64(lo))*(s[lo+1]-s[lo])
}

// SelectKth reorders s (no NaN) so that s[k] is the value a sort would put
// there, with no greater value before it and no smaller one after it
// (quickselect: a median in linear time, for the robust scales here and in
// estimate's steady test).
func SelectKth(s []float64, k int) {
	lo, hi := 0, len(s)-1
	for lo < hi {
		// Median of three as the pivot; Hoare partition.
		mid := lo + (hi-lo)/2
		if s[mid] < s[lo] {
			s[mid], s[lo] = s[lo], s[mid]
		}
		if s[hi] < s[lo] {
			s[hi], s[lo] = s[lo], s[hi]
		}
		if s[hi] < s[mid] {
			s[hi], s[mid] = s[mid], s[hi]
		}
		pivot := s[mid]
		i, j := lo, hi
		for i <= j {
			for s[i] < pivot {
				i++
			}
			for s[j] > pivot {
				j--
			}
			if i <= j {
				s[i], s[j] = s[j], s[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return // s[j+1 .. i-1] all equal the pivot
		}
	}
}

// meanOf is the mean of a channel's finite values over blocks; NaN for none.
func meanOf(bs []Block, ch string) float64 {
	var vs []float64
	for i := range bs {
		if s := bs[i].Find(ch); s != nil {
			vs = append(vs, s.Values...)
		}
	}
	return nanMean(vs)
}

func nanMean(v []float64) float64 {
	sum, n := 0.0, 0
	for _, x := range v {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			sum, n = sum+x, n+1
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return sum / float64(n)
}

// bounds is the time of the first sample of bs and the end of the last, on
// the shared timeline.
func bounds(bs []Block) (time.Time, time.Time) {
	first, last := bs[0], bs[len(bs)-1]
	t0 := first.AlignedT0Us
	if t0 == 0 {
		t0 = first.T0Us
	}
	t1 := last.AlignedT0Us
	if t1 == 0 {
		t1 = last.T0Us
	}
	t1 += int64(last.Len()) * last.DtUs
	return time.UnixMicro(t0), time.UnixMicro(t1)
}
