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
	Block  time.Duration // length of one result block (default: the rig's [wind] block, else 10 min, common practice; tests use seconds)
	Epochs int           // sub-epochs per block for the extreme-value fit (default 16 — the "sixteen epochs" convention, docs/references.md §12)
	Window time.Duration // live window (default 10 s)
	Now    func() time.Time
}

// RoofPeakProb is the non-exceedance probability of a block peak
// (CpPeak, CpPeakMax): the Cook & Mayne fractile exp(−e^{−1.4}) = 0.78 of
// the distribution of the block's own extreme, so the block's extreme
// goes beyond the reported peak in about 22 % of blocks.
var RoofPeakProb = math.Exp(-math.Exp(-CookMayneReduced))

// roofSectorOutFrac is the fraction of a block's samples outside its
// direction sector above which the block is flagged as wandering (our
// own choice: one sample in ten).
const roofSectorOutFrac = 0.1

// RoofEstimator is the streaming estimation stage of a roof rig (docs/design.md §1
// workflow 2, §4 "Roofs", docs/roof.md): it turns calibrated blocks of tap
// pressures into one Segment per zone per block of time, a whole-roof
// Segment (zone "roof"), one Segment per tap, and a live moving-window
// estimate.
//
// # Method
//
// Each tap channel is a calibrated differential pressure p_i against the
// static reference, Pa. The mast's dynamic pressure q_m(t) is the rig's
// [lift] dynamic_pressure channel (q = C²·Δp with the pitot coefficient C),
// or ½ρV² from a [lift] speed channel. Coefficients are referred to the
// mean dynamic pressure of the block at the reference height (common
// practice in wind engineering, docs/references.md §20):
//
//	q̄     = r·mean(q_m)        r = 1, or the [wind] profile's q ratio (rig.Wind.QRatio)
//	p_Z(t) = Σ_{i∈Z} A_i·(p_i(t) − p_int(t)) / A_Z   (p_int from the internal channel; 0 for a fixed cp)
//	C_Z    = mean(p_Z)/q̄ − c_pi                       (c_pi = the fixed [internal] cp, else 0)
//	rms    = sd(p_Z)/q̄,  min, max = min(p_Z)/q̄ − c_pi, max(p_Z)/q̄ − c_pi
//	F_Z    = A_Z·(mean(p_Z) − c_pi·q̄)  = q̄·A_Z·C_Z exactly  (N; negative = upward)
//
// (EN 1991-1-4:2005 §5.2 and 7.2.9 for net pressure w = q·(c_pe − c_pi);
// area weighting over tributary areas is common practice.) A sample where
// a tap of the zone, q or the internal channel has no value is left out of
// that zone. A momentary lull of q does not drop a sample: only the
// block's mean q must be above the flow-off level.
//
// The Type A uncertainty of the ratio C_Z = mean(p_Z)/mean(q) is the
// Type A of the mean of the linearised residual
//
//	z(t) = [p_Z(t) − (C_Z + c_pi)·r·q_m(t)] / q̄
//
// (delta method for a ratio of means, common practice; JCGM 100 §5.1),
// by TypeAMean (Sokal's window, bias-corrected, ν = N/(2W+1)): a tap that
// follows the mast gusts partly, or with a lag, is handled without
// assuming quasi-steadiness. Type B: the tap calibrations (sensitivity
// A_i/(A_Z·q̄)), q's calibration (−(C_Z + c_pi)/mean(q_m)), the internal
// channel (−1/q̄), and the profile's q ratio (relative u of r times
// |C_Z + c_pi|), combined by JCGM 100 eq. 10 with ν by Welch–Satterthwaite.
// A fixed [internal] cp is taken as exact.
//
// # Block peaks
//
// CpPeak is an estimate of the value the block's own most negative net Cp
// stays above with probability RoofPeakProb ≈ 0.78 (Cook & Mayne's
// fractile). The side's series x (−C_Z for suction) is taken as a
// translated Gaussian process: Winterstein's moment-based Hermite model
// maps a standard normal u to x from the block's mean, standard deviation,
// skewness and kurtosis (a kurtosis below 3 is taken as 3). The block is
// cut into epochs (Epochs, fewer when an epoch would be shorter than the
// series' integral time scale); each epoch's maximum, mapped to u, gives
// z = −ln S(u) (S the normal upper tail), which for the maximum of N_e
// independent values is Gumbel with mode ln N_e and dispersion 1, so
// ln N_e = mean(z) − γ_E. The block holds N_B = epochs·N_e such values, and
// its maximum stays below u_p with probability p when S(u_p) = −ln p / N_B;
// the peak is the translation of u_p, its sign turned back. Its standard
// uncertainty is the sampling error of ln N_e, (π/√6)/√epochs, carried to
// the peak through the translation, combined with q̄'s calibration and
// profile (docs/references.md §20). CpPeakMax is the same on +C_Z
// (positive pressure). With fewer than three epochs the peak is NaN.
//
// # Direction, design values
//
// With a [lift] direction channel each block gets the circular mean
// direction atan2(Σ sin θ, Σ cos θ) and the circular standard deviation
// √(−2 ln R̄) (Mardia & Jupp, Directional Statistics, 2000, §2.3.4, from
// memory), the sector of [wind] sector_deg its mean falls in, and the
// fraction of its samples outside that sector (flagged above 10 %).
// A zone's design value is compared like with like (rig.Zone.DesignValue,
// DesignQ): a mean value with CpMean, a peak value with CpPeak (suction) or
// CpPeakMax (positive); a value on the peak velocity pressure
// q_p = (1 + 7·I_v)·q̄ (EN 1991-1-4:2005 eq. 4.8) is multiplied by
// (1 + 7·I_v) to put it on q̄, with I_v the mast's σ_V/V̄ over the block.
// DesignCp has U = design_u/K95(∞), so DesignCp.U95() is the rig's
// design_u, and En = (result − design)/√(U95_m² + design_u²).
//
// # Blocks and joining
//
// Blocks of time are laid on a grid starting at the first sample (device
// clock). A block is complete when a sample beyond its end arrives; it
// gives results when it holds at least half a Block of samples and its mean
// q is at or above 2 % of the q channel's rated capacity (or, for an
// unrated channel, 5 % of the largest block-mean q so far). A change of
// the sample spacing (timestamp jitter) does not close a block; only a
// clock step backwards restarts the grid. Samples that end in no block
// (a short or unusable stretch) are counted (Unblocked, the whole-roof row's
// SamplesUnblocked and a Live warning).
//
// Tap, q, internal and vane channels may come from any source: the source
// that first delivers a tap channel carries the timeline, and the channels
// of every other source (a mast pitot on an MQTT node, an internal-pressure
// transducer on its own logger, taps on a second scanner) are joined by
// time on the shared host timeline, as the Estimator joins them (join.go:
// linear interpolation between samples, held past the newest, a timeline
// block waits up to JoinWait for late sources).
//
// A RoofEstimator is not safe for concurrent use: the caller serialises
// Add, Live and Flush. Memory holds one block and one live window of
// per-sample values (about 10 min × rate × (zones + taps + 3) float64).
type RoofEstimator struct {
	rig *rig.Rig
	cfg RoofConfig

	zones    []roofZone // rig zones with taps, then the whole roof
	taps     []roofTapDef
	q        string  // q channel
	qSpeed   bool    // q channel is a speed, m/s
	pitotC   float64 // pitot coefficient (1 when unset)
	intChan  string  // internal pressure channel, or ""
	intCp    float64 // fixed internal cp when intChan is ""
	dirChan  string  // vane channel, or ""
	fluid    Fluid
	qFloorPa float64 // flow-off level from the rated capacity; 0 when unrated
	qRatio   float64 // q(reference height)/q(mast)
	qRatioU  float64 // relative standard uncertainty of qRatio
	qHeightM float64
	qAt      string
	sector   float64 // sector width, rad

	uB map[string]heldValue // latest calibration u and dof per channel

	primary  string
	started  bool
	dtUs     int64
	gridT0Us int64 // start of the block grid
	blkT0Us  int64 // start of the open block
	// wallOffUs maps the device clock to UTC wall time (µs), as in
	// Estimator: fixed at the first block and after a clock step.
	wallOffUs int64

	blk  roofBuf // open block
	live roofBuf // live window

	maxBlockQPa float64
	segments    int
	blocks      int    // blocks that gave results
	flowOff     int    // blocks dropped as flow off
	short       int    // blocks dropped as shorter than half a block
	ignored     int    // unusable blocks
	join        joiner // channels of other sources, joined by time (join.go)
	unblocked   int    // samples in no block, in total
	unblockedAt int    // unblocked at the last block that gave results
	missing     map[string]bool
	lastAddAt   time.Time
	lastTUs     int64
}

