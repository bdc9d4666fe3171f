package estimate

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"time"

	"liftyard/calibrate"
	"liftyard/rig"
)

// RoofZoneWhole is the zone name of the whole-roof result: every tap,
// area-weighted.
const RoofZoneWhole = "roof"

// roofFlowOffFrac is the fraction of the reference channel's rated capacity
// below which the flow counts as off (common practice: a few per cent of
// full scale is inside a transducer's zero band).
const roofFlowOffFrac = 0.02

// RoofConfig sets up a RoofEstimator. A zero field takes the default given
// beside it.
type RoofConfig struct {
	Block  time.Duration // length of one result block (default 10 min, common practice; tests use seconds)
	Epochs int           // sub-epochs per block for the extreme-value fit (default 16 — the "sixteen epochs" convention, docs/references.md §12)
	Window time.Duration // live window (default 10 s)
	Now    func() time.Time
}

// RoofEstimator is the streaming estimation stage of a roof rig (docs/design.md §1
// workflow 2, §4 "Roofs"): it turns calibrated blocks of tap pressures into
// one Segment per zone per block of time, plus a whole-roof Segment (zone
// "roof"), and a live moving-window estimate.
//
// # Method
//
// Each tap channel is a calibrated differential pressure p_i against the
// static reference, Pa. The reference dynamic pressure q is the rig's
// [lift] dynamic_pressure channel (q = C²·Δp with the pitot coefficient C),
// or ½ρV² from a [lift] speed channel. Per sample (quasi-steady):
//
//	Cp_ext,i(t) = p_i(t)/q(t)
//	Cp_int(t)   = [internal] cp, or p_int(t)/q(t) from the internal channel
//	Cp_i(t)     = Cp_ext,i(t) − Cp_int(t)         (net; negative = uplift)
//	C_Z(t)      = Σ_{i∈Z} A_i·Cp_i(t) / Σ_{i∈Z} A_i  (zone, area-weighted)
//	F_Z(t)      = q(t)·Σ_{i∈Z} A_i·Cp_i(t)          (net force, N; negative = upward)
//
// (EN 1991-1-4:2005 §5.2 and 7.2.9 for net pressure w = q·(c_pe − c_pi);
// area weighting over tributary areas is common practice.) A sample whose q
// is below the flow-off level, or where any tap of the zone (or q, or the
// internal channel) has no value, gives no value for that zone.
//
// Per zone per block: CpMean is the mean of C_Z with a standard
// uncertainty combining Type A (TypeAMean: integrated autocorrelation time
// with Sokal's automatic window, bias-corrected, ν = N/(2W+1)), and Type B, the calibration
// uncertainties of the taps (sensitivity A_i/(A_Z·q̄)), of q (−(C̄ + Cp_int)/q̄
// for a fixed internal cp, −C̄/q̄ with an internal channel) and of the
// internal channel (−1/q̄), combined by JCGM 100 eq. 10 with ν by
// Welch–Satterthwaite. A fixed [internal] cp is taken as exact (the rig
// gives no uncertainty for it). CpRMS is the standard deviation of C_Z.
// CpPeak is the expected extreme suction: the block is cut into Epochs
// sub-epochs, the Gumbel distribution is fitted by maximum likelihood to
// the epoch maxima of −C_Z (suction is the negative side), and the Cook &
// Mayne value U + 1.4/a is returned with its sign turned back (negative).
// When all epoch minima are equal the peak is that value; with fewer than
// three epochs holding data it is NaN. UpliftN is the mean of F_Z (equal to
// q̄·Σ A_i·Cp_i when q does not fluctuate), Type A by N_eff of F_Z and Type B
// A_i·u(p_i), A_Z·Cp_int·u(q) and A_Z·u(p_int). DesignCp is the zone's
// design_cp with U = design_u/K95(∞), so that DesignCp.U95() returns the
// rig's expanded design_u exactly, and En = (C̄ − design)/√(U95_m² +
// design_u²) (the En function).
//
// # Blocks and joining
//
// Blocks of time are laid on a grid starting at the first sample (device
// clock). A block is complete when a sample beyond its end arrives; it
// gives results when its samples span at least half a Block and its mean q
// is at or above 2 % of the q channel's rated capacity (or, for an unrated
// channel, 5 % of the largest block-mean q so far). Tap, q and internal
// channels are read from the same calibrated block: the source that first
// delivers the q channel carries the timeline, and blocks of other sources
// are ignored and counted in a Live warning. (The example rig has one tap
// scanner carrying every channel; joining separate sources by time as the
// force-balance Estimator does is not done here.)
//
// A RoofEstimator is not safe for concurrent use: the caller serialises
// Add, Live and Flush. Memory holds one block and one live window of
// per-zone samples (about 10 min × rate × 2·(zones + 1) float64).
type RoofEstimator struct {
	rig *rig.Rig
	cfg RoofConfig

	zones    []roofZone // rig zones with taps, then the whole roof
	q        string     // q channel
	qSpeed   bool       // q channel is a speed, m/s
	pitotC   float64    // pitot coefficient (1 when unset)
	intChan  string     // internal pressure channel, or ""
	intCp    float64    // fixed internal cp when intChan is ""
	fluid    Fluid
	qFloorPa float64 // flow-off level from the rated capacity; 0 when unrated

	uB map[string]heldValue // latest calibration u and dof per channel

	primary  string
	started  bool
	dtUs     int64
	gridT0Us int64 // start of the block grid
	blkT0Us  int64 // start of the open block
	nextTUs  int64 // device time expected for the next sample
	// wallOffUs maps the device clock to UTC wall time (µs), as in
	// Estimator: fixed at the first block and after a clock step.
	wallOffUs int64

	blk  roofBuf // open block
	live roofBuf // live window

	maxBlockQPa float64
	segments    int
	blocks      int
	flowOff     int // blocks dropped as flow off
	short       int // blocks dropped as shorter than half a block
	ignored     int // unusable blocks
	otherSrc    int // blocks of other sources
	missing     map[string]bool
	lastAddAt   time.Time
	lastTUs     int64
}

