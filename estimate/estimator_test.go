package estimate_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// testRig is a foil on a two-cell normal balance in air (a scenario of our
// own): chord 0.2 m, span 0.5 m, pitot in the same or another source.
func testRig() *rig.Rig {
	ch := func(name string, q rig.Quantity) rig.Channel {
		return rig.Channel{Name: name, Quantity: q, ToSI: rig.Affine{Scale: 1}}
	}
	return &rig.Rig{
		Name: "yard foil", Kind: rig.KindFoil, Fluid: rig.FluidAir,
		Conditions: rig.Conditions{TempK: 288.15, PressurePa: 101325},
		Reference:  rig.Reference{AreaM2: 0.1, AreaUM2: 0.0002, LengthM: 0.2, SpanM: 0.5},
		Channels: []rig.Channel{ch("n_fore", rig.QuantityForce), ch("n_aft", rig.QuantityForce),
			ch("axial", rig.QuantityForce), ch("pitot", rig.QuantityPressure), ch("alpha", rig.QuantityAngle)},
		Lift: rig.Lift{Normal: []string{"n_fore", "n_aft"}, Axial: []string{"axial"},
			AngleChannel: "alpha", DynamicPressure: "pitot", PitotCoeff: 1},
	}
}

// sweep generates calibrated blocks of a stepped angle sweep: each step holds
// for stepS seconds after a first-order settling (τ = 50 ms); q has AR(1)
// turbulence; C_L = slope·α, C_D = 0.012 + 0.04·C_L².
type sweep struct {
	stepsDeg    []float64
	stepS       float64
	rateHz      float64
	blockN      int
	q0Pa        float64
	slopePerRad float64
	nanFrac     float64
	pitotSource string // "" = same source as the balance
}

func (s sweep) truth(alphaRad float64) (cl, cd float64) {
	cl = s.slopePerRad * alphaRad
	return cl, 0.012 + 0.04*cl*cl
}

func (s sweep) blocks(seed uint64) []*calibrate.Block {
	r := rand.New(rand.NewPCG(seed, 42))
	dtUs := int64(1e6 / s.rateHz)
	total := int(float64(len(s.stepsDeg)) * s.stepS * s.rateHz)
	turb, alphaNow := 0.0, rig.Rad(s.stepsDeg[0])
	var out []*calibrate.Block
	const u = 0.05 // calibration standard uncertainty of each cell, N
	for start := 0; start < total; start += s.blockN {
		n := min(s.blockN, total-start)
		bal := &calibrate.Block{Source: "balance", Seq: uint64(len(out)), T0Us: 1_700_000_000_000_000 + int64(start)*dtUs, DtUs: dtUs}
		nf, na, ax, pt, al := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range n {
			k := start + i
			target := rig.Rad(s.stepsDeg[int(float64(k)/(s.stepS*s.rateHz))])
			alphaNow += (target - alphaNow) * (1 - math.Exp(-1/(s.rateHz*0.05)))
			turb = 0.95*turb + math.Sqrt(1-0.95*0.95)*r.NormFloat64()
			q := s.q0Pa * (1 + 0.03*turb)
			cl, cd := s.truth(alphaNow)
			l, d := cl*q*0.1, cd*q*0.1
			sa, ca := math.Sincos(alphaNow)
			nTot, aTot := l*ca+d*sa, -l*sa+d*ca
			nf[i] = 0.6*nTot + 0.05*r.NormFloat64()
			na[i] = 0.4*nTot + 0.05*r.NormFloat64()
			ax[i] = aTot + 0.02*r.NormFloat64()
			pt[i] = q + 0.5*r.NormFloat64()
			al[i] = alphaNow + 0.0005*r.NormFloat64()
			if r.Float64() < s.nanFrac {
				nf[i] = math.NaN()
			}
			if r.Float64() < s.nanFrac {
				pt[i] = math.NaN()
			}
		}
		inf := math.Inf(1)
		bal.Series = []calibrate.Series{
			{Channel: "n_fore", Values: nf, U: u, Dof: inf}, {Channel: "n_aft", Values: na, U: u, Dof: inf},
			{Channel: "axial", Values: ax, U: 0.03, Dof: inf}, {Channel: "alpha", Values: al, U: 0.001, Dof: inf},
		}
		pitot := calibrate.Series{Channel: "pitot", Values: pt, U: 1.0, Dof: 30}
		if s.pitotSource == "" {
			bal.Series = append(bal.Series, pitot)
			out = append(out, bal)
			continue
		}
		// The pitot arrives from its own logger just before the balance block.
		out = append(out, &calibrate.Block{Source: s.pitotSource, T0Us: bal.T0Us, DtUs: dtUs, Series: []calibrate.Series{pitot}}, bal)
	}
	return out
}