// roofTapDef is one tap: its channel, area and zone.
type roofTapDef struct {
	name, channel, zone string
	areaM2              float64
}

// roofZone is one zone's taps and design value.
type roofZone struct {
	name      string
	taps      []int // indices into RoofEstimator.taps
	areaM2    float64
	design    float64
	designU95 float64
	hasDesign bool
	peak      bool // design value is a peak coefficient
	onPeakQ   bool // design value pairs with the peak velocity pressure
}

// roofBuf holds per-sample values: time, mast q, internal pressure,
// direction, each tap's pressure and each zone's area-weighted pressure.
type roofBuf struct {
	tUs  []int64
	qPa  []float64
	pInt []float64
	dir  []float64
	pTap [][]float64 // [tap][sample]
	pZ   [][]float64 // [zone][sample]
}

func newRoofBuf(zones, taps int) roofBuf {
	return roofBuf{pZ: make([][]float64, zones), pTap: make([][]float64, taps)}
}

func (b *roofBuf) len() int { return len(b.tUs) }

// each calls f on every per-sample slice, for resetting and trimming.
func (b *roofBuf) each(f func(p *[]float64)) {
	f(&b.qPa)
	f(&b.pInt)
	f(&b.dir)
	for z := range b.pZ {
		f(&b.pZ[z])
	}
	for i := range b.pTap {
		f(&b.pTap[i])
	}
}