// roofZone is one zone's taps and design value.
type roofZone struct {
	name      string
	chans     []string
	areasM2   []float64
	areaM2    float64
	design    float64
	designU95 float64
	hasDesign bool
}

// roofBuf holds per-sample values: time, q and each zone's net Cp and force.
type roofBuf struct {
	tUs []int64
	qPa []float64
	cp  [][]float64 // [zone][sample]
	fN  [][]float64
}

func newRoofBuf(zones int) roofBuf {
	return roofBuf{cp: make([][]float64, zones), fN: make([][]float64, zones)}
}

func (b *roofBuf) len() int { return len(b.tUs) }

func (b *roofBuf) reset() {
	b.tUs, b.qPa = b.tUs[:0], b.qPa[:0]
	for z := range b.cp {
		b.cp[z], b.fN[z] = b.cp[z][:0], b.fN[z][:0]
	}
}

// dropBefore removes samples older than tUs, compacting now and then so the
// backing arrays stay bounded.
func (b *roofBuf) dropBefore(tUs int64) {
	k := 0
	for k < len(b.tUs) && b.tUs[k] < tUs {
		k++
	}
	if k == 0 {
		return
	}
	if k < cap(b.tUs)/2 && len(b.tUs)-k > 0 {
		b.tUs, b.qPa = b.tUs[k:], b.qPa[k:]
		for z := range b.cp {
			b.cp[z], b.fN[z] = b.cp[z][k:], b.fN[z][k:]
		}
		return
	}
	n := copy(b.tUs, b.tUs[k:])
	b.tUs = b.tUs[:n]
	b.qPa = b.qPa[:copy(b.qPa, b.qPa[k:])]
	for z := range b.cp {
		b.cp[z] = b.cp[z][:copy(b.cp[z], b.cp[z][k:])]
		b.fN[z] = b.fN[z][:copy(b.fN[z], b.fN[z][k:])]
	}
}

