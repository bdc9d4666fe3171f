package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"time"

	"liftyard/acquire"
	"liftyard/rig"
)

// Config sets the simulated flow, foil and sweep. A zero field takes the
// default given beside it.
type Config struct {
	QPa                 float64       // mean dynamic pressure, Pa (required: ½ρV² of the chosen speed)
	TurbulenceIntensity float64       // u′/U, default 0.02
	IntegralTimeS       float64       // integral time scale of the turbulence, s (default 0.05)
	RateHz              float64       // sample rate, Hz (default 200)
	BlockSamples        int           // samples per block, default 20 (100 ms at 200 Hz)
	StepsDeg            []float64     // angle-of-attack steps, degrees (default −4 … 12 by 2)
	Hold                time.Duration // steady time per step, default 2.5 s
	Move                time.Duration // ramp time between steps, default 0.5 s
	Foil                Foil          // true foil model (defaults: see Foil)
	NoiseFrac           float64       // load-cell noise as a fraction of capacity, default 2e-4
	Seed                uint64        // random seed (0 is a valid seed)
	// FlowOffBefore is a flow-off stretch (carriage at rest, q = 0) before
	// the sweep starts, for a flow-off zero. 0: the flow is on from the start.
	FlowOffBefore time.Duration
	// Sweeps is the number of up-and-down sweeps after which the flow goes
	// off for good (for a flow-off zero at the end). 0: sweep for ever.
	Sweeps int
	// ZeroDriftNPerS makes every load cell's zero drift linearly, N/s, as a
	// warming bridge does: the flow-off zeros before and after show it.
	ZeroDriftNPerS float64
	// WeightTare adds, per balance channel (normal or axial cell, by
	// name), the load of the model's weight less its buoyancy as it turns
	// with the angle: w(α) = a + b·sin α + c·cos α, N. It is a real load,
	// so Interaction acts on it too. Nil: a weightless model.
	WeightTare map[string][3]float64
	// Interaction is the balance's cross-talk: the outputs are o = X·f,
	// with f the true loads of the normal cells, then the axial cells, in
	// [lift] order, and X square of that size. Nil: each cell reads its
	// own load only.
	Interaction [][]float64
	// FlowOff keeps the flow off for the whole record while the angle
	// sweeps through its steps: a flow-off tare sweep.
	FlowOff bool
	// Gusts add slower turbulence on top of TurbulenceIntensity: each is
	// an AR(1) process of u′/U with its own intensity and integral time,
	// so u′/U is a sum of AR(1) processes of very different τ, as an
	// outdoor yard or a towing tank's residual motion gives. Nil: none.
	Gusts []Gust
	// FlowRamp is the time the flow takes to come on after FlowOffBefore
	// (q rising linearly from 0) and to go off after the last sweep (q
	// falling linearly to 0), as a carriage accelerates and brakes. 0: the
	// flow steps on and off.
	FlowRamp time.Duration
	// NormalSpanFrac is a span error of the normal-force cells: each reads
	// (1 + NormalSpanFrac) × its true force, as with a calibration whose
	// slope is off by that fraction. 0: no span error.
	NormalSpanFrac float64
	// PitotSpanFrac is the same for the pitot (its Δp reads (1 + PitotSpanFrac)
	// × the true one). 0: none.
	PitotSpanFrac float64
	Start         time.Time // device clock at the first sample (default: Now at Run, or the Unix epoch for Next)
	// Rotor is the true spinning body of a rotor rig (defaults: see
	// Rotor); SpinSteps are the spin ratios it steps through, up and down
	// like StepsDeg (default DefaultSpinSteps). Both are ignored for other
	// kinds; a rotor rig ignores StepsDeg and Foil.
	Rotor     Rotor
	SpinSteps []float64
}

// Gust is one AR(1) component of the simulated flow's u′/U (Config.Gusts).
type Gust struct {
	TurbulenceIntensity float64 // standard deviation of this component's u′/U
	IntegralTimeS       float64 // its integral time scale, s (must be > 0)
}

// Foil is the simulator's true foil. Invented numbers: they describe no real
// section.
type Foil struct {
	LiftSlopePerRad float64 // dC_L/dα below stall, per rad (default 4.2)
	AlphaZeroRad    float64 // zero-lift angle, rad (default −1.5°)
	StallRad        float64 // stall angle, rad (default 11°)
	CD0             float64 // zero-lift drag coefficient (default 0.012)
	K               float64 // induced-drag factor: C_D = CD0 + K·C_L² (default 0.08)
	// CLOffset is added to C_L at every angle, the drag left as it is: a
	// known change of configuration (a trim tab, say) for run-against-run
	// comparison tests. 0: none.
	CLOffset float64
}