var stdSweep = sweep{
	stepsDeg: []float64{-4, -2, 0, 2, 4, 6, 8}, stepS: 4, rateHz: 200, blockN: 20,
	q0Pa: 350, slopePerRad: 4.6,
}

func feed(t *testing.T, e *estimate.Estimator, blocks []*calibrate.Block) []estimate.Segment {
	t.Helper()
	var segs []estimate.Segment
	for _, b := range blocks {
		segs = append(segs, e.Add(b)...)
	}
	return append(segs, e.Flush()...)
}

// Ensure that a stepped sweep gives one segment per step, numbered in
// order, with C_L within its U95 of the truth.
func TestEstimator_Sweep(t *testing.T) {
	for _, tc := range []struct {
		name string
		sw   func() sweep
	}{
		{"one source", func() sweep { return stdSweep }},
		{"pitot from another source", func() sweep { s := stdSweep; s.pitotSource = "pitot-logger"; return s }},
		{"5 % missing samples", func() sweep { s := stdSweep; s.nanFrac = 0.05; return s }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			sw := tc.sw()
			e, err := estimate.NewEstimator(testRig(), estimate.Config{})
			if err != nil {
				t.Fatal(err)
			}
			segs := feed(t, e, sw.blocks(1))
			if len(segs) != len(sw.stepsDeg) {
				t.Fatalf("%d segments, want %d (one per step)", len(segs), len(sw.stepsDeg))
			}
			for i, s := range segs {
				want, _ := sw.truth(rig.Rad(sw.stepsDeg[i]))
				if s.Index != i {
					t.Errorf("segment %d has Index %d", i, s.Index)
				}
				if d := math.Abs(s.CL.X - want); d > s.CL.U95() {
					t.Errorf("step %g°: C_L %.4f ± %.4f misses truth %.4f", sw.stepsDeg[i], s.CL.X, s.CL.U95(), want)
				}
				if d := s.TEnd.Sub(s.TStart); d < 3*time.Second || d > 4*time.Second {
					t.Errorf("step %g°: segment spans %s of a 4 s step", sw.stepsDeg[i], d)
				}
				if !(s.NEff > 1 && s.NEff <= float64(s.N)) || s.Re < 1e5 || !math.IsNaN(s.En) {
					t.Errorf("step %g°: N %d NEff %.1f Re %.0f En %g", sw.stepsDeg[i], s.N, s.NEff, s.Re, s.En)
				}
			}
			lv, ok := e.Live()
			if !ok || lv.Segments != len(sw.stepsDeg) || lv.N < 300 {
				t.Errorf("live: ok %v, %+v", ok, lv)
			}
		})
	}
}

// Ensure that Live warns when the flow is off and when the speed passes
// Mach 0.3, and reports steady inside a plateau.
func TestEstimator_LiveWarnings(t *testing.T) {
	sw := stdSweep
	sw.stepsDeg = []float64{2}
	sw.stepS = 5
	e, _ := estimate.NewEstimator(testRig(), estimate.Config{})
	for _, b := range sw.blocks(2) {
		e.Add(b)
	}
	lv, ok := e.Live()
	if !ok || !lv.Steady || len(lv.Warnings) != 0 {
		t.Fatalf("plateau: ok %v steady %v warnings %q", ok, lv.Steady, lv.Warnings)
	}
	off := sw
	off.q0Pa = 5 // flow nearly off: 1.4 % of the run's maximum
	last := e.Add(nil)
	_ = last
	for _, b := range off.blocks(3) {
		b.T0Us += 5_000_000
		e.Add(b)
	}
	lv, _ = e.Live()
	if lv.Steady || !hasWarning(lv.Warnings, "q below 5 %") {
		t.Errorf("flow off: steady %v warnings %q", lv.Steady, lv.Warnings)
	}
	fast := sw
	fast.q0Pa = 0.5 * 1.225 * 110 * 110 // 110 m/s ≈ Mach 0.32
	e2, _ := estimate.NewEstimator(testRig(), estimate.Config{})
	for _, b := range fast.blocks(4) {
		e2.Add(b)
	}
	lv, _ = e2.Live()
	if !hasWarning(lv.Warnings, "Mach 0.3") {
		t.Errorf("fast: warnings %q", lv.Warnings)
	}
	// A stalled source: the host clock moves on with no blocks.
	now := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	e3, _ := estimate.NewEstimator(testRig(), estimate.Config{Now: func() time.Time { return now }})
	for _, b := range sw.blocks(5) {
		e3.Add(b)
	}
	now = now.Add(10 * time.Second)
	lv, _ = e3.Live()
	if lv.Steady || !hasWarning(lv.Warnings, "no new blocks for 10s") {
		t.Errorf("stalled: steady %v warnings %q", lv.Steady, lv.Warnings)
	}
}