// NewRoofEstimator checks that r has what a roof needs — pressure taps with
// positive areas, zones with at least one tap, a reference q (lift
// dynamic_pressure channel, or lift speed) and the internal pressure (a
// channel or a fixed cp) — and returns a RoofEstimator. The error wraps
// ErrRig and names every missing piece.
func NewRoofEstimator(r *rig.Rig, cfg RoofConfig) (*RoofEstimator, error) {
	if r == nil {
		return nil, fmt.Errorf("nil rig: %w", ErrRig)
	}
	var problems []error
	need := func(role, name string) {
		if _, ok := r.Channel(name); !ok {
			problems = append(problems, fmt.Errorf("%s names channel %q, which no [[channel]] declares", role, name))
		}
	}
	if len(r.Taps) == 0 {
		problems = append(problems, errors.New("no pressure taps: add [[tap]] tables with name, channel, area_m2 and zone"))
	}
	if len(r.Zones) == 0 {
		problems = append(problems, errors.New("no zones: add [[zone]] tables with name, design_cp and design_u"))
	}
	e := &RoofEstimator{rig: r, cfg: cfg, uB: map[string]heldValue{}, missing: map[string]bool{}}
	byZone := map[string]int{}
	for _, z := range r.Zones {
		if z.Name == RoofZoneWhole {
			problems = append(problems, fmt.Errorf("zone %q: the name is kept for the whole-roof result; rename the zone", z.Name))
			continue
		}
		byZone[z.Name] = len(e.zones)
		e.zones = append(e.zones, roofZone{name: z.Name, design: z.DesignCp, designU95: z.DesignU,
			hasDesign: z.DesignCp != 0 || z.DesignU != 0})
	}
	whole := roofZone{name: RoofZoneWhole}
	for _, t := range r.Taps {
		need(fmt.Sprintf("tap %q", t.Name), t.Channel)
		if !(t.AreaM2 > 0) || math.IsInf(t.AreaM2, 0) {
			problems = append(problems, fmt.Errorf("tap %q: area_m2 %g must be positive", t.Name, t.AreaM2))
			continue
		}
		zi, ok := byZone[t.Zone]
		if !ok {
			problems = append(problems, fmt.Errorf("tap %q: zone %q is not a [[zone]]", t.Name, t.Zone))
			continue
		}
		z := &e.zones[zi]
		z.chans = append(z.chans, t.Channel)
		z.areasM2 = append(z.areasM2, t.AreaM2)
		z.areaM2 += t.AreaM2
		whole.chans = append(whole.chans, t.Channel)
		whole.areasM2 = append(whole.areasM2, t.AreaM2)
		whole.areaM2 += t.AreaM2
	}
	for _, z := range e.zones {
		if len(z.chans) == 0 && len(r.Taps) > 0 {
			problems = append(problems, fmt.Errorf("zone %q has no taps: add [[tap]] with zone = %q or remove the zone", z.name, z.name))
		}
	}
	e.zones = append(e.zones, whole)
	switch {
	case r.Lift.DynamicPressure != "":
		e.q = r.Lift.DynamicPressure
		need("lift.dynamic_pressure", e.q)
		if r.Lift.PitotCoeff < 0 {
			problems = append(problems, fmt.Errorf("lift pitot coefficient %g must be positive", r.Lift.PitotCoeff))
		}
	case r.Lift.Speed != "":
		e.q, e.qSpeed = r.Lift.Speed, true
		need("lift.speed", e.q)
	default:
		problems = append(problems, errors.New("no reference q: set lift.dynamic_pressure (the reference pitot channel) or lift.speed"))
	}
	switch {
	case r.Internal.Channel != "":
		e.intChan = r.Internal.Channel
		need("internal.channel", e.intChan)
	case r.Internal.HasCp:
		e.intCp = r.Internal.Cp
		if !finite(e.intCp) {
			problems = append(problems, errors.New("internal cp must be a finite number"))
		}
	default:
		problems = append(problems, errors.New("no internal pressure: add [internal] with cp = 0.0 for a sealed mock-up, or channel = \"<pressure channel>\""))
	}
	fl, err := Properties(r.Fluid, r.Conditions)
	if err != nil {
		problems = append(problems, fmt.Errorf("fluid conditions: %w", err))
	}
	if len(problems) > 0 {
		return nil, fmt.Errorf("rig %q: %w: %w", r.Name, ErrRig, errors.Join(problems...))
	}
	e.fluid = fl
	e.pitotC = r.Lift.PitotCoeff
	if e.pitotC == 0 {
		e.pitotC = 1
	}
	if ch, ok := r.Channel(e.q); ok && ch.CapacitySI > 0 {
		if e.qSpeed {
			e.qFloorPa = roofFlowOffFrac * DynamicPressure(fl.RhoKgPerM3, ch.CapacitySI)
		} else {
			e.qFloorPa = roofFlowOffFrac * e.pitotC * e.pitotC * ch.CapacitySI
		}
	}
	if e.cfg.Block <= 0 {
		e.cfg.Block = 10 * time.Minute
	}
	if e.cfg.Epochs <= 0 {
		e.cfg.Epochs = 16
	}
	if e.cfg.Window <= 0 {
		e.cfg.Window = 10 * time.Second
	}
	if e.cfg.Now == nil {
		e.cfg.Now = time.Now
	}
	e.blk = newRoofBuf(len(e.zones))
	e.live = newRoofBuf(len(e.zones))
	return e, nil
}