func (f *Foil) defaults() {
	if f.LiftSlopePerRad == 0 {
		f.LiftSlopePerRad = 4.2
	}
	if f.AlphaZeroRad == 0 {
		f.AlphaZeroRad = rig.Rad(-1.5)
	}
	if f.StallRad == 0 {
		f.StallRad = rig.Rad(11)
	}
	if f.CD0 == 0 {
		f.CD0 = 0.012
	}
	if f.K == 0 {
		f.K = 0.08
	}
}

// Truth returns the foil's true C_L and C_D at angle of attack α. Past the
// stall angle the lift falls off and the drag rises, as a stalled foil does.
// CLOffset is added to C_L after the drag is found.
func (f Foil) Truth(alphaRad float64) (cl, cd float64) {
	cl, cd = f.truth(alphaRad)
	return cl + f.CLOffset, cd
}

func (f Foil) truth(alphaRad float64) (cl, cd float64) {
	a := alphaRad
	if a <= f.StallRad {
		cl = f.LiftSlopePerRad * (a - f.AlphaZeroRad)
		return cl, f.CD0 + f.K*cl*cl
	}
	clStall := f.LiftSlopePerRad * (f.StallRad - f.AlphaZeroRad)
	over := a - f.StallRad
	cl = clStall - 2.5*f.LiftSlopePerRad*over
	cd = f.CD0 + f.K*clStall*clStall + 1.8*over
	return cl, cd
}

// Rig simulates one rig description. It is an acquire.Source.
type Rig struct {
	// Health counts the blocks made and those dropped on a full channel.
	Health acquire.Health

	cfg    Config
	source string
	rng    *rand.Rand

	normal   []chanInv // normal-force cells, with their share of N
	shares   []float64
	axial    []chanInv
	pitot    *chanInv
	speed    *chanInv
	angle    *chanInv
	temp     *chanInv
	spin     *chanInv // rotor rigs: the tachometer (rotor.go)
	rhoForV  float64
	tempK    float64
	areaM2   float64
	pitotC   float64
	channels []string

	radiusM, speedMeanMPerS, fixedAlphaRad float64 // rotor rigs

	n     int64     // samples generated so far
	seq   uint64    // blocks generated so far
	turb  float64   // AR(1) state of u′/U
	gusts []float64 // AR(1) states of Config.Gusts
	t0Us  int64
}

type chanInv struct {
	name     string
	poly     []float64
	toSI     rig.Affine
	capacity float64
}