func hasWarning(ws []string, sub string) bool {
	for _, w := range ws {
		if strings.Contains(w, sub) {
			return true
		}
	}
	return false
}

// Ensure that bad blocks never panic and give fewer results.
func TestEstimator_BadBlocks(t *testing.T) {
	e, _ := estimate.NewEstimator(testRig(), estimate.Config{})
	inf := math.Inf(1)
	bad := []*calibrate.Block{
		nil,
		{},
		{Source: "balance", DtUs: 5000},
		{Source: "balance", DtUs: 0, Series: []calibrate.Series{{Channel: "n_fore", Values: []float64{1, 2}}}},
		{Source: "balance", DtUs: -5, Series: []calibrate.Series{{Channel: "n_fore", Values: []float64{1}}}},
		{Source: "balance", T0Us: 10, DtUs: 5000, Series: []calibrate.Series{ // ragged
			{Channel: "n_fore", Values: []float64{1, 2, 3, 4}}, {Channel: "n_aft", Values: []float64{1}},
			{Channel: "pitot", Values: []float64{300, 300}, U: 1, Dof: inf}, {Channel: "alpha", Values: nil}}},
		{Source: "balance", T0Us: 5, DtUs: 5000, Series: []calibrate.Series{{Channel: "n_fore", Values: []float64{math.Inf(1), math.NaN()}}}},
		{Source: "stranger", DtUs: 1, Series: []calibrate.Series{{Channel: "nobody", Values: []float64{1}}}},
	}
	for _, b := range bad {
		if segs := e.Add(b); len(segs) != 0 {
			t.Errorf("bad block gave segments: %+v", segs)
		}
	}
	if segs := e.Flush(); len(segs) != 0 {
		t.Errorf("flush after bad blocks gave %d segments", len(segs))
	}
	// A good sweep afterwards still works.
	if segs := feed(t, e, stdSweep.blocks(6)); len(segs) != len(stdSweep.stepsDeg) {
		t.Errorf("after bad blocks: %d segments", len(segs))
	}
	lv, _ := e.Live()
	if !hasWarning(lv.Warnings, "2 blocks ignored") {
		t.Errorf("ignored blocks not reported: %q", lv.Warnings)
	}
}

// Ensure that NewEstimator names what the rig lacks.
func TestNewEstimator_Errors(t *testing.T) {
	tests := []struct {
		name  string
		edit  func(r *rig.Rig)
		wants []string
	}{
		{"no normal", func(r *rig.Rig) { r.Lift.Normal = nil }, []string{"lift.normal is empty"}},
		{"unknown channel", func(r *rig.Rig) { r.Lift.Normal = []string{"n_fore", "n_mid"} }, []string{`"n_mid"`}},
		{"no q", func(r *rig.Rig) { r.Lift.DynamicPressure = "" }, []string{"lift.dynamic_pressure", "lift.speed"}},
		{"no area", func(r *rig.Rig) { r.Reference.AreaM2 = 0 }, []string{"reference.area_m2"}},
		{"two problems", func(r *rig.Rig) { r.Lift.AngleChannel = "aoa"; r.Conditions.TempK = 0 }, []string{`"aoa"`, "air temperature"}},
		{"roof", func(r *rig.Rig) { r.Kind = rig.KindRoof }, []string{"roof"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := testRig()
			tc.edit(r)
			_, err := estimate.NewEstimator(r, estimate.Config{})
			if !errors.Is(err, estimate.ErrRig) {
				t.Fatalf("err = %v, want ErrRig", err)
			}
			for _, w := range tc.wants {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %s", err, w)
				}
			}
		})
	}
}