// Zones returns the names of the zones the estimator reports, in order:
// the rig's zones, then RoofZoneWhole.
func (e *RoofEstimator) Zones() []string {
	out := make([]string, len(e.zones))
	for i, z := range e.zones {
		out[i] = z.name
	}
	return out
}

// Add feeds one calibrated block and returns the segments of the blocks of
// time it completed: one per zone (rig order, then "roof") per block,
// Index counting from 0 over every segment of the run, so each segment has
// its own Index.
//
// Bad input never panics: a nil or empty block, a block without a positive
// DtUs, or series of unequal length (missing samples read as NaN) give
// fewer results; NaN samples are skipped; unusable blocks are counted in a
// Live warning.
func (e *RoofEstimator) Add(b *calibrate.Block) []Segment {
	e.lastAddAt = e.cfg.Now()
	if b == nil || len(b.Series) == 0 {
		return nil
	}
	if e.primary == "" && b.Find(e.q) != nil {
		e.primary = b.Source
	}
	if b.Source != e.primary {
		e.otherSrc++
		return nil
	}
	n := 0
	for _, s := range b.Series {
		n = max(n, len(s.Values))
	}
	if b.DtUs <= 0 || n == 0 {
		e.ignored++
		return nil
	}
	for _, s := range b.Series {
		e.uB[s.Channel] = heldValue{u: s.U, dof: dofOrInf(s.Dof)}
	}
	pick := func(name string) []float64 {
		if s := b.Find(name); s != nil {
			return s.Values
		}
		e.missing[name] = true
		return nil
	}
	at := func(v []float64, i int) float64 {
		if i < len(v) {
			return v[i]
		}
		return math.NaN()
	}
	qv := pick(e.q)
	var iv []float64
	if e.intChan != "" {
		iv = pick(e.intChan)
	}
	tapV := make([][][]float64, len(e.zones))
	for z, zn := range e.zones {
		tapV[z] = make([][]float64, len(zn.chans))
		for j, c := range zn.chans {
			tapV[z][j] = pick(c)
		}
	}
	var out []Segment
	// A change of spacing or a clock step backwards closes the open block
	// and restarts the grid.
	if e.started && (b.DtUs != e.dtUs || b.T0Us < e.nextTUs) {
		out = e.closeBlock(out)
		e.started = false
		e.live.reset()
	}
	if !e.started {
		e.started, e.dtUs = true, b.DtUs
		e.wallOffUs = alignedStart(b) - b.T0Us
		e.gridT0Us, e.blkT0Us = b.T0Us+e.wallOffUs, b.T0Us+e.wallOffUs
	}
	blockUs := int64(e.cfg.Block / time.Microsecond)
	cp := make([]float64, len(e.zones))
	fN := make([]float64, len(e.zones))
	for i := range n {
		tUs := b.T0Us + int64(i)*b.DtUs + e.wallOffUs
		if tUs >= e.blkT0Us+blockUs {
			out = e.closeBlock(out)
			e.blkT0Us = e.gridT0Us + (tUs-e.gridT0Us)/blockUs*blockUs
		}
		q := at(qv, i)
		if e.qSpeed {
			q = DynamicPressure(e.fluid.RhoKgPerM3, q)
		} else {
			q = DynamicPressureFromPitot(q, e.pitotC)
		}
		var pInt float64
		if e.intChan != "" {
			pInt = at(iv, i)
		} else {
			pInt = e.intCp * q
		}
		ok := finite(q) && q > 0 && q >= e.qFloorPa && finite(pInt)
		for z, zn := range e.zones {
			cp[z], fN[z] = math.NaN(), math.NaN()
			if !ok {
				continue
			}
			sp := 0.0
			for j, a := range zn.areasM2 {
				p := at(tapV[z][j], i)
				if !finite(p) {
					sp = math.NaN()
					break
				}
				sp += a * (p - pInt)
			}
			if finite(sp) {
				fN[z] = sp
				cp[z] = sp / (zn.areaM2 * q)
			}
		}
		e.blk.push(tUs, q, cp, fN)
		e.live.push(tUs, q, cp, fN)
		e.lastTUs = tUs
	}
	e.nextTUs = b.T0Us + int64(n)*b.DtUs
	e.live.dropBefore(e.lastTUs - int64(e.cfg.Window/time.Microsecond) + 1)
	return out
}

