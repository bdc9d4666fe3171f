package sim

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"time"

	"liftyard/acquire"
	"liftyard/rig"
)

// RoofConfig sets the simulated wind over a roof mock-up. A zero field takes
// the default given beside it. The flow model is invented for tests and
// demos; it describes no real building.
type RoofConfig struct {
	QPa                 float64 // mean reference dynamic pressure at the mast, Pa (required)
	TurbulenceIntensity float64 // u′/U of the approach flow, default 0.15 (an open yard)
	IntegralTimeS       float64 // integral time scale of the approach gusts, s (default 0.5)
	// TapTurbulence is the standard deviation of each tap's local pressure
	// fluctuation (separated flow, independent from tap to tap), as a
	// fraction of the mean q (default 0.15).
	TapTurbulence    float64
	TapIntegralTimeS float64 // integral time scale of the local fluctuations, s (default 0.05)
	// ZoneCp is the true mean external pressure coefficient of each zone's
	// taps. A zone not listed gets its design_cp plus the internal cp (so
	// its true net Cp equals the design value), or −1.0 without a design.
	ZoneCp map[string]float64
	// TapGustCorrelation is the correlation ρ between the gust the taps
	// feel and the mast's gust (0..1; default 1, the taps follow the mast
	// exactly). The roof's gust is u_r(t) = ρ·u_m(t − lag) + √(1 − ρ²)·v(t),
	// v an independent gust of the same intensity and time scale, so the
	// roof's mean dynamic pressure equals the mast's and the true net Cp
	// stays p̄/q̄ = the zone's Cp.
	TapGustCorrelation float64
	TapGustLagS        float64 // lag of the roof's gust behind the mast's, s (default 0)
	// DirectionSpreadRad is the standard deviation of the vane's direction
	// about DirectionRad (an AR(1) with the gusts' time scale; default 0).
	DirectionSpreadRad float64
	// TimestampJitterUs moves each block's first timestamp by a random
	// whole number of µs in [−J, +J] (a scanner clock that jitters); 0: none.
	TimestampJitterUs int64
	// TapCp overrides the true mean external Cp of single taps (by tap name).
	TapCp map[string]float64
	// InternalCp is the true internal pressure coefficient when the rig
	// reads the inside through a channel (default 0). With a fixed
	// [internal] cp the rig's value is the truth.
	InternalCp   float64
	DirectionRad float64 // wind direction reported on the rig's direction channel, rad from north
	RateHz       float64 // sample rate, Hz (default 200)
	BlockSamples int     // samples per block, default 20
	NoiseFrac    float64 // transducer noise as a fraction of capacity, default 2e-4
	// CalibrationErrors draws each channel's calibration error once per run
	// from a normal distribution with the channel's stated standard
	// uncertainty (a zero offset error, in SI units), as a real set of
	// calibrated transducers carries: with it, a run's Type B budget can be
	// checked by coverage over many seeds.
	CalibrationErrors bool
	// FlowOff makes the reference q and every pressure zero (wind calm).
	FlowOff bool
	Seed    uint64    // random seed (0 is a valid seed)
	Start   time.Time // device clock at the first sample (default: Now at Run, or the Unix epoch for Next)
}

// Roof simulates a roof rig: taps with known mean pressure coefficients
// that follow the reference q quasi-steadily, p_i(t) = Cp_i·q(t) + local
// AR(1) turbulence, a reference pitot, an internal pressure channel when
// the rig has one and a wind vane. Readings go out raw, through the
// inverse of each channel's calibration, as sim.Rig does. It is an
// acquire.Source.
type Roof struct {
	// Health counts the blocks made and those dropped on a full channel.
	Health acquire.Health

	cfg      RoofConfig
	source   string
	rng      *rand.Rand
	taps     []roofTap
	pitot    *chanInv
	pitotC   float64
	internal *chanInv
	intCp    float64
	vane     *chanInv
	channels []string
	calErr   map[string]float64
	zoneCp   map[string]float64 // true net Cp per zone (area-weighted)

	n    int64
	seq  uint64
	turb float64
	t0Us int64

	own  float64   // the roof's own gust v (AR(1), sd = TurbulenceIntensity)
	past []float64 // ring of the mast's recent gusts, for the lag
	dirA float64   // AR(1) state of the direction, unit variance
}

type roofTap struct {
	ch    chanInv
	cpExt float64
	ar    float64 // AR(1) state of the local fluctuation, unit variance
}