// New builds a simulator for the rig's lift roles (normal, axial, angle,
// dynamic_pressure or speed, temperature). rhoKgPerM3 converts q to a speed
// when the rig measures speed instead of Δp; it may be 0 otherwise.
func New(r *rig.Rig, cfg Config, rhoKgPerM3 float64) (*Rig, error) {
	if cfg.QPa <= 0 {
		return nil, errors.New("sim: QPa must be > 0")
	}
	if cfg.TurbulenceIntensity == 0 {
		cfg.TurbulenceIntensity = 0.02
	}
	if cfg.IntegralTimeS == 0 {
		cfg.IntegralTimeS = 0.05
	}
	if cfg.RateHz == 0 {
		cfg.RateHz = 200
	}
	if cfg.BlockSamples == 0 {
		cfg.BlockSamples = 20
	}
	if len(cfg.StepsDeg) == 0 {
		cfg.StepsDeg = []float64{-4, -2, 0, 2, 4, 6, 8, 10, 12}
	}
	if cfg.Hold == 0 {
		cfg.Hold = 2500 * time.Millisecond
	}
	if cfg.Move == 0 {
		cfg.Move = 500 * time.Millisecond
	}
	if cfg.NoiseFrac == 0 {
		cfg.NoiseFrac = 2e-4
	}
	for i, g := range cfg.Gusts {
		if !(g.IntegralTimeS > 0) || g.TurbulenceIntensity < 0 {
			return nil, fmt.Errorf("sim: gust %d: integral time %g s must be > 0 and intensity %g ≥ 0", i+1, g.IntegralTimeS, g.TurbulenceIntensity)
		}
	}
	cfg.Gusts = append([]Gust(nil), cfg.Gusts...)
	cfg.Foil.defaults()
	if x := cfg.Interaction; x != nil {
		n := len(r.Lift.Normal) + len(r.Lift.Axial)
		ok := len(x) == n
		for _, row := range x {
			ok = ok && len(row) == n
		}
		if !ok {
			return nil, fmt.Errorf("sim: Interaction must be %d×%d (normal then axial cells)", n, n)
		}
	}
	s := &Rig{
		cfg:     cfg,
		rng:     rand.New(rand.NewPCG(cfg.Seed, 0x5eed)),
		gusts:   make([]float64, len(cfg.Gusts)),
		rhoForV: rhoKgPerM3,
		tempK:   r.Conditions.TempK,
		areaM2:  r.Reference.AreaM2,
		pitotC:  r.Lift.PitotCoeff,
	}
	if s.pitotC == 0 {
		s.pitotC = 1
	}
	if s.areaM2 <= 0 {
		return nil, errors.New("sim: rig reference area must be > 0")
	}
	if len(r.Sources) > 0 {
		s.source = r.Sources[0].Name
	}
	look := func(name string) (*chanInv, error) {
		if name == "" {
			return nil, nil
		}
		c, err := newChanInv(r, name)
		if err == nil {
			s.channels = append(s.channels, name)
		}
		return c, err
	}
	for i, name := range r.Lift.Normal {
		c, err := look(name)
		if err != nil {
			return nil, err
		}
		s.normal = append(s.normal, *c)
		// An invented, uneven split: the fore cell carries more, as it
		// would with the centre of pressure ahead of the balance centre.
		s.shares = append(s.shares, float64(len(r.Lift.Normal)-i))
	}
	if len(s.normal) == 0 {
		return nil, errors.New("sim: rig has no normal-force channels in [lift] normal")
	}
	var total float64
	for _, w := range s.shares {
		total += w
	}
	for i := range s.shares {
		s.shares[i] /= total
	}
	for _, name := range r.Lift.Axial {
		c, err := look(name)
		if err != nil {
			return nil, err
		}
		s.axial = append(s.axial, *c)
	}
	var err error
	if s.pitot, err = look(r.Lift.DynamicPressure); err != nil {
		return nil, err
	}
	if s.pitot == nil {
		if s.speed, err = look(r.Lift.Speed); err != nil {
			return nil, err
		}
		if s.speed == nil {
			return nil, errors.New("sim: rig needs [lift] dynamic_pressure or speed")
		}
		if rhoKgPerM3 <= 0 {
			return nil, errors.New("sim: a speed channel needs the fluid density")
		}
	}
	if s.angle, err = look(r.Lift.AngleChannel); err != nil {
		return nil, err
	}
	if s.temp, err = look(r.Lift.Temperature); err != nil {
		return nil, err
	}
	if r.Kind == rig.KindRotor {
		if err := s.rotorSetup(r, rhoKgPerM3); err != nil {
			return nil, err
		}
	}
	return s, nil
}

// Preview returns the shape of the blocks Next makes (channel names in
// order, no readings) without advancing the simulation.
func (s *Rig) Preview() acquire.Block {
	b := acquire.Block{Source: s.source, Series: make([]acquire.Series, len(s.channels))}
	for i, name := range s.channels {
		b.Series[i] = acquire.Series{Channel: name}
	}
	return b
}

// Source returns the name of the rig source the blocks are labelled with.
func (s *Rig) Source() string { return s.source }

// Foil returns the true foil model.
func (s *Rig) Foil() Foil { return s.cfg.Foil }

// Config returns the configuration with defaults filled in.
func (s *Rig) Config() Config { return s.cfg }

// SweepS returns the length of one up-and-down sweep, s.
func (s *Rig) SweepS() float64 {
	n := len(s.cfg.StepsDeg)
	if s.spin != nil {
		n = len(s.cfg.SpinSteps)
	}
	if n > 1 {
		n = 2*n - 2
	}
	return float64(n) * (s.cfg.Hold + s.cfg.Move).Seconds()
}

// AngleAt returns the commanded angle of attack at time t (seconds since the
// sweep started: the first sample, unless FlowOffBefore delays it) and
// whether the rig is holding a step (not moving).
// The sweep runs up through the steps and back down, and repeats.
func (s *Rig) AngleAt(tS float64) (alphaRad float64, holding bool) {
	deg, holding := stepAt(s.cfg.StepsDeg, s.cfg.Hold.Seconds(), s.cfg.Move.Seconds(), tS)
	return rig.Rad(deg), holding
}