func (b *roofBuf) push(tUs int64, q float64, cp, fN []float64) {
	b.tUs = append(b.tUs, tUs)
	b.qPa = append(b.qPa, q)
	for z := range b.cp {
		b.cp[z] = append(b.cp[z], cp[z])
		b.fN[z] = append(b.fN[z], fN[z])
	}
}

// Flush ends the run: the open block is closed and its segments returned
// when it holds at least half a block.
func (e *RoofEstimator) Flush() []Segment {
	return e.closeBlock(nil)
}

// closeBlock reduces the open block, appends its segments to out when it
// is long enough and the flow is on, and empties it.
func (e *RoofEstimator) closeBlock(out []Segment) []Segment {
	defer e.blk.reset()
	n := e.blk.len()
	if n < 2 {
		return out
	}
	if time.Duration(int64(n)*e.dtUs)*time.Microsecond*2 < e.cfg.Block {
		e.short++
		return out
	}
	e.blocks++
	qBar := nanMean(e.blk.qPa)
	if finite(qBar) {
		e.maxBlockQPa = math.Max(e.maxBlockQPa, qBar)
	}
	if !e.flowOn(qBar) {
		e.flowOff++
		return out
	}
	for z := range e.zones {
		r, ok := e.reduceZone(&e.blk, z, true)
		if !ok {
			continue
		}
		s := Segment{
			Kind: rig.KindRoof, Index: e.segments, TStart: time.UnixMicro(e.blk.tUs[0]).UTC(),
			TEnd: time.UnixMicro(e.blk.tUs[n-1]).UTC(), N: r.n, NEff: r.nEff,
			QPa: r.q, SpeedMPerS: e.speed(r.q), RhoKgPerM3: e.fluid.RhoKgPerM3, MuPaS: e.fluid.MuPaS,
			En: math.NaN(), Zone: e.zones[z].name, CpMean: r.cp, CpRMS: r.rms, CpPeak: r.peak,
			UpliftN: r.force,
		}
		s.DesignCp, s.En = e.design(z, r.cp)
		e.segments++
		out = append(out, s)
	}
	return out
}

// flowOn reports whether a mean q counts as flow on.
func (e *RoofEstimator) flowOn(qBarPa float64) bool {
	if !finite(qBarPa) || qBarPa <= 0 {
		return false
	}
	if e.qFloorPa > 0 {
		return qBarPa >= e.qFloorPa
	}
	return qBarPa > flowOffFrac*e.maxBlockQPa
}

// design returns zone z's design value and the normalised error of cp.
func (e *RoofEstimator) design(z int, cp calibrate.Value) (calibrate.Value, float64) {
	zn := e.zones[z]
	if !zn.hasDesign {
		return calibrate.Value{}, math.NaN()
	}
	d := calibrate.Value{X: zn.design, U: zn.designU95 / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)}
	return d, En(cp, d)
}

// speed returns V = √(2q/ρ) with u(V) = u(q)/(ρ·V).
func (e *RoofEstimator) speed(q calibrate.Value) calibrate.Value {
	v := SpeedFromQ(q.X, e.fluid.RhoKgPerM3)
	if !finite(v) || v == 0 {
		return calibrate.Value{X: v}
	}
	return calibrate.Value{X: v, U: q.U / (e.fluid.RhoKgPerM3 * math.Abs(v)), Dof: q.Dof}
}

// zoneResult is one zone reduced over a buffer.
type zoneResult struct {
	n          int
	nEff       float64
	q          calibrate.Value
	cp         calibrate.Value
	rms, peak  float64
	minCp      float64
	force      calibrate.Value
	typeACpU   float64
	typeAForce float64
}