// Ensure that a speed channel in water works (q = ½ρV², ρ from ITTC tables).
func TestEstimator_SpeedChannelWater(t *testing.T) {
	r := testRig()
	r.Fluid = rig.FluidFreshWater
	r.Conditions = rig.Conditions{TempK: 293.15}
	r.Lift.DynamicPressure = ""
	r.Lift.Speed = "speed"
	r.Channels = append(r.Channels, rig.Channel{Name: "speed", Quantity: rig.QuantitySpeed})
	e, err := estimate.NewEstimator(r, estimate.Config{})
	if err != nil {
		t.Fatal(err)
	}
	sw := stdSweep
	sw.stepsDeg = []float64{3}
	const v = 2.0
	sw.q0Pa = 0.5 * 998.2072 * v * v
	blocks := sw.blocks(7)
	for _, b := range blocks {
		for i := range b.Series {
			if b.Series[i].Channel == "pitot" { // turn the pitot into a speed log
				b.Series[i].Channel = "speed"
				for j, q := range b.Series[i].Values {
					b.Series[i].Values[j] = math.Sqrt(2 * q / 998.2072)
				}
				b.Series[i].U = 0.002
			}
		}
	}
	segs := feed(t, e, blocks)
	if len(segs) != 1 {
		t.Fatalf("%d segments", len(segs))
	}
	s := segs[0]
	near(t, "rho", s.RhoKgPerM3, 998.2072, 5e-5) // ITTC Table 1, 20 °C
	near(t, "speed", s.SpeedMPerS.X, v, 0.01)
	want, _ := sw.truth(rig.Rad(3))
	if math.Abs(s.CL.X-want) > s.CL.U95() {
		t.Errorf("C_L %.4f ± %.4f vs %.4f", s.CL.X, s.CL.U95(), want)
	}
}

// BenchmarkEstimatorAdd measures the streaming throughput of Add on 200 Hz
// blocks of 20 samples (one 0.1 s tick each), segments included.
func BenchmarkEstimatorAdd(b *testing.B) {
	sw := stdSweep
	sw.stepS = 20
	blocks := sw.blocks(8)
	e, err := estimate.NewEstimator(testRig(), estimate.Config{})
	if err != nil {
		b.Fatal(err)
	}
	span := blocks[len(blocks)-1].T0Us + int64(sw.blockN)*blocks[0].DtUs - blocks[0].T0Us
	samples, round := 0, int64(0)
	b.ReportAllocs()
	for b.Loop() {
		for _, blk := range blocks {
			c := *blk
			c.T0Us += round * span
			e.Add(&c)
			samples += c.Len()
		}
		round++
	}
	b.ReportMetric(float64(samples)/b.Elapsed().Seconds(), "samples/s")
}

// Ensure that a segment holds only samples of a held step: the tick that
// straddles the start of the next move is left out, so the ramp does not
// leak into C_L and N_eff stays near N for white residual noise.
func TestEstimator_SegmentsStayInsideHolds(t *testing.T) {
	r := simRig()
	s, err := sim.New(r, sim.Config{QPa: 2000, Seed: 5, StepsDeg: []float64{0, 4, 8},
		Hold: 2050 * time.Millisecond, Move: 500 * time.Millisecond, TurbulenceIntensity: 0.02}, 999.1)
	if err != nil {
		t.Fatal(err)
	}
	cal, err := calibrate.NewCalibrator(r)
	if err != nil {
		t.Fatal(err)
	}
	est, err := estimate.NewEstimator(r, estimate.Config{})
	if err != nil {
		t.Fatal(err)
	}
	var segs []estimate.Segment
	for range 75 { // 75 blocks × 0.1 s = 7.5 s: three holds and moves
		b := s.Next()
		cb := cal.Apply(&b)
		segs = append(segs, est.Add(&cb)...)
	}
	if len(segs) < 2 {
		t.Fatalf("got %d segments, want at least 2", len(segs))
	}
	for _, sg := range segs {
		start := float64(sg.TStart.UnixMicro()) / 1e6
		end := float64(sg.TEnd.UnixMicro()) / 1e6
		for _, tS := range []float64{start, end} {
			if _, holding := s.AngleAt(tS); !holding {
				t.Errorf("segment %d (%.3f–%.3f s) has a sample at %.3f s while the rig moves", sg.Index, start, end, tS)
			}
		}
		if sg.NEff < 0.5*float64(sg.N) {
			t.Errorf("segment %d: N_eff %.1f of N %d: the residual is not white, a trend leaked in", sg.Index, sg.NEff, sg.N)
		}
	}
}