// NewRoof builds a simulator for a roof rig: every [[tap]], the
// [lift] dynamic_pressure channel, the [internal] channel when there is one
// and the [lift] direction channel when there is one, in that order.
func NewRoof(r *rig.Rig, cfg RoofConfig) (*Roof, error) {
	if r == nil {
		return nil, errors.New("sim: nil rig")
	}
	if !(cfg.QPa > 0) && !cfg.FlowOff {
		return nil, errors.New("sim: QPa must be > 0")
	}
	if len(r.Taps) == 0 {
		return nil, errors.New("sim: rig has no [[tap]]")
	}
	if r.Lift.DynamicPressure == "" {
		return nil, errors.New("sim: roof rig needs [lift] dynamic_pressure (the reference pitot)")
	}
	if cfg.TurbulenceIntensity == 0 {
		cfg.TurbulenceIntensity = 0.15
	}
	if cfg.IntegralTimeS == 0 {
		cfg.IntegralTimeS = 0.5
	}
	if cfg.TapTurbulence == 0 {
		cfg.TapTurbulence = 0.15
	}
	if cfg.TapIntegralTimeS == 0 {
		cfg.TapIntegralTimeS = 0.05
	}
	if cfg.RateHz == 0 {
		cfg.RateHz = 200
	}
	if cfg.BlockSamples == 0 {
		cfg.BlockSamples = 20
	}
	if cfg.NoiseFrac == 0 {
		cfg.NoiseFrac = 2e-4
	}
	if cfg.TapGustCorrelation == 0 {
		cfg.TapGustCorrelation = 1
	}
	if cfg.TapGustCorrelation < 0 || cfg.TapGustCorrelation > 1 || cfg.TapGustLagS < 0 {
		return nil, errors.New("sim: TapGustCorrelation must lie in [0, 1] and TapGustLagS be ≥ 0")
	}
	s := &Roof{cfg: cfg, rng: rand.New(rand.NewPCG(cfg.Seed, 0x700f)), calErr: map[string]float64{},
		zoneCp: map[string]float64{}, pitotC: r.Lift.PitotCoeff}
	if s.pitotC == 0 {
		s.pitotC = 1
	}
	if len(r.Sources) > 0 {
		s.source = r.Sources[0].Name
	}
	look := func(name string) (*chanInv, error) {
		c, err := newChanInv(r, name)
		if err != nil {
			return nil, err
		}
		s.channels = append(s.channels, name)
		if cfg.CalibrationErrors {
			// The stated u is in the channel's unit; ToSI.Scale takes it to SI.
			ch, _ := r.Channel(name)
			s.calErr[name] = ch.Calibration.U * math.Abs(ch.ToSI.Scale) * s.rng.NormFloat64()
		}
		return c, nil
	}
	s.intCp = cfg.InternalCp
	if r.Internal.Channel == "" {
		s.intCp = r.Internal.Cp
	}
	design := map[string]rig.Zone{}
	for _, z := range r.Zones {
		design[z.Name] = z
	}
	area := map[string]float64{}
	for _, t := range r.Taps {
		c, err := look(t.Channel)
		if err != nil {
			return nil, err
		}
		cp, ok := cfg.TapCp[t.Name]
		if !ok {
			cp, ok = cfg.ZoneCp[t.Zone]
		}
		if !ok {
			cp = -1.0
			if z, found := design[t.Zone]; found && (z.DesignCp != 0 || z.DesignU != 0) {
				cp = z.DesignCp + s.intCp
			}
		}
		s.taps = append(s.taps, roofTap{ch: *c, cpExt: cp})
		for _, zn := range []string{t.Zone, "roof"} {
			s.zoneCp[zn] += t.AreaM2 * (cp - s.intCp)
			area[zn] += t.AreaM2
		}
	}
	for zn, a := range area {
		if a > 0 {
			s.zoneCp[zn] /= a
		} else {
			s.zoneCp[zn] = math.NaN()
		}
	}
	var err error
	if s.pitot, err = look(r.Lift.DynamicPressure); err != nil {
		return nil, err
	}
	if r.Internal.Channel != "" {
		if s.internal, err = look(r.Internal.Channel); err != nil {
			return nil, err
		}
	}
	if r.Lift.Direction != "" {
		if s.vane, err = look(r.Lift.Direction); err != nil {
			return nil, err
		}
	}
	// Start each tap's local fluctuation in its stationary distribution.
	for i := range s.taps {
		s.taps[i].ar = s.rng.NormFloat64()
	}
	s.turb = cfg.TurbulenceIntensity * s.rng.NormFloat64()
	s.own = cfg.TurbulenceIntensity * s.rng.NormFloat64()
	s.dirA = s.rng.NormFloat64()
	lag := int(math.Round(cfg.TapGustLagS * cfg.RateHz))
	s.past = make([]float64, lag+1)
	for i := range s.past {
		s.past[i] = s.turb
	}
	return s, nil
}

