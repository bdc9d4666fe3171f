package process_test

import (
	"math"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/rig"
)

// airFoilRig is a small foil in a wind tunnel at q ≈ 74 Pa (11 m/s): an
// invented scenario of our own. pitotCapacity is the pitot's rated range.
func airFoilRig(t *testing.T, pitotCapacity string) *rig.Rig {
	t.Helper()
	text := `name = "zero-air"
kind = "foil"
fluid = "air"
[reference]
area_m2 = 0.05
length_m = 0.1
[[source]]
name = "tunnel"
type = "simulated"
rate_hz = 200
[[channel]]
name = "n_fore"
quantity = "force"
unit = "N"
capacity = "50 N"
calibration = { poly = [0, 1], u = 0.01 }
[[channel]]
name = "n_aft"
quantity = "force"
unit = "N"
capacity = "50 N"
calibration = { poly = [0, 1], u = 0.01 }
[[channel]]
name = "a_main"
quantity = "force"
unit = "N"
capacity = "10 N"
calibration = { poly = [0, 1], u = 0.005 }
[[channel]]
name = "pitot"
quantity = "pressure"
unit = "Pa"
capacity = "` + pitotCapacity + `"
calibration = { poly = [0, 1], u = 0.2 }
[[channel]]
name = "alpha"
quantity = "angle"
unit = "deg"
calibration = { poly = [0, 1], u = 0.02 }
[lift]
normal = ["n_fore", "n_aft"]
axial = ["a_main"]
angle = "alpha"
dynamic_pressure = "pitot"
`
	r, err := rig.Parse("zero-air.toml", []byte(text))
	require.NoError(t, err)
	return r
}

// record makes d of simulated blocks.
func record(s *sim.Rig, d time.Duration) acquire.Blocks {
	cfg := s.Config()
	n := int(d.Seconds() * cfg.RateHz / float64(cfg.BlockSamples))
	out := make(acquire.Blocks, n)
	for i := range out {
		out[i] = s.Next()
	}
	return out
}

// replay processes a record through a new pipeline of r.
func replay(t *testing.T, r *rig.Rig, rec acquire.Blocks) (*process.Pipeline, []estimate.Segment, []acquire.Event) {
	t.Helper()
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	p, err := process.New(r, cal, process.Options{Now: func() time.Time { return time.Unix(0, 0) }})
	require.NoError(t, err)
	var evs []acquire.Event
	segs, err := process.Replay(t.Context(), rec, p, func(_ *acquire.Block, st process.Step) error {
		evs = append(evs, st.Events...)
		return nil
	})
	require.NoError(t, err)
	return p, segs, evs
}

// zeroAirRecord is the air record of the flow-off tests: 6 s at rest with
// the load cells offset by 0.8 N (zero drift, invented), a sweep 0° → 4° →
// 8° and back, 6 s at rest.
func zeroAirRecord(t *testing.T, ramp time.Duration, seed uint64) (*sim.Rig, acquire.Blocks) {
	t.Helper()
	gen := airFoilRig(t, "1 kPa")
	s, err := sim.New(gen, sim.Config{QPa: 74, Seed: seed, StepsDeg: []float64{0, 4, 8}, Hold: 6 * time.Second,
		Move: time.Second, FlowOffBefore: 6 * time.Second, Sweeps: 1, FlowRamp: ramp, ZeroDriftNPerS: 0.01}, 0)
	require.NoError(t, err)
	d := 6*time.Second + time.Duration(s.SweepS()*float64(time.Second)) + 2*ramp + 6*time.Second
	return s, record(s, d)
}

// Ensure that the flow-off zero does not depend on the pitot's rated range
// (issue 10: the same air record at q = 74 Pa read as "the flow never came
// on" with the pitot rated 5 kPa): the same record processed with the pitot
// rated 1 kPa and 5 kPa gives the same C_L to within 0.1 U95 at every
// segment, the zero drift is corrected in both, and C_L is within U95 of the
// truth.
func TestFlowOffZero_PitotRangeDoesNotMatter(t *testing.T) {
	s, rec := zeroAirRecord(t, 2*time.Second, 41)
	var live, corrected [2][]estimate.Segment
	for k, capacity := range []string{"1 kPa", "5 kPa"} {
		r := airFoilRig(t, capacity)
		p, segs, _ := replay(t, r, rec)
		live[k] = segs
		d, err := p.Drift()
		require.NoError(t, err, capacity)
		// As the recorder does at the end of a run: replay with the drift
		// between the zeros before and after removed.
		cal, err := calibrate.NewCalibrator(r)
		require.NoError(t, err)
		pd, err := process.New(r, cal, process.Options{Drift: &d, Now: func() time.Time { return time.Unix(0, 0) }})
		require.NoError(t, err)
		corrected[k], err = process.Replay(t.Context(), rec, pd, nil)
		require.NoError(t, err)
	}
	for _, segs := range [][2][]estimate.Segment{live, corrected} {
		require.Len(t, segs[1], len(segs[0]))
		require.GreaterOrEqual(t, len(segs[0]), 4, "one segment per hold (0°, 4°, 8°, 4°)")
		for i := range segs[0] {
			a, b := segs[0][i].CL, segs[1][i].CL
			assert.LessOrEqual(t, math.Abs(a.X-b.X), 0.1*a.U95(), "segment %d: C_L %.5f (1 kPa) vs %.5f (5 kPa), U95 %.4f", i, a.X, b.X, a.U95())
		}
	}
	for i, seg := range corrected[0] {
		clTrue, _ := s.Foil().Truth(seg.AlphaRad.X)
		assert.LessOrEqual(t, math.Abs(seg.CL.X-clTrue), seg.CL.U95(), "segment %d at %.1f°: C_L %.4f ± %.4f vs truth %.4f",
			i, rig.Deg(seg.AlphaRad.X), seg.CL.X, seg.CL.U95(), clTrue)
	}
}