// stepAt is the set-point schedule of AngleAt and SpinAt: hold each step
// for hold seconds, ramp to the next in move seconds, up through steps and
// back down, and repeat.
func stepAt(steps []float64, hold, move, tS float64) (v float64, holding bool) {
	period := hold + move
	// Up then down: a sequence of 2n−2 steps (the ends are not repeated).
	seq := len(steps)
	if seq > 1 {
		seq = 2*len(steps) - 2
	}
	k := int(math.Floor(tS / period))
	in := tS - float64(k)*period
	idx := func(k int) int {
		k %= seq
		if k < len(steps) {
			return k
		}
		return seq - k
	}
	cur := steps[idx(k)]
	if in < hold || len(steps) == 1 {
		return cur, true
	}
	next := steps[idx(k+1)]
	f := (in - hold) / move
	return cur + (next-cur)*f, false
}

// Next returns the next block of raw readings. The device clock starts at
// Config.Start (the Unix epoch when zero) and advances by one sample period
// per sample, whatever the wall clock does.
func (s *Rig) Next() acquire.Block {
	n := s.cfg.BlockSamples
	dtS := 1 / s.cfg.RateHz
	dtUs := int64(math.Round(dtS * 1e6))
	if s.n == 0 {
		s.t0Us = s.cfg.Start.UnixMicro()
		if s.cfg.Start.IsZero() {
			s.t0Us = 0
		}
	}
	b := acquire.Block{
		Source: s.source,
		Seq:    s.seq,
		T0Us:   s.t0Us + s.n*dtUs,
		DtUs:   dtUs,
		Series: make([]acquire.Series, len(s.channels)),
	}
	for i, name := range s.channels {
		b.Series[i] = acquire.Series{Channel: name, Raw: make([]float64, n)}
	}
	phi := math.Exp(-dtS / s.cfg.IntegralTimeS)
	innov := s.cfg.TurbulenceIntensity * math.Sqrt(1-phi*phi)
	for i := 0; i < n; i++ {
		tS := float64(s.n) * dtS
		s.turb = phi*s.turb + innov*s.rng.NormFloat64()
		u := s.turb
		for k, g := range s.cfg.Gusts {
			gp := math.Exp(-dtS / g.IntegralTimeS)
			if s.n == 0 { // stationary start
				s.gusts[k] = g.TurbulenceIntensity * s.rng.NormFloat64()
			}
			s.gusts[k] = gp*s.gusts[k] + g.TurbulenceIntensity*math.Sqrt(1-gp*gp)*s.rng.NormFloat64()
			u += s.gusts[k]
		}
		q := s.cfg.QPa * (1 + u) * (1 + u)
		sweepT := tS - s.cfg.FlowOffBefore.Seconds()
		endT := float64(s.cfg.Sweeps) * s.SweepS()
		if s.cfg.FlowOff || sweepT < 0 || (s.cfg.Sweeps > 0 && sweepT >= endT+s.cfg.FlowRamp.Seconds()) {
			q = 0 // flow off: carriage at rest
			sweepT = max(sweepT, 0)
			if s.cfg.Sweeps > 0 && sweepT > endT {
				sweepT = endT // and the angle stays where the sweep ended
			}
		}
		if ramp := s.cfg.FlowRamp.Seconds(); ramp > 0 && q != 0 {
			switch {
			case sweepT < ramp:
				q *= sweepT / ramp
			case s.cfg.Sweeps > 0 && sweepT >= endT:
				q *= 1 - (sweepT-endT)/ramp
				sweepT = endT // the angle stays where the sweep ended
			}
		}
		var alpha, normal, axial, omega float64
		if s.spin != nil {
			normal, axial, omega, alpha = s.rotorSample(sweepT, q)
		} else {
			alpha, _ = s.AngleAt(sweepT)
			cl, cd := s.cfg.Foil.Truth(alpha)
			lift, drag := cl*q*s.areaM2, cd*q*s.areaM2
			normal = lift*math.Cos(alpha) + drag*math.Sin(alpha)
			axial = drag*math.Cos(alpha) - lift*math.Sin(alpha)
		}
		zero := s.cfg.ZeroDriftNPerS * tS
		col := 0
		put := func(c *chanInv, si float64) {
			b.Series[col].Raw[i] = c.raw(si + s.noise(c))
			col++
		}
		loads := s.cellLoads(normal, axial, alpha)
		for k := range s.normal {
			put(&s.normal[k], (1+s.cfg.NormalSpanFrac)*loads[k]+zero)
		}
		for k := range s.axial {
			put(&s.axial[k], loads[len(s.normal)+k]+zero)
		}
		if s.pitot != nil {
			put(s.pitot, (1+s.cfg.PitotSpanFrac)*q/(s.pitotC*s.pitotC)) // the probe reads Δp = q/C²
		} else {
			put(s.speed, math.Sqrt(2*q/s.rhoForV))
		}
		if s.angle != nil {
			put(s.angle, alpha)
		}
		if s.temp != nil {
			put(s.temp, s.tempK)
		}
		if s.spin != nil {
			put(s.spin, omega)
		}
		s.n++
	}
	s.seq++
	return b
}