// TrueCp returns the true mean net pressure coefficient (external minus
// internal, area-weighted over the zone's taps) of zone, or of the whole
// roof for "roof"; NaN for a zone without taps or not in the rig.
func (s *Roof) TrueCp(zone string) float64 {
	v, ok := s.zoneCp[zone]
	if !ok {
		return math.NaN()
	}
	return v
}

// Source returns the name of the rig source the blocks are labelled with.
func (s *Roof) Source() string { return s.source }

// Config returns the configuration with defaults filled in.
func (s *Roof) Config() RoofConfig { return s.cfg }

// Next returns the next block of raw readings. The device clock starts at
// Config.Start (the Unix epoch when zero) and advances by one sample period
// per sample.
// Preview returns the shape of the blocks Next makes (channel names in
// order, no readings) without advancing the simulation.
func (s *Roof) Preview() acquire.Block {
	b := acquire.Block{Source: s.source, Series: make([]acquire.Series, len(s.channels))}
	for i, name := range s.channels {
		b.Series[i] = acquire.Series{Channel: name}
	}
	return b
}

func (s *Roof) Next() acquire.Block {
	n := s.cfg.BlockSamples
	dtS := 1 / s.cfg.RateHz
	dtUs := int64(math.Round(dtS * 1e6))
	if s.n == 0 {
		s.t0Us = s.cfg.Start.UnixMicro()
		if s.cfg.Start.IsZero() {
			s.t0Us = 0
		}
	}
	b := acquire.Block{Source: s.source, Seq: s.seq, T0Us: s.t0Us + s.n*dtUs, DtUs: dtUs,
		Series: make([]acquire.Series, len(s.channels))}
	for i, name := range s.channels {
		b.Series[i] = acquire.Series{Channel: name, Raw: make([]float64, n)}
	}
	phi := math.Exp(-dtS / s.cfg.IntegralTimeS)
	innov := s.cfg.TurbulenceIntensity * math.Sqrt(1-phi*phi)
	phiL := math.Exp(-dtS / s.cfg.TapIntegralTimeS)
	innovL := math.Sqrt(1 - phiL*phiL)
	rho := s.cfg.TapGustCorrelation
	innovD := math.Sqrt(1 - phi*phi)
	if j := s.cfg.TimestampJitterUs; j > 0 {
		b.T0Us += s.rng.Int64N(2*j+1) - j
	}
	for i := range n {
		s.turb = phi*s.turb + innov*s.rng.NormFloat64()
		s.own = phi*s.own + innov*s.rng.NormFloat64()
		s.dirA = phi*s.dirA + innovD*s.rng.NormFloat64()
		// The mast's gust enters the ring; the roof feels the one lag ago.
		s.past[int(s.n)%len(s.past)] = s.turb
		lagged := s.past[int(s.n+1)%len(s.past)]
		roof := rho*lagged + math.Sqrt(1-rho*rho)*s.own
		q := s.cfg.QPa * (1 + s.turb) * (1 + s.turb)
		qRoof := s.cfg.QPa * (1 + roof) * (1 + roof)
		local := s.cfg.TapTurbulence * s.cfg.QPa
		if s.cfg.FlowOff {
			q, qRoof, local = 0, 0, 0
		}
		col := 0
		put := func(c *chanInv, si float64) {
			b.Series[col].Raw[i] = c.raw(si + s.noise(c) + s.calErr[c.name])
			col++
		}
		for k := range s.taps {
			t := &s.taps[k]
			t.ar = phiL*t.ar + innovL*s.rng.NormFloat64()
			put(&t.ch, t.cpExt*qRoof+local*t.ar)
		}
		put(s.pitot, q/(s.pitotC*s.pitotC)) // the probe reads Δp = q/C²
		if s.internal != nil {
			put(s.internal, s.intCp*qRoof)
		}
		if s.vane != nil {
			put(s.vane, s.cfg.DirectionRad+s.cfg.DirectionSpreadRad*s.dirA)
		}
		s.n++
	}
	s.seq++
	return b
}

// noise is white transducer noise, a fraction of the channel's capacity.
func (s *Roof) noise(c *chanInv) float64 { return c.noise(s.cfg.NoiseFrac, s.rng) }

// Run generates blocks in real time, one every BlockSamples/RateHz, stamped
// with the wall clock, and sends them on out until ctx is done. It never
// blocks on a full out: the block is dropped and counted in Health. It
// returns nil when ctx is cancelled.
func (s *Roof) Run(ctx context.Context, out chan<- acquire.Block) error {
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
