package process_test

import (
	"fmt"
	"math"
	"math/rand/v2"
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

// corrRig is an invented wind-tunnel foil on a three-cell balance whose
// channels are calibrated one by one in N (identity polynomials): the
// cross-talk between the cells and the model's weight are left to the
// corrections under test.
const corrRig = `name = "corr-foil"
kind = "foil"
fluid = "air"

[reference]
area_m2 = 0.12
length_m = 0.2
span_m = 0.6

[[source]]
name = "sim"
type = "simulated"

[[channel]]
name = "n_fore"
quantity = "force"
unit = "N"
capacity = "200 N"
calibration = { poly = [0.0, 1.0], u = 0.02 }

[[channel]]
name = "n_aft"
quantity = "force"
unit = "N"
capacity = "200 N"
calibration = { poly = [0.0, 1.0], u = 0.02 }

[[channel]]
name = "axial"
quantity = "force"
unit = "N"
capacity = "200 N"
calibration = { poly = [0.0, 1.0], u = 0.02 }

[[channel]]
name = "pitot"
quantity = "pressure"
unit = "Pa"
capacity = "1 kPa"
calibration = { poly = [0.0, 1.0], u = 0.5 }

[[channel]]
name = "alpha"
quantity = "angle"
unit = "deg"
calibration = { poly = [0.0, 1.0], u = 0.02 }

[lift]
normal = ["n_fore", "n_aft"]
axial = ["axial"]
angle = "alpha"
angle_u_deg = 0.02
dynamic_pressure = "pitot"
`

// The simulated balance (invented): cross-talk X between the cells
// (outputs o = X·f) and the weight tare of each cell against the angle.
var (
	corrX = [][]float64{
		{1.04, 0.03, 0.10},
		{0.02, 0.97, -0.06},
		{0.05, 0.04, 1.02},
	}
	corrTare = map[string][3]float64{
		"n_fore": {2, 6, -9},
		"n_aft":  {1, 4, -7},
		"axial":  {0.5, -8, 1},
	}
	corrCells = []string{"n_fore", "n_aft", "axial"}
)

func corrSim(t *testing.T, r *rig.Rig, cfg sim.Config) *sim.Rig {
	t.Helper()
	cfg.WeightTare, cfg.Interaction = corrTare, corrX
	s, err := sim.New(r, cfg, 0)
	require.NoError(t, err)
	return s
}

// fitTareSweep records a flow-off angle sweep on the simulator and fits the
// weight tare of each cell to the mean calibrated reading of each hold, as
// a test engineer does before the run (calibrate.FitTare).
func fitTareSweep(t *testing.T, r *rig.Rig) calibrate.Tare {
	t.Helper()
	steps := []float64{-8, -6, -4, -2, 0, 2, 4, 6, 8, 10, 12, 14}
	s := corrSim(t, r, sim.Config{QPa: 1, FlowOff: true, StepsDeg: steps, Hold: 2 * time.Second, Move: 500 * time.Millisecond, Seed: 11})
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	sum := map[string][]float64{}
	cnt := make([]int, len(steps))
	alphaSum := make([]float64, len(steps))
	for _, c := range corrCells {
		sum[c] = make([]float64, len(steps))
	}
	period := (s.Config().Hold + s.Config().Move).Seconds()
	dt := 1 / s.Config().RateHz
	for tS := 0.0; tS < float64(len(steps))*period; {
		cb := cal.Apply(new(s.Next()))
		for i := range cb.Len() {
			k := int(tS / period)
			_, holding := s.AngleAt(tS)
			if holding && tS-float64(k)*period > 0.3 && k < len(steps) {
				cnt[k]++
				alphaSum[k] += cb.Find("alpha").Values[i]
				for _, c := range corrCells {
					sum[c][k] += cb.Find(c).Values[i]
				}
			}
			tS += dt
		}
	}
	alphas := make([]float64, len(steps))
	for k := range steps {
		require.Positive(t, cnt[k])
		alphas[k] = alphaSum[k] / float64(cnt[k])
		for _, c := range corrCells {
			sum[c][k] /= float64(cnt[k])
		}
	}
	tare, err := calibrate.FitTare(alphas, sum)
	require.NoError(t, err)
	return tare
}

// fitBalanceLoads loads the simulated balance with combined known loads on
// the bench (outputs X·f plus 0.01 N of reading noise) and fits its
// interaction matrix (calibrate.FitBalance), which should come out as X⁻¹.
func fitBalanceLoads(t *testing.T) calibrate.Balance {
	t.Helper()
	rng := rand.New(rand.NewPCG(5, 5))
	var loads []calibrate.BalanceLoad
	for range 24 {
		f := []float64{rng.Float64()*120 - 40, rng.Float64()*120 - 40, rng.Float64()*30 - 10}
		o := make([]float64, 3)
		for i := range o {
			for j := range f {
				o[i] += corrX[i][j] * f[j]
			}
			o[i] += 0.01 * rng.NormFloat64()
		}
		loads = append(loads, calibrate.BalanceLoad{Applied: f, Outputs: o})
	}
	b, err := calibrate.FitBalance(loads, false)
	require.NoError(t, err)
	return b
}

// rigSections writes the [[tare]] and [balance] sections for the fitted
// tare and matrix, as a test engineer copies them into the rig file.
func rigSections(tare calibrate.Tare, bal calibrate.Balance) string {
	var b strings.Builder
	for _, c := range corrCells {
		f := tare.Channels[c]
		fmt.Fprintf(&b, "\n[[tare]]\nchannel = %q\ncoef = [%v, %v, %v]\nu = %v\n", c, f.Coef[0], f.Coef[1], f.Coef[2], f.ResidualSD)
	}
	rows := make([]string, len(bal.C))
	for k, row := range bal.C {
		rows[k] = fmt.Sprintf("[%v, %v, %v]", row[0], row[1], row[2])
	}
	fmt.Fprintf(&b, "\n[balance]\noutputs = [\"n_fore\", \"n_aft\", \"axial\"]\nmatrix = [%s]\nu = [%v, %v, %v]\n",
		strings.Join(rows, ", "), bal.ResidualSD[0], bal.ResidualSD[1], bal.ResidualSD[2])
	return b.String()
}

// runSweep records one flow-on sweep of the simulated foil (flow off for
// 3 s before and after, for the flow-off zero) and replays it through the
// pipeline of r.
func runSweep(t *testing.T, r *rig.Rig, record []acquire.Block) []estimate.Segment {
	t.Helper()
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	p, err := process.New(r, cal, process.Options{Now: func() time.Time { return time.Unix(0, 0) }})
	require.NoError(t, err)
	segs, err := process.Replay(t.Context(), acquire.Blocks(record), p, nil)
	require.NoError(t, err)
	return segs
}

func sweepRecord(t *testing.T, r *rig.Rig, seed uint64) ([]acquire.Block, sim.Foil) {
	t.Helper()
	s := corrSim(t, r, sim.Config{QPa: 400, StepsDeg: []float64{-4, -2, 0, 2, 4, 6, 8, 10}, Hold: 3 * time.Second,
		FlowOffBefore: 3 * time.Second, Sweeps: 1, Seed: seed})
	n := int((3 + s.SweepS() + 3) * s.Config().RateHz / float64(s.Config().BlockSamples))
	var out []acquire.Block
	for range n {
		out = append(out, s.Next())
	}
	return out, s.Foil()
}

// Ensure that the weight tare against the angle and the balance interaction
// matrix, fitted from a flow-off sweep and bench loads and named in the rig
// file, give back the simulator's true C_L within U95, while the same
// record without them is off (docs/physics.md "Corrections").
func TestCorrections_TareAndMatrixReproduceTruth(t *testing.T) {
	plain, err := rig.Parse("corr.toml", []byte(corrRig))
	require.NoError(t, err)
	tare := fitTareSweep(t, plain)
	bal := fitBalanceLoads(t)
	corrected, err := rig.Parse("corr.toml", []byte(corrRig+rigSections(tare, bal)))
	require.NoError(t, err)
	require.Len(t, corrected.Tare, 3)
	require.NotNil(t, corrected.Balance)

	inside, offWithout, total := 0, 0, 0
	var with []estimate.Segment
	for _, seed := range []uint64{21, 22, 23, 24, 25} {
		record, foil := sweepRecord(t, plain, seed)
		with = runSweep(t, corrected, record)
		without := runSweep(t, plain, record)
		require.GreaterOrEqual(t, len(with), 14, "one segment per hold, up and down")
		require.Len(t, without, len(with))
		for i, s := range with {
			truth, _ := foil.Truth(s.AlphaRad.X)
			if math.Abs(s.CL.X-truth) <= s.CL.U95() {
				inside++
			}
			if math.Abs(without[i].CL.X-truth) > without[i].CL.U95() {
				offWithout++
			}
			total++
			if seed == 21 {
				t.Logf("α %5.1f°  truth %.4f  corrected %.4f ± %.4f  uncorrected %.4f ± %.4f",
					rig.Deg(s.AlphaRad.X), truth, s.CL.X, s.CL.U95(), without[i].CL.X, without[i].CL.U95())
			}
		}
	}
	t.Logf("corrected C_L within U95 of the truth at %d of %d segments; uncorrected off at %d", inside, total, offWithout)
	assert.GreaterOrEqual(t, float64(inside), 0.9*float64(total), "corrected C_L within U95 of the truth at ≥ 90 %% of segments")
	assert.GreaterOrEqual(t, float64(offWithout), 0.75*float64(total), "without the corrections C_L is off by more than U95")

	// The budget shows each correction on its own line.
	names := map[string]bool{}
	for _, c := range with[0].CLBudget {
		names[c.Input] = true
	}
	for _, want := range []string{"weight tare (normal force)", "weight tare (axial force)",
		"balance interaction matrix (normal force)", "balance interaction matrix (axial force)"} {
		assert.True(t, names[want], "budget line %q", want)
	}
}

// Ensure that corrections that change nothing (an identity matrix and a
// zero tare) give exactly the segments of the rig without them: the
// corrections are a pure addition to old rig files.
func TestCorrections_IdentityChangesNothing(t *testing.T) {
	plain, err := rig.Parse("corr.toml", []byte(corrRig))
	require.NoError(t, err)
	ident, err := rig.Parse("corr.toml", []byte(corrRig+`
[[tare]]
channel = "n_fore"
coef = [0, 0, 0]
u = 0

[balance]
outputs = ["n_fore", "n_aft", "axial"]
matrix = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]
u = [0, 0, 0]
`))
	require.NoError(t, err)
	record, _ := sweepRecord(t, plain, 3)
	a := runSweep(t, plain, record)
	b := runSweep(t, ident, record)
	require.NotEmpty(t, a)
	require.Len(t, b, len(a))
	for i := range a {
		assert.Equal(t, a[i].CL, b[i].CL, "segment %d C_L", i)
		assert.Equal(t, a[i].CD, b[i].CD, "segment %d C_D", i)
		assert.Equal(t, a[i].CLBudget, b[i].CLBudget, "segment %d budget", i)
	}
}

// Ensure that [blockage] in the rig file reaches every segment: C_L is the
// uncorrected C_L divided by (1 + ε)², ε from the volume and the segment's
// own uncorrected C_D (docs/physics.md "Corrections").
func TestCorrections_BlockageFromRigFile(t *testing.T) {
	plain, err := rig.Parse("corr.toml", []byte(corrRig))
	require.NoError(t, err)
	blocked, err := rig.Parse("corr.toml", []byte(corrRig+"\n[blockage]\nsection_area_m2 = 1.2\nmodel_volume_m3 = 0.003\n"))
	require.NoError(t, err)
	record, _ := sweepRecord(t, plain, 4)
	a := runSweep(t, plain, record)
	b := runSweep(t, blocked, record)
	require.NotEmpty(t, a)
	require.Len(t, b, len(a))
	epsSolid := 0.90 * 0.003 / math.Pow(1.2, 1.5)
	for i := range a {
		eps := epsSolid + 0.12/(4*1.2)*a[i].CD.X
		assert.InDelta(t, a[i].CL.X/((1+eps)*(1+eps)), b[i].CL.X, 1e-12, "segment %d", i)
		assert.Greater(t, b[i].CL.U, a[i].CL.U/((1+eps)*(1+eps)), "segment %d: the blockage line adds to u(C_L)", i)
	}
}