func (b *roofBuf) reset() {
	b.tUs = b.tUs[:0]
	b.each(func(p *[]float64) { *p = (*p)[:0] })
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
		b.tUs = b.tUs[k:]
		b.each(func(p *[]float64) { *p = (*p)[k:] })
		return
	}
	b.tUs = b.tUs[:copy(b.tUs, b.tUs[k:])]
	b.each(func(p *[]float64) { *p = (*p)[:copy(*p, (*p)[k:])] })
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
			hasDesign: z.DesignCp != 0 || z.DesignU != 0,
			peak:      z.DesignValue == rig.DesignPeak, onPeakQ: z.DesignQ == rig.DesignPeak})
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
		ti := len(e.taps)
		e.taps = append(e.taps, roofTapDef{name: t.Name, channel: t.Channel, zone: t.Zone, areaM2: t.AreaM2})
		z := &e.zones[zi]
		z.taps = append(z.taps, ti)
		z.areaM2 += t.AreaM2
		whole.taps = append(whole.taps, ti)
		whole.areaM2 += t.AreaM2
	}
	for _, z := range e.zones {
		if len(z.taps) == 0 && len(r.Taps) > 0 {
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
	if r.Lift.Direction != "" {
		e.dirChan = r.Lift.Direction
		need("lift.direction", e.dirChan)
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
	e.qRatio, e.qRatioU = r.Wind.QRatio()
	if !finite(e.qRatio) || !(e.qRatio > 0) {
		problems = append(problems, fmt.Errorf("[wind] profile %q cannot carry q from %g m to %g m", r.Wind.Profile, r.Wind.MastHeightM, r.Wind.ReferenceHeightM))
	}
	e.qHeightM, e.qAt = r.Wind.MastHeightM, "mast"
	if r.Wind.Converts() {
		e.qHeightM, e.qAt = r.Wind.ReferenceHeightM, "reference height ("+r.Wind.Profile+" law)"
	}
	e.sector = r.Wind.SectorRad
	if !(e.sector > 0) {
		e.sector = rig.DefaultSectorRad
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
		e.cfg.Block = r.Wind.Block
	}
	if e.cfg.Block <= 0 {
		e.cfg.Block = rig.DefaultRoofBlock
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
	e.blk = newRoofBuf(len(e.zones), len(e.taps))
	e.live = newRoofBuf(len(e.zones), len(e.taps))
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

// Block returns the block length in use.
func (e *RoofEstimator) Block() time.Duration { return e.cfg.Block }

// Unblocked returns the number of samples so far that fell in no block:
// stretches shorter than half a block, blocks without a positive sample
// spacing, and blocks of other sources that could not be placed on the
// timeline.
func (e *RoofEstimator) Unblocked() int { return e.unblocked }

// Add feeds one calibrated block and returns the segments of the blocks of
// time it completed: per block, one per zone (rig order, then "roof"), then
// one per tap (rig order), Index counting from 0 over every segment of the
// run, so each segment has its own Index.
//
// Bad input never panics: a nil or empty block, a block without a positive
// DtUs, or series of unequal length (missing samples read as NaN) give
// fewer results; NaN samples are skipped; unusable blocks are counted in a
// Live warning and their samples in Unblocked.
func (e *RoofEstimator) Add(b *calibrate.Block) []Segment {
	e.lastAddAt = e.cfg.Now()
	if b == nil || len(b.Series) == 0 {
		return nil
	}
	if e.primary == "" {
		for _, t := range e.taps {
			if b.Find(t.channel) != nil {
				e.primary = b.Source
				break
			}
		}
	}
	if b.Source != e.primary {
		ok := e.join.record(b, func(s *calibrate.Series, _ float64) {
			e.uB[s.Channel] = heldValue{u: s.U, dof: dofOrInf(s.Dof)}
		})
		if !ok {
			e.ignored++
			e.unblocked += b.Len()
			return nil
		}
		return e.drain(false)
	}
	n := 0
	for _, s := range b.Series {
		n = max(n, len(s.Values))
	}
	if b.DtUs <= 0 || n == 0 {
		e.ignored++
		e.unblocked += n
		return nil
	}
	e.join.queue(b)
	return e.drain(false)
}

// drain processes the timeline blocks whose other sources have caught up
// (all of them when force is set).
func (e *RoofEstimator) drain(force bool) []Segment {
	var out []Segment
	for b := e.join.next(force); b != nil; b = e.join.next(force) {
		out = e.addPrimary(b, out)
	}
	return out
}

// addPrimary runs one timeline block through the join and into the open
// block and the live window.
func (e *RoofEstimator) addPrimary(b *calibrate.Block, out []Segment) []Segment {
	n := 0
	for _, s := range b.Series {
		n = max(n, len(s.Values))
	}
	for _, s := range b.Series {
		e.uB[s.Channel] = heldValue{u: s.U, dof: dofOrInf(s.Dof)}
	}
	// col reads a channel at sample i: from this block when it carries
	// it, else from another source at the sample's timeline time.
	at0 := alignedStart(b)
	type col struct {
		name string
		v    []float64
	}
	pick := func(name string) col {
		if s := b.Find(name); s != nil {
			return col{name, s.Values}
		}
		if !e.join.has(name) {
			e.missing[name] = true
		}
		return col{name: name}
	}
	at := func(c col, i int) float64 {
		if c.v != nil {
			if i < len(c.v) {
				return c.v[i]
			}
			return math.NaN()
		}
		return e.join.at(c.name, at0+int64(i)*b.DtUs)
	}
	qv := pick(e.q)
	var iv, dv col
	if e.intChan != "" {
		iv = pick(e.intChan)
	}
	if e.dirChan != "" {
		dv = pick(e.dirChan)
	}
	tapV := make([]col, len(e.taps))
	for j, t := range e.taps {
		tapV[j] = pick(t.channel)
	}
	// A clock step backwards closes the open block and restarts the grid;
	// a change of spacing (jitter) does not.
	if e.started && b.T0Us+e.wallOffUs <= e.lastTUs {
		out = e.closeBlock(out)
		e.started = false
		e.live.reset()
	}
	if !e.started {
		e.started = true
		e.wallOffUs = alignedStart(b) - b.T0Us
		e.gridT0Us, e.blkT0Us = b.T0Us+e.wallOffUs, b.T0Us+e.wallOffUs
	}
	e.dtUs = b.DtUs
	blockUs := int64(e.cfg.Block / time.Microsecond)
	pTap := make([]float64, len(e.taps))
	pZ := make([]float64, len(e.zones))
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
		pInt := 0.0
		if e.intChan != "" {
			pInt = at(iv, i)
		}
		dir := math.NaN()
		if e.dirChan != "" {
			dir = at(dv, i)
		}
		for j := range e.taps {
			pTap[j] = at(tapV[j], i)
		}
		for z, zn := range e.zones {
			sp := 0.0
			for _, j := range zn.taps {
				sp += e.taps[j].areaM2 * (pTap[j] - pInt)
			}
			pZ[z] = sp / zn.areaM2 // NaN when any tap, or pInt, is
		}
		e.blk.push(tUs, q, pInt, dir, pTap, pZ)
		e.live.push(tUs, q, pInt, dir, pTap, pZ)
		e.lastTUs = tUs
	}
	e.live.dropBefore(e.lastTUs - int64(e.cfg.Window/time.Microsecond) + 1)
	return out
}

func (b *roofBuf) push(tUs int64, q, pInt, dir float64, pTap, pZ []float64) {
	b.tUs = append(b.tUs, tUs)
	b.qPa = append(b.qPa, q)
	b.pInt = append(b.pInt, pInt)
	b.dir = append(b.dir, dir)
	for j := range b.pTap {
		b.pTap[j] = append(b.pTap[j], pTap[j])
	}
	for z := range b.pZ {
		b.pZ[z] = append(b.pZ[z], pZ[z])
	}
}

// Flush ends the run: the open block is closed and its segments returned
// when it holds at least half a block.
func (e *RoofEstimator) Flush() []Segment {
	return e.closeBlock(e.drain(true))
}

// closeBlock reduces the open block, appends its segments to out when it
// is long enough and the flow is on, and empties it.
func (e *RoofEstimator) closeBlock(out []Segment) []Segment {
	defer e.blk.reset()
	n := e.blk.len()
	if n == 0 {
		return out
	}
	if n < 2 || time.Duration(int64(n)*e.dtUs)*time.Microsecond*2 < e.cfg.Block {
		e.short++
		e.unblocked += n
		return out
	}
	qBar := nanMean(e.blk.qPa)
	if finite(qBar) {
		e.maxBlockQPa = math.Max(e.maxBlockQPa, qBar)
	}
	if !e.flowOn(qBar) {
		e.flowOff++
		return out
	}
	d := e.direction(&e.blk)
	iv := e.turbulence(e.blk.qPa)
	var rows []Segment
	row := func(zone, tap string, r zoneResult) Segment {
		return Segment{
			Kind: rig.KindRoof, Block: e.blocks, TStart: time.UnixMicro(e.blk.tUs[0]).UTC(),
			TEnd: time.UnixMicro(e.blk.tUs[n-1]).UTC(), N: r.n, NEff: r.nEff,
			QPa: r.q, SpeedMPerS: e.speed(r.q), RhoKgPerM3: e.fluid.RhoKgPerM3, MuPaS: e.fluid.MuPaS,
			En: math.NaN(), Zone: zone, Tap: tap, CpMean: r.cp, CpRMS: r.rms, CpMin: r.minCp, CpMax: r.maxCp,
			CpPeak: r.peakMin.X, CpPeakU: r.peakMin.U, CpPeakMax: r.peakMax.X, CpPeakMaxU: r.peakMax.U,
			CpInt: r.cpInt, UpliftN: r.force, QHeightM: e.qHeightM, QAt: e.qAt, TurbulenceIntensity: iv,
			DirectionRad: d.mean, DirectionSpreadRad: d.spread, SectorRad: d.sector, SectorOutFrac: d.outFrac,
		}
	}
	for z, zn := range e.zones {
		r, ok := e.reduce(&e.blk, e.blk.pZ[z], true)
		if !ok {
			continue
		}
		s := row(zn.name, "", r)
		e.design(z, &s)
		if zn.name == RoofZoneWhole {
			s.SamplesUnblocked = e.unblocked - e.unblockedAt
		}
		rows = append(rows, s)
	}
	for j, t := range e.taps {
		if r, ok := e.reduce(&e.blk, e.blk.pTap[j], true); ok {
			rows = append(rows, row(t.zone, t.name, r))
		}
	}
	if len(rows) == 0 {
		e.short++
		e.unblocked += n
		return out
	}
	e.unblockedAt = e.unblocked
	for i := range rows {
		rows[i].Index = e.segments
		e.segments++
	}
	e.blocks++
	return append(out, rows...)
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

// design sets s's design value, what it is compared with, and En.
func (e *RoofEstimator) design(z int, s *Segment) {
	zn := e.zones[z]
	if !zn.hasDesign {
		return
	}
	d := calibrate.Value{X: zn.design, U: zn.designU95 / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)}
	if zn.onPeakQ {
		// A coefficient on q_p = (1 + 7·I_v)·q̄ is that factor larger on q̄.
		f := 1 + 7*s.TurbulenceIntensity
		if !finite(f) {
			return
		}
		d.X, d.U = d.X*f, d.U*f
	}
	m, vs := s.CpMean, "cp_mean"
	if zn.peak {
		m, vs = calibrate.Value{X: s.CpPeak, U: s.CpPeakU, Dof: math.Inf(1)}, "cp_peak"
		if zn.design > 0 {
			m, vs = calibrate.Value{X: s.CpPeakMax, U: s.CpPeakMaxU, Dof: math.Inf(1)}, "cp_peak_max"
		}
	}
	s.DesignCp, s.DesignVs = d, vs
	s.En = En(m, d)
}

// speed returns V = √(2q/ρ) with u(V) = u(q)/(ρ·V).
func (e *RoofEstimator) speed(q calibrate.Value) calibrate.Value {
	v := SpeedFromQ(q.X, e.fluid.RhoKgPerM3)
	if !finite(v) || v == 0 {
		return calibrate.Value{X: v}
	}
	return calibrate.Value{X: v, U: q.U / (e.fluid.RhoKgPerM3 * math.Abs(v)), Dof: q.Dof}
}

// turbulence returns σ_V/V̄ of the mast speed V = √(2q/ρ) (q ≤ 0 taken as
// calm), NaN with fewer than two samples.
func (e *RoofEstimator) turbulence(qPa []float64) float64 {
	v := make([]float64, 0, len(qPa))
	for _, q := range qPa {
		if finite(q) {
			v = append(v, SpeedFromQ(math.Max(q, 0), e.fluid.RhoKgPerM3))
		}
	}
	if len(v) < 2 {
		return math.NaN()
	}
	m, sd := meanSD(v)
	return sd / m
}

// dirStats is a block's wind direction.
type dirStats struct{ mean, spread, sector, outFrac float64 }

// direction returns the circular mean, circular standard deviation, sector
// centre and out-of-sector fraction of buf's directions; NaN without any.
func (e *RoofEstimator) direction(buf *roofBuf) dirStats {
	d := dirStats{math.NaN(), math.NaN(), math.NaN(), math.NaN()}
	var ss, sc float64
	n := 0
	for _, th := range buf.dir {
		if finite(th) {
			s, c := math.Sincos(th)
			ss, sc, n = ss+s, sc+c, n+1
		}
	}
	if n == 0 {
		return d
	}
	d.mean = math.Mod(math.Atan2(ss, sc)+2*math.Pi, 2*math.Pi)
	rbar := math.Hypot(ss, sc) / float64(n)
	d.spread = math.Sqrt(math.Max(0, -2*math.Log(math.Min(rbar, 1))))
	d.sector = math.Mod(math.Round(d.mean/e.sector)*e.sector, 2*math.Pi)
	out := 0
	for _, th := range buf.dir {
		if finite(th) && math.Abs(angleDiff(th, d.sector)) > e.sector/2 {
			out++
		}
	}
	d.outFrac = float64(out) / float64(n)
	return d
}

// SectorLeft reports whether a roof row's direction wandered out of its
// sector: more than 10 % of the block's samples lie outside it.
func (s *Segment) SectorLeft() bool { return s.SectorOutFrac > roofSectorOutFrac }

// angleDiff returns a − b wrapped to (−π, π].
func angleDiff(a, b float64) float64 {
	d := math.Mod(a-b, 2*math.Pi)
	if d > math.Pi {
		d -= 2 * math.Pi
	} else if d <= -math.Pi {
		d += 2 * math.Pi
	}
	return d
}

// zoneResult is one zone (or tap) reduced over a buffer.
type zoneResult struct {
	n                int
	nEff             float64
	q                calibrate.Value
	cp               calibrate.Value
	cpInt            calibrate.Value
	rms              float64
	minCp, maxCp     float64
	peakMin, peakMax calibrate.Value
	force            calibrate.Value
}

// reduce reduces the area-weighted pressure series p (a zone's p_Z or one
// tap's p_i, Pa, against the static reference and, with an internal
// channel, net of it) over buf: coefficients on the block's mean q at the
// reference height, with their budgets. ok is false when fewer than two
// samples have values.
func (e *RoofEstimator) reduce(buf *roofBuf, p []float64, withPeak bool) (r zoneResult, ok bool) {
	valid := func(k int) bool { return finite(p[k]) && finite(buf.qPa[k]) }
	var sumP, sumQ, sumI float64
	for k := range p {
		if !valid(k) {
			continue
		}
		r.n++
		sumP += p[k]
		sumQ += buf.qPa[k]
		sumI += buf.pInt[k]
	}
	if r.n < 2 {
		return r, false
	}
	nf := float64(r.n)
	pBar, qmBar := sumP/nf, sumQ/nf
	qBar := e.qRatio * qmBar
	if !(qBar > 0) {
		return r, false
	}
	ceff := pBar / qBar // C + c_pi
	cp := ceff - e.intCp
	var ss float64
	r.minCp, r.maxCp = math.Inf(1), math.Inf(-1)
	z := make([]float64, len(p))
	pm := make([]float64, len(p))
	qm := make([]float64, len(p))
	for k := range p {
		if !valid(k) {
			z[k], pm[k], qm[k] = math.NaN(), math.NaN(), math.NaN()
			continue
		}
		ss += (p[k] - pBar) * (p[k] - pBar)
		c := p[k]/qBar - e.intCp
		r.minCp, r.maxCp = math.Min(r.minCp, c), math.Max(r.maxCp, c)
		z[k] = (p[k] - ceff*e.qRatio*buf.qPa[k]) / qBar
		pm[k], qm[k] = p[k], buf.qPa[k]
	}
	r.rms = math.Sqrt(ss/(nf-1)) / qBar
	aCp := TypeAMean(z)
	r.nEff = aCp.NEff

	// Type B: calibrations of the taps, q, the internal channel; the profile.
	qU, qDof := e.qTypeB(qmBar)
	budget := []Contribution{{Input: "net Cp (type A)", U: aCp.S(), Sensitivity: 1 / math.Sqrt(r.nEff), UY: aCp.U, Dof: aCp.Dof, TypeA: true}}
	budget = append(budget, e.tapBudget(p, buf, qBar)...)
	sq := -ceff / qmBar
	budget = append(budget, Contribution{Input: "reference q calibration", U: qU, Sensitivity: sq, UY: math.Abs(sq) * qU, Dof: qDof})
	if e.qRatioU > 0 {
		budget = append(budget, Contribution{Input: "q profile to the reference height", U: e.qRatioU, Sensitivity: -ceff, UY: math.Abs(ceff) * e.qRatioU, Dof: math.Inf(1)})
	}
	cv := Combine(budget)
	cv.X = cp
	r.cp = cv

	// The force A·(p̄ − c_pi·q̄) on the zone's (or tap's) area.
	r.force = e.forceValue(p, pm, buf, qBar, qU, qDof)

	aQ := TypeAMean(qm)
	qv := Combine([]Contribution{
		{UY: e.qRatio * aQ.U, Dof: aQ.Dof, TypeA: true},
		{UY: e.qRatio * qU, Dof: qDof},
		{UY: qBar * e.qRatioU, Dof: math.Inf(1)},
	})
	qv.X = qBar
	r.q = qv

	r.cpInt = calibrate.Value{X: e.intCp, Dof: math.Inf(1)}
	if e.intChan != "" {
		ci := sumI / nf / qBar
		zi := make([]float64, len(p))
		for k := range p {
			zi[k] = math.NaN()
			if valid(k) {
				zi[k] = (buf.pInt[k] - ci*e.qRatio*buf.qPa[k]) / qBar
			}
		}
		a := TypeAMean(zi)
		h := e.uB[e.intChan]
		v := Combine([]Contribution{
			{UY: a.U, Dof: a.Dof, TypeA: true},
			{UY: h.u / qBar, Dof: h.dof},
			{UY: math.Abs(ci/qmBar) * qU, Dof: qDof},
			{UY: math.Abs(ci) * e.qRatioU, Dof: math.Inf(1)},
		})
		v.X = ci
		r.cpInt = v
	}

	r.peakMin = calibrate.Value{X: math.NaN()}
	r.peakMax = calibrate.Value{X: math.NaN()}
	if withPeak {
		// q̄'s calibration and profile scale every coefficient of the block.
		uq := math.Hypot(qU/qmBar, e.qRatioU)
		epochs := e.peakEpochs(p, buf)
		r.peakMin = e.blockPeak(p, qBar, -1, uq, epochs)
		r.peakMax = e.blockPeak(p, qBar, +1, uq, epochs)
	}
	return r, true
}

// tapBudget returns the tap (and internal channel) calibration lines of
// the Cp budget of series p: the zone whose series p is, or the single tap.
func (e *RoofEstimator) tapBudget(p []float64, buf *roofBuf, qBar float64) []Contribution {
	taps, area := e.tapsOf(p, buf)
	var out []Contribution
	for _, j := range taps {
		h := e.uB[e.taps[j].channel]
		w := e.taps[j].areaM2 / area
		out = append(out, Contribution{Input: "tap " + e.taps[j].channel + " calibration", U: h.u, Sensitivity: w / qBar, UY: math.Abs(w/qBar) * h.u, Dof: h.dof})
	}
	if e.intChan != "" {
		h := e.uB[e.intChan]
		out = append(out, Contribution{Input: "internal pressure calibration", U: h.u, Sensitivity: -1 / qBar, UY: h.u / qBar, Dof: h.dof})
	}
	return out
}

// tapsOf returns the taps whose weighted sum is series p of buf (a zone's
// or a tap's) and their area.
func (e *RoofEstimator) tapsOf(p []float64, buf *roofBuf) ([]int, float64) {
	same := func(a []float64) bool { return len(a) > 0 && len(p) > 0 && &a[0] == &p[0] }
	for z := range buf.pZ {
		if same(buf.pZ[z]) {
			return e.zones[z].taps, e.zones[z].areaM2
		}
	}
	for j := range buf.pTap {
		if same(buf.pTap[j]) {
			return []int{j}, e.taps[j].areaM2
		}
	}
	return nil, 1
}

// forceValue returns the mean net force A·(p̄ − c_pi·q̄) of series p with
// its budget: Type A of the mean pressure, the tap and internal
// calibrations, and q's calibration and profile through c_pi.
func (e *RoofEstimator) forceValue(p, pm []float64, buf *roofBuf, qBar, qU, qDof float64) calibrate.Value {
	taps, area := e.tapsOf(p, buf)
	aP := TypeAMean(pm)
	fB := []Contribution{{Input: "net force (type A)", UY: area * aP.U, Dof: aP.Dof, TypeA: true}}
	for _, j := range taps {
		h := e.uB[e.taps[j].channel]
		a := e.taps[j].areaM2
		fB = append(fB, Contribution{Input: "tap " + e.taps[j].channel + " calibration", U: h.u, Sensitivity: a, UY: a * h.u, Dof: h.dof})
	}
	if e.intChan != "" {
		h := e.uB[e.intChan]
		fB = append(fB, Contribution{Input: "internal pressure calibration", U: h.u, Sensitivity: -area, UY: area * h.u, Dof: h.dof})
	} else if e.intCp != 0 {
		fB = append(fB, Contribution{Input: "reference q calibration", U: qU, Sensitivity: -area * e.intCp * e.qRatio, UY: math.Abs(area*e.intCp*e.qRatio) * qU, Dof: qDof})
		if e.qRatioU > 0 {
			fB = append(fB, Contribution{Input: "q profile to the reference height", UY: math.Abs(area*e.intCp*qBar) * e.qRatioU, Dof: math.Inf(1)})
		}
	}
	fv := Combine(fB)
	fv.X = area * (nanMean(pm) - e.intCp*qBar)
	return fv
}

// qTypeB returns the standard calibration uncertainty of the mast q, Pa,
// at mean qBar, and its degrees of freedom.
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

// blockPeak returns the block peak of the net Cp series p/q̄ − c_pi on the
// side sign (−1 suction, +1 positive), the value the block's own extreme
// stays within with probability RoofPeakProb, with its standard
// uncertainty; uqRel is q̄'s relative standard uncertainty (see "Block
// peaks" on RoofEstimator). X is NaN when fewer than three epochs hold
// data or the series has no spread.
func (e *RoofEstimator) blockPeak(p []float64, qBar, sign, uqRel float64, epochs int) calibrate.Value {
	nan := calibrate.Value{X: math.NaN()}
	n := len(p)
	if epochs < 3 {
		return nan
	}
	mean := nanMean(p) / qBar
	side := func(v float64) float64 { return sign * (v/qBar - mean) }
	m := sideMoments(p, side)
	if !(m.sd > 0) {
		return nan
	}
	h := newHermite(m.skew, m.kurt)
	// Each epoch's maximum, mapped to the standard normal u of the
	// translation, gives z = −ln S(u); with N_e independent values per
	// epoch, z is Gumbel with mode ln N_e and dispersion 1.
	zSum, zN := 0.0, 0
	for k := range epochs {
		lo, hi := k*n/epochs, (k+1)*n/epochs
		top := math.Inf(-1)
		for _, v := range p[lo:hi] {
			if finite(v) {
				top = math.Max(top, side(v))
			}
		}
		if !math.IsInf(top, -1) {
			zSum += -math.Log(normalTail(max(h.u((top-m.mean)/m.sd), 0)))
			zN++
		}
	}
	if zN < 3 {
		return nan
	}
	// ln N_B = ln N_e + ln(epochs); the block's maximum stays below u_p
	// with probability p when S(u_p) = −ln p / N_B = e^{−(ln N_B + 1.4)}.
	lnNB := zSum/float64(zN) - EulerGamma + math.Log(float64(zN))
	sp := math.Exp(-(lnNB + CookMayneReduced))
	up := math.Sqrt2 * math.Erfcinv(2*sp)
	d := m.mean + m.sd*h.x(up)
	// u(ln N_e) is the Gumbel's standard deviation π/√6 over √epochs;
	// du_p = S(u_p)/φ(u_p) · d ln N_B.
	uLn := math.Pi / math.Sqrt(6) / math.Sqrt(float64(zN))
	phi := math.Exp(-up*up/2) / math.Sqrt(2*math.Pi)
	uFit := m.sd * h.dx(up) * sp / phi * uLn
	x := mean - e.intCp + sign*d
	uQ := math.Abs(x+e.intCp) * uqRel
	return calibrate.Value{X: x, U: math.Hypot(uFit, uQ), Dof: float64(zN - 1)}
}

// peakEpochs is the number of epochs a block's peak is estimated from:
// Epochs, or fewer so that each epoch lasts at least the integral time
// scale of the series (epochs much shorter than the gusts share their
// gust, and their extremes are not independent); at most half the
// samples.
func (e *RoofEstimator) peakEpochs(p []float64, buf *roofBuf) int {
	n := len(p)
	epochs := min(e.cfg.Epochs, n/2)
	if n < 2 || epochs < 3 {
		return epochs
	}
	dtS := float64(buf.tUs[n-1]-buf.tUs[0]) / float64(n-1) / 1e6
	ti := integralTimeS(p, dtS)
	if ti > 0 {
		epochs = min(epochs, int(float64(n)*dtS/ti))
	}
	return epochs
}

// integralTimeS is the integral time scale of the finite values of p
// sampled every dtS seconds: the autocorrelation ρ(τ) (autocovFFT, from
// the power spectrum) integrated up to its first zero crossing by
// the trapezoidal rule. Non-finite values count as the mean.
func integralTimeS(p []float64, dtS float64) float64 {
	n := len(p)
	mean := nanMean(p)
	if !finite(mean) || !(dtS > 0) {
		return 0
	}
	d := make([]float64, n)
	for i, v := range p {
		if finite(v) {
			d[i] = v - mean
		}
	}
	r := autocovFFT(d)
	if !(r[0] > 0) {
		return 0
	}
	sum := 0.5
	for k := 1; k < n; k++ {
		rho := r[k] / r[0]
		if rho <= 0 {
			break
		}
		sum += rho
	}
	return sum * dtS
}

// moments are the mean, standard deviation, skewness and kurtosis of the
// finite values of a series (population forms).
type moments struct{ mean, sd, skew, kurt float64 }

// sideMoments returns the moments of f(v) over the finite values v of p.
func sideMoments(p []float64, f func(float64) float64) moments {
	var s1 float64
	n := 0
	for _, v := range p {
		if finite(v) {
			s1 += f(v)
			n++
		}
	}
	if n == 0 {
		return moments{}
	}
	mean := s1 / float64(n)
	var s2, s3, s4 float64
	for _, v := range p {
		if finite(v) {
			d := f(v) - mean
			s2 += d * d
			s3 += d * d * d
			s4 += d * d * d * d
		}
	}
	v2 := s2 / float64(n)
	sd := math.Sqrt(v2)
	if !(sd > 0) {
		return moments{mean: mean}
	}
	return moments{mean: mean, sd: sd, skew: s3 / float64(n) / (v2 * sd), kurt: s4 / float64(n) / (v2 * v2)}
}

// hermite is Winterstein's moment-based Hermite translation of a softening
// non-Gaussian process, x = κ[u + h3(u² − 1) + h4(u³ − 3u)] with u standard
// normal and x standardised (docs/references.md §20).
type hermite struct{ k, h3, h4 float64 }

// newHermite returns the translation for skewness g3 and kurtosis g4:
// h4 = (√(1 + 1.5(g4 − 3)) − 1)/18, h3 = g3/(4 + 2√(1 + 1.5(g4 − 3))),
// κ = 1/√(1 + 2h3² + 6h4²) (Winterstein 1988). A kurtosis below 3 (a
// hardening process) is taken as 3, which overstates the tail: the peak
// errs on the safe side.
func newHermite(g3, g4 float64) hermite {
	r := math.Sqrt(1 + 1.5*(max(g4, 3)-3))
	h4 := (r - 1) / 18
	h3 := g3 / (4 + 2*r)
	h := hermite{k: 1 / math.Sqrt(1+2*h3*h3+6*h4*h4), h3: h3, h4: h4}
	if !h.increasing() {
		// A light tail skewed so far that the cubic turns back below
		// u = 8: drop the skew term, which overstates the tail (safe side).
		h.h3 = 0
		h.k = 1 / math.Sqrt(1+6*h4*h4)
	}
	return h
}

// increasing reports whether x(u) increases on [0, 8].
func (h hermite) increasing() bool {
	for u := 0.0; u <= 8; u += 0.125 {
		if h.dx(u) <= 0 {
			return false
		}
	}
	return true
}

// x is the standardised value at standard normal u.
func (h hermite) x(u float64) float64 {
	return h.k * (u + h.h3*(u*u-1) + h.h4*(u*u*u-3*u))
}

// dx is dx/du.
func (h hermite) dx(u float64) float64 {
	return h.k * (1 + 2*h.h3*u + 3*h.h4*(u*u-1))
}

// u inverts x on u ∈ [0, 8], where the translation of a record's upper
// tail increases (bisection; x below x(0) gives 0, above x(8) gives 8).
func (h hermite) u(x float64) float64 {
	lo, hi := 0.0, 8.0
	for range 50 {
		m := (lo + hi) / 2
		if h.x(m) < x {
			lo = m
		} else {
			hi = m
		}
	}
	return (lo + hi) / 2
}

// normalTail is S(u) = 1 − Φ(u), the standard normal's upper tail.
func normalTail(u float64) float64 { return 0.5 * math.Erfc(u/math.Sqrt2) }

// Live returns each zone's net Cp over the most recent Window of samples,
// computed by the same code as a Segment, with the window's mean reference
// q. CL, CD, LiftN, DragN and AlphaRad are zero Values on a roof. ok is
// false until the window holds two samples.
func (e *RoofEstimator) Live() (Live, bool) {
	if e.live.len() < 2 {
		return Live{}, false
	}
	lv := Live{T: time.UnixMicro(e.lastTUs).UTC(), Window: e.cfg.Window, N: e.live.len(),
		RhoKgPerM3: e.fluid.RhoKgPerM3, Segments: e.blocks}
	d := e.direction(&e.live)
	lv.DirectionRad, lv.DirectionSpreadRad = d.mean, d.spread
	qBar := nanMean(e.live.qPa)
	flowOn := e.flowOn(qBar)
	for z, zn := range e.zones {
		zl := ZoneLive{Zone: zn.name, CpMin: math.NaN(), En: math.NaN()}
		if r, ok := e.reduce(&e.live, e.live.pZ[z], false); ok && flowOn {
			zl.CpMean, zl.CpMin = r.cp, r.minCp
			if lv.QPa.X == 0 {
				lv.QPa, lv.SpeedMPerS = r.q, e.speed(r.q)
			}
		}
		if zn.hasDesign && !zn.peak && !zn.onPeakQ && zl.CpMean != (calibrate.Value{}) {
			zl.DesignCp = calibrate.Value{X: zn.design, U: zn.designU95 / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)}
			zl.En = En(zl.CpMean, zl.DesignCp)
		} else if zn.hasDesign {
			zl.DesignCp = calibrate.Value{X: zn.design, U: zn.designU95 / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)}
		}
		lv.Zones = append(lv.Zones, zl)
	}
	if lv.QPa.X == 0 && finite(qBar) {
		lv.QPa = calibrate.Value{X: e.qRatio * qBar}
	}
	if !flowOn {
		lv.Warnings = append(lv.Warnings, "reference q below the flow-off level (2 % of the pitot's rated capacity): no pressure coefficients")
	}
	var names []string
	for c := range e.missing {
		if !e.join.has(c) { // another source may have delivered it since
			names = append(names, c)
		}
	}
	if len(names) > 0 {
		slices.Sort(names)
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("channels missing: %v are in no block of %q (the taps' source) and no other source has sent them (their taps and zones have no values)", names, e.primary))
	}
	if e.ignored > 0 {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("%d blocks ignored: no positive sample spacing", e.ignored))
	}
	if e.unblocked > 0 {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("%d samples fell in no result block (%d stretches shorter than half a block)", e.unblocked, e.short))
	}
	if e.flowOff > 0 {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf("%d blocks of time dropped with the flow off", e.flowOff))
	}
	if idle := e.cfg.Now().Sub(e.lastAddAt); idle > 2*e.cfg.Window+time.Second {
		lv.Warnings = append(lv.Warnings, fmt.Sprintf(IdleWarningPrefix+"%s: is the source running?", idle.Round(time.Second)))
	}
	return lv, true
}