// Ensure that the rest stretches exclude the ramps (issue 10: an 8 s ramp
// gave a pitot zero of 11.8 Pa and a spurious zero drift): with 8 s ramps
// on and off, the pitot zeros before and after the run are within their
// noise of the truth (0 Pa): within 4 standard errors of a mean of the
// stretch, from the pitot's noise (the simulator's 2e-4 of its 1 kPa
// range per sample), and the load cells' zero drift is the true one.
func TestFlowOffZero_RampsExcluded(t *testing.T) {
	s, rec := zeroAirRecord(t, 8*time.Second, 7)
	p, _, _ := replay(t, airFoilRig(t, "1 kPa"), rec)
	d, err := p.Drift()
	require.NoError(t, err)
	sigma := 2e-4 * 1000 // Pa per sample
	for _, z := range []calibrate.Zero{d.Start, d.End} {
		se := sigma / math.Sqrt(float64(z.N))
		assert.LessOrEqual(t, math.Abs(z.Values["pitot"]), 4*se, "pitot zero %.4f Pa, its noise %.4f Pa (N = %d)", z.Values["pitot"], se, z.N)
	}
	// Each cell's zero drifts 0.01 N/s (invented); the two zeros are
	// d.End.T − d.Start.T apart. Tolerance: 4 standard errors of the
	// difference of two means (cell noise 2e-4 × 50 N per sample).
	dt := d.End.T.Sub(d.Start.T).Seconds()
	require.Greater(t, dt, 20.0)
	seN := 2e-4 * 50 * math.Sqrt(1/float64(d.Start.N)+1/float64(d.End.N))
	for _, l := range d.Report() {
		want := 0.01 * dt
		if l.Channel == "pitot" {
			want = 0
		}
		assert.InDelta(t, want, l.ChangeSI, 4*math.Max(seN, 2e-4*1000/math.Sqrt(float64(d.End.N))), "%s drift", l.Channel)
	}
	// The rest stretches, one per angle, are there for a tare: the record
	// starts and ends at 0°.
	rests := p.Rests()
	require.Len(t, rests, 2)
	assert.False(t, rests[0].After)
	assert.True(t, rests[1].After)
	for _, r := range rests {
		assert.InDelta(t, 0, r.AlphaRad, 1e-3)
		assert.GreaterOrEqual(t, r.End.Sub(r.Start), calibrate.ZeroMin)
	}
	_ = s
}

// Ensure that a run with no proper rest says so: a record that starts with
// the flow on gets no zero (not one taken from the flow), an event in the
// run's log and a reason from Drift; a flow-off angle sweep before the run
// gives one rest stretch per angle.
func TestFlowOffZero_NoRestSaid(t *testing.T) {
	gen := airFoilRig(t, "1 kPa")
	s, err := sim.New(gen, sim.Config{QPa: 74, Seed: 3, StepsDeg: []float64{0, 4}, Hold: 4 * time.Second,
		Move: time.Second, Sweeps: 1}, 0)
	require.NoError(t, err)
	rec := record(s, time.Duration(s.SweepS()*float64(time.Second))+4*time.Second)
	p, _, evs := replay(t, gen, rec)
	_, err = p.Drift()
	require.Error(t, err)
	assert.Contains(t, err.Error(), "no proper flow-off rest before the run")
	require.NotEmpty(t, evs)
	found := false
	for _, ev := range evs {
		if ev.Kind == process.EventFlowOffZero && strings.Contains(ev.Message, "no proper flow-off rest before the run") {
			found = true
		}
	}
	assert.True(t, found, "an event says there was no rest: %+v", evs)

	// A flow-off sweep 0°, 4°, 8° of 3 s each before the flow comes on.
	// QPa 1e-9: the flow off, only the sensors' noise.
	tare, err := sim.New(gen, sim.Config{QPa: 1e-9, Seed: 5, StepsDeg: []float64{0, 4, 8}, Hold: 3 * time.Second,
		Move: 500 * time.Millisecond, Sweeps: 1}, 0)
	require.NoError(t, err)
	sweep := record(tare, 10500*time.Millisecond)
	_, run := zeroAirRecord(t, time.Second, 9)
	shift := sweep[len(sweep)-1].T0Us + 100_000
	for _, b := range run {
		b.T0Us += shift
		sweep = append(sweep, b)
	}
	p, _, _ = replay(t, gen, sweep)
	rests := p.Rests()
	var before []float64
	for _, r := range rests {
		if !r.After {
			before = append(before, rig.Deg(r.AlphaRad))
		}
	}
	require.GreaterOrEqual(t, len(before), 3, "rests before the run: %v", before)
	assert.InDelta(t, 0, before[0], 0.05)
	assert.InDelta(t, 4, before[1], 0.05)
	assert.InDelta(t, 8, before[2], 0.05)
}