// cellLoads returns what each balance cell reads, normal cells then axial
// cells: its share of the aerodynamic load plus its weight tare at α,
// through the interaction matrix.
func (s *Rig) cellLoads(normal, axial, alphaRad float64) []float64 {
	f := make([]float64, 0, len(s.normal)+len(s.axial))
	tare := func(name string) float64 {
		w, ok := s.cfg.WeightTare[name]
		if !ok {
			return 0
		}
		return w[0] + w[1]*math.Sin(alphaRad) + w[2]*math.Cos(alphaRad)
	}
	for k := range s.normal {
		f = append(f, normal*s.shares[k]+tare(s.normal[k].name))
	}
	for k := range s.axial {
		f = append(f, axial/float64(len(s.axial))+tare(s.axial[k].name))
	}
	x := s.cfg.Interaction
	if x == nil {
		return f
	}
	o := make([]float64, len(f))
	for i := range o {
		for j, v := range f {
			o[i] += x[i][j] * v
		}
	}
	return o
}

// noise is white sensor noise, a fraction of the channel's capacity.
func (s *Rig) noise(c *chanInv) float64 { return c.noise(s.cfg.NoiseFrac, s.rng) }

// newChanInv looks up a rig channel and keeps what inverting its
// calibration needs (an absent polynomial is the identity).
func newChanInv(r *rig.Rig, name string) (*chanInv, error) {
	ch, ok := r.Channel(name)
	if !ok {
		return nil, fmt.Errorf("sim: channel %q not in rig", name)
	}
	poly := ch.Calibration.Poly
	if len(poly) == 0 {
		poly = []float64{0, 1}
	}
	return &chanInv{name: name, poly: poly, toSI: ch.ToSI, capacity: ch.CapacitySI}, nil
}

// noise is white sensor noise of frac of the channel's capacity (none for
// an unrated channel).
func (c *chanInv) noise(frac float64, rng *rand.Rand) float64 {
	if c.capacity <= 0 {
		return 0
	}
	return frac * c.capacity * rng.NormFloat64()
}

// raw inverts the channel's unit conversion and calibration polynomial and
// quantises to whole ADC counts when the calibration is in counts (|c1| < 1
// of the unit per count is taken to mean a counting converter).
func (c *chanInv) raw(si float64) float64 {
	v := (si - c.toSI.Offset) / c.toSI.Scale
	r := invertPoly(c.poly, v)
	if len(c.poly) > 1 && math.Abs(c.poly[1]) < 1 {
		r = math.Round(r)
	}
	return r
}

// invertPoly solves Σ c_k r^k = v for r by Newton's method, starting from the
// linear solution. The calibrations are monotonic over their range.
func invertPoly(c []float64, v float64) float64 {
	if len(c) < 2 || c[1] == 0 {
		return v
	}
	r := (v - c[0]) / c[1]
	for range 20 {
		f, d := 0.0, 0.0
		for k := len(c) - 1; k >= 0; k-- {
			d = d*r + f
			f = f*r + c[k]
		}
		if d == 0 {
			break
		}
		step := (f - v) / d
		r -= step
		if math.Abs(step) <= 1e-12*math.Max(1, math.Abs(r)) {
			break
		}
	}
	return r
}

// Run generates blocks in real time, one every BlockSamples/RateHz, stamped
// with the wall clock, and sends them on out until ctx is done. It never
// blocks on a full out: the block is dropped and counted in Health. It
// returns nil when ctx is cancelled.
func (s *Rig) Run(ctx context.Context, out chan<- acquire.Block) error {
	if s.cfg.Start.IsZero() {
		s.cfg.Start = time.Now()
	}
	period := time.Duration(float64(s.cfg.BlockSamples) / s.cfg.RateHz * float64(time.Second))
	tick := time.NewTicker(period)
	defer tick.Stop()
	for {
		select {
		case <-ctx.Done():
			return nil
		case now := <-tick.C:
			b := s.Next()
			b.Received = now
			select {
			case out <- b:
				s.Health.Frames.Add(1)
				s.Health.Samples.Add(uint64(b.Len()))
			default:
				s.Health.SamplesDropped.Add(uint64(b.Len()))
			}
		}
	}
}