// reduceZone reduces zone z over buf: mean net Cp with its budget, rms,
// peak (when withPeak), minimum and mean force. ok is false when fewer than
// two samples of the zone have values.
func (e *RoofEstimator) reduceZone(buf *roofBuf, z int, withPeak bool) (r zoneResult, ok bool) {
	zn := e.zones[z]
	cps, fs := buf.cp[z], buf.fN[z]
	var sum, sumF, sumQ float64
	r.minCp = math.Inf(1)
	for k, c := range cps {
		if !finite(c) {
			continue
		}
		r.n++
		sum += c
		sumF += fs[k]
		sumQ += buf.qPa[k]
		r.minCp = math.Min(r.minCp, c)
	}
	if r.n < 2 {
		return r, false
	}
	nf := float64(r.n)
	mean, meanF, qBar := sum/nf, sumF/nf, sumQ/nf
	var ss float64
	for _, c := range cps {
		if !finite(c) {
			continue
		}
		ss += (c - mean) * (c - mean)
	}
	r.rms = math.Sqrt(ss / (nf - 1))
	aCp := TypeAMean(cps)
	r.nEff = aCp.NEff
	r.typeACpU = aCp.U

	// Type B: calibrations of the taps, q and the internal channel.
	qU, qDof := e.qTypeB(qBar)
	cpB := []Contribution{{Input: "net Cp (type A)", U: aCp.S(), Sensitivity: 1 / math.Sqrt(r.nEff), UY: r.typeACpU, Dof: aCp.Dof, TypeA: true}}
	fB := []Contribution{}
	for j, c := range zn.chans {
		h := e.uB[c]
		w := zn.areasM2[j] / zn.areaM2
		cpB = append(cpB, Contribution{Input: "tap " + c + " calibration", U: h.u, Sensitivity: w / qBar, UY: math.Abs(w/qBar) * h.u, Dof: h.dof})
		fB = append(fB, Contribution{Input: "tap " + c + " calibration", U: h.u, Sensitivity: zn.areasM2[j], UY: zn.areasM2[j] * h.u, Dof: h.dof})
	}
	sq := -(mean + e.intCp) / qBar // ∂C/∂q; intCp is 0 with an internal channel
	cpB = append(cpB, Contribution{Input: "reference q calibration", U: qU, Sensitivity: sq, UY: math.Abs(sq) * qU, Dof: qDof})
	if e.intChan != "" {
		h := e.uB[e.intChan]
		cpB = append(cpB, Contribution{Input: "internal pressure calibration", U: h.u, Sensitivity: -1 / qBar, UY: h.u / qBar, Dof: h.dof})
		fB = append(fB, Contribution{Input: "internal pressure calibration", U: h.u, Sensitivity: -zn.areaM2, UY: zn.areaM2 * h.u, Dof: h.dof})
	} else if e.intCp != 0 {
		fB = append(fB, Contribution{Input: "reference q calibration", U: qU, Sensitivity: -zn.areaM2 * e.intCp, UY: math.Abs(zn.areaM2*e.intCp) * qU, Dof: qDof})
	}
	cv := Combine(cpB)
	cv.X = mean
	r.cp = cv

	aF := TypeAMean(maskLike(fs, cps))
	r.typeAForce = aF.U
	fB = append(fB, Contribution{Input: "net force (type A)", UY: r.typeAForce, Dof: aF.Dof, TypeA: true})
	fv := Combine(fB)
	fv.X = meanF
	r.force = fv

	aQ := TypeAMean(maskLike(buf.qPa, cps))
	qv := Combine([]Contribution{
		{UY: aQ.U, Dof: aQ.Dof, TypeA: true},
		{UY: qU, Dof: qDof},
	})
	qv.X = qBar
	r.q = qv

	r.peak = math.NaN()
	if withPeak {
		r.peak = e.peak(cps)
	}
	return r, true
}

// qTypeB returns the standard calibration uncertainty of q, Pa, at mean
// qBar, and its degrees of freedom.
func (e *RoofEstimator) qTypeB(qBarPa float64) (float64, float64) {
	h, ok := e.uB[e.q]
	if !ok {
		return 0, math.Inf(1)
	}
	if e.qSpeed {
		// q = ½ρV²: u(q) = ρ·V·u(V).
		v := SpeedFromQ(math.Max(0, qBarPa), e.fluid.RhoKgPerM3)
		return e.fluid.RhoKgPerM3 * v * h.u, h.dof
	}
	return e.pitotC * e.pitotC * h.u, h.dof
}