// simRig is an invented foil rig whose channels read counts, like the
// simulator's amplifiers.
func simRig() *rig.Rig {
	force := rig.Calibration{Poly: []float64{-12.5, 0.0025}, U: 0.1}
	return &rig.Rig{
		Name: "sim foil", Kind: rig.KindFoil, Fluid: rig.FluidFreshWater,
		Conditions: rig.Conditions{TempK: 288.15, PressurePa: 101325},
		Reference:  rig.Reference{AreaM2: 0.09, LengthM: 0.15, SpanM: 0.6},
		Sources:    []rig.Source{{Name: "carriage", Type: rig.SourceMQTT}},
		Channels: []rig.Channel{
			{Name: "n_fore", Quantity: rig.QuantityForce, ToSI: rig.Affine{Scale: 1}, CapacitySI: 500, Calibration: force},
			{Name: "n_aft", Quantity: rig.QuantityForce, ToSI: rig.Affine{Scale: 1}, CapacitySI: 500, Calibration: force},
			{Name: "pitot", Quantity: rig.QuantityPressure, ToSI: rig.Affine{Scale: 1}, CapacitySI: 5000, Calibration: rig.Calibration{Poly: []float64{0, 0.001}, U: 2}},
			{Name: "alpha", Quantity: rig.QuantityAngle, ToSI: rig.Affine{Scale: math.Pi / 180}, Calibration: rig.Calibration{Poly: []float64{0, 0.01}, U: 0.02}},
		},
		Lift: rig.Lift{Normal: []string{"n_fore", "n_aft"}, AngleChannel: "alpha", DynamicPressure: "pitot", PitotCoeff: 1},
	}
}

// Ensure that the live coefficients are withheld before the run's first
// steady window and while the flow is off, with the reason, and shown in a
// plateau; and that the temperature behind ρ is reported as the rig's fixed
// one when no channel measures it (issue 13: "cl: 369" at start, "cl: 2010"
// with the flow off).
func TestEstimator_LiveWithholdsCoefficients(t *testing.T) {
	sw := stdSweep
	sw.stepsDeg = []float64{2}
	sw.stepS = 5
	bs := sw.blocks(2)
	e, _ := estimate.NewEstimator(testRig(), estimate.Config{})
	for _, b := range bs[:3] { // 0.3 s: the window is full, no steady tick yet
		e.Add(b)
	}
	lv, ok := e.Live()
	if !ok || lv.Withheld != "waiting for the first steady window" || lv.CL != (calibrate.Value{}) || lv.CD != (calibrate.Value{}) || lv.Steady {
		t.Errorf("start: ok %v withheld %q C_L %+v steady %v", ok, lv.Withheld, lv.CL, lv.Steady)
	}
	if !(lv.QPa.X > 0) || lv.N == 0 {
		t.Errorf("start: q and N are still given: %+v", lv)
	}
	if lv.TempK != 288.15 || lv.TempMeasured {
		t.Errorf("temperature %g measured %v, want the rig's 288.15 K, not measured", lv.TempK, lv.TempMeasured)
	}
	for _, b := range bs[3:] {
		e.Add(b)
	}
	lv, _ = e.Live()
	if lv.Withheld != "" || !(lv.CL.X > 0) || !lv.Steady {
		t.Errorf("plateau: withheld %q C_L %+v steady %v", lv.Withheld, lv.CL, lv.Steady)
	}
	off := sw
	off.q0Pa = 5
	for _, b := range off.blocks(3) {
		b.T0Us += 5_000_000
		e.Add(b)
	}
	lv, _ = e.Live()
	if lv.Withheld != "flow off" || !lv.FlowOff || lv.CL != (calibrate.Value{}) {
		t.Errorf("flow off: withheld %q flow off %v C_L %+v", lv.Withheld, lv.FlowOff, lv.CL)
	}
}