// Ensure that a span error is covered when it is declared (issue 10: a 1 %
// span error on the normal cells was covered 56 % of the time): with the
// normal cells reading 1 % high and span_u_pct = 1 on their calibrations,
// C_L ± U95 covers the true C_L at ≥ 90 % of the segments over 16 seeds;
// undeclared, the same records are covered less often (so the test can
// tell).
func TestSpanUncertainty_Covered(t *testing.T) {
	const seeds = 16
	covered := map[bool]int{}
	total := 0
	for seed := range uint64(seeds) {
		gen := airFoilRig(t, "1 kPa")
		s, err := sim.New(gen, sim.Config{QPa: 74, Seed: 100 + seed, StepsDeg: []float64{0, 4, 8}, Hold: 3 * time.Second,
			Move: 500 * time.Millisecond, FlowOffBefore: 2 * time.Second, Sweeps: 1, NormalSpanFrac: 0.01,
			// A quiet tunnel, so that the span error is not hidden in the scatter.
			TurbulenceIntensity: 0.002, NoiseFrac: 2e-5}, 0)
		require.NoError(t, err)
		rec := record(s, 2*time.Second+time.Duration(s.SweepS()*float64(time.Second))+2*time.Second)
		for _, declared := range []bool{true, false} {
			r := airFoilRig(t, "1 kPa")
			for i := range r.Channels { // well-calibrated cells and pitot, so the span term counts
				r.Channels[i].Calibration.U /= 10
			}
			if declared {
				for i := range r.Channels {
					if r.Channels[i].Name == "n_fore" || r.Channels[i].Name == "n_aft" {
						r.Channels[i].Calibration.SpanURel = 0.01
					}
				}
			}
			_, segs, _ := replay(t, r, rec)
			for _, seg := range segs {
				clTrue, _ := s.Foil().Truth(seg.AlphaRad.X)
				if math.Abs(clTrue) < 0.05 {
					continue // near zero lift a span error is nothing
				}
				if declared {
					total++
				}
				if math.Abs(seg.CL.X-clTrue) <= seg.CL.U95() {
					covered[declared]++
				}
				if declared {
					var span bool
					for _, c := range seg.CLBudget {
						span = span || c.Input == "normal force span"
					}
					assert.True(t, span, "the budget shows the span line")
				}
			}
		}
	}
	require.Greater(t, total, 2*seeds)
	frac := float64(covered[true]) / float64(total)
	t.Logf("span 1 %%: covered %d of %d declared (%.2f), %d undeclared", covered[true], total, frac, covered[false])
	assert.GreaterOrEqual(t, frac, 0.90)
	assert.Less(t, covered[false], covered[true], "undeclared, the span error is covered less often")
}

// Ensure that the angle's uncertainty is stated once (issue 10: the angle
// channel's u and angle_u_deg were added in quadrature): with both, the
// angle's u is angle_u_deg alone (docs/physics.md "Type B inputs"); without
// angle_u_deg it is the channel's calibration u.
func TestAngleU_StatedOnce(t *testing.T) {
	gen := airFoilRig(t, "1 kPa")
	s, err := sim.New(gen, sim.Config{QPa: 74, Seed: 2, StepsDeg: []float64{4}, Hold: 4 * time.Second,
		FlowOffBefore: 2 * time.Second, TurbulenceIntensity: 0.002}, 0)
	require.NoError(t, err)
	rec := record(s, 6*time.Second)
	angleU := func(uDeg float64) float64 {
		r := airFoilRig(t, "1 kPa") // the channel states u = 0.02°
		r.Lift.AngleURad = rig.Rad(uDeg)
		_, segs, _ := replay(t, r, rec)
		require.NotEmpty(t, segs)
		for _, c := range segs[0].CLBudget {
			if c.Input == "angle of attack" {
				return rig.Deg(c.U)
			}
		}
		t.Fatal("no angle line in the budget")
		return 0
	}
	assert.InDelta(t, 0.05, angleU(0.05), 1e-12, "angle_u_deg wins")
	assert.InDelta(t, 0.02, angleU(0), 1e-12, "the channel's u stands alone")
}