// maskLike returns x with NaN wherever ref is not finite.
func maskLike(x, ref []float64) []float64 {
	out := make([]float64, len(ref))
	for k := range ref {
		if finite(ref[k]) && k < len(x) {
			out[k] = x[k]
		} else {
			out[k] = math.NaN()
		}
	}
	return out
}

// peak returns the Cook & Mayne expected extreme suction of series cps:
// minus the U + 1.4/a of a Gumbel MLE fit of the epoch maxima of −Cp.
func (e *RoofEstimator) peak(cps []float64) float64 {
	n := len(cps)
	epochs := min(e.cfg.Epochs, n/2)
	if epochs < 3 {
		return math.NaN()
	}
	maxima := make([]float64, 0, epochs)
	for k := range epochs {
		lo, hi := k*n/epochs, (k+1)*n/epochs
		m := math.Inf(-1)
		for _, c := range cps[lo:hi] {
			if finite(c) {
				m = math.Max(m, -c)
			}
		}
		if !math.IsInf(m, -1) {
			maxima = append(maxima, m)
		}
	}
	if len(maxima) < 3 {
		return math.NaN()
	}
	g, err := FitGumbelMLE(maxima)
	if err != nil {
		if errors.Is(err, ErrGumbelData) {
			// All epoch maxima equal: the extreme is that value.
			same := true
			for _, m := range maxima {
				same = same && m == maxima[0]
			}
			if same {
				return -maxima[0]
			}
		}
		return math.NaN()
	}
	return -g.CookMayne()
}

// Live returns each zone's net Cp over the most recent Window of samples,
// computed by the same code as a Segment, with the window's mean reference
// q. CL, CD, LiftN, DragN and AlphaRad are zero Values on a roof. ok is
// false until the window holds two samples.
func (e *RoofEstimator) Live() (Live, bool) {
	if e.live.len() < 2 {
		return Live{}, false
	}
	lv := Live{T: time.UnixMicro(e.lastTUs).UTC(), Window: e.cfg.Window, N: e.live.len(),
		RhoKgPerM3: e.fluid.RhoKgPerM3, Segments: e.segments}
	qBar := nanMean(e.live.qPa)
	flowOn := e.flowOn(qBar)
	for z, zn := range e.zones {
		zl := ZoneLive{Zone: zn.name, CpMin: math.NaN(), En: math.NaN()}
		if r, ok := e.reduceZone(&e.live, z, false); ok && flowOn {
			zl.CpMean, zl.CpMin = r.cp, r.minCp
			if lv.QPa.X == 0 {
				lv.QPa, lv.SpeedMPerS = r.q, e.speed(r.q)
			}
		}
		if zn.hasDesign {
			zl.DesignCp, zl.En = e.design(z, zl.CpMean)
			if zl.CpMean == (calibrate.Value{}) {
				zl.En = math.NaN()
			}
		}
		lv.Zones = append(lv.Zones, zl)
	}
	if lv.QPa.X == 0 && finite(qBar) {
		lv.QPa = calibrate.Value{X: qBar}
	}
	if !flowOn {
		lv.Warnings = append(lv.Warnings, "reference q below the flow-off level (2 % of the pitot's rated capacity): no pressure coefficients")
	}
	if len(e.missing) > 0 {
		names := make([]string, 0, len(e.missing))
		for c := range e.missing {
			names = append(names, c)
		}
		slices.Sort(names)
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("channels missing from source %q: %v (their taps and zones have no values)", e.primary, names))
	}
	if e.otherSrc > 0 {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("%d blocks from sources other than %q ignored: roof channels must come from the source carrying the reference q", e.otherSrc, e.primary))
	}
	if e.ignored > 0 {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("%d blocks ignored: no positive sample spacing", e.ignored))
	}
	if e.flowOff > 0 {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("%d blocks of time dropped with the flow off", e.flowOff))
	}
	if idle := e.cfg.Now().Sub(e.lastAddAt); idle > 2*e.cfg.Window+time.Second {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("no new blocks for %s: is the source running?", idle.Round(time.Second)))
	}
	return lv, true
}
