package estimate_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// sweepRun describes a synthetic record of repeated up-and-down angle
// sweeps (a scenario of our own): a foil with lift slope SlopePerRad and
// zero-lift angle Alpha0Deg up to StallDeg, above which C_L falls; on
// falling angle the flow stays separated down to ReattachDeg, with C_L
// lower by DownLoss there.
type sweepRun struct {
	SlopePerRad, Alpha0Deg, StallDeg float64
	ReattachDeg, DownLoss            float64
	StepsDeg                         []float64
	Sweeps                           int     // monotone runs: up, down, up, …
	UScatter                         float64 // Type A u of each C_L
	UAlphaScatterDeg                 float64 // Type A u of each segment's mean α
	UAngleDeg                        float64 // angle calibration u, common to the run
	UAreaRel                         float64 // reference area u (relative), common to the run
	Noise                            float64 // multiplies the drawn noise (0: exact points)
}

func (c sweepRun) truth(aRad float64, up bool) float64 {
	s := rig.Rad(c.StallDeg)
	cl := c.SlopePerRad * (aRad - rig.Rad(c.Alpha0Deg))
	if aRad > s {
		cl = c.SlopePerRad*(s-rig.Rad(c.Alpha0Deg)) - 2.5*c.SlopePerRad*(aRad-s)
	}
	if !up && aRad > rig.Rad(c.ReattachDeg) {
		cl -= c.DownLoss
	}
	return cl
}

// segments draws the record: one common angle error and one common area
// error for the run, Type A noise per segment; each segment carries the C_L
// budget Reduce gives (Type A, angle of attack at fixed loads, reference
// area).
func (c sweepRun) segments(r *rand.Rand) []estimate.Segment {
	norm := func() float64 {
		if c.Noise == 0 || r == nil {
			return 0
		}
		return c.Noise * r.NormFloat64()
	}
	dAlpha := rig.Rad(c.UAngleDeg) * norm()
	areaErr := c.UAreaRel * norm()
	var segs []estimate.Segment
	for sw := range c.Sweeps {
		for k := range c.StepsDeg {
			up := sw%2 == 0
			ad := c.StepsDeg[k]
			if !up {
				ad = c.StepsDeg[len(c.StepsDeg)-1-k]
			}
			if k == 0 && sw > 0 {
				up = !up // the turn: the first step of a sweep repeats the last of the one before
			}
			aTrue := rig.Rad(ad)
			cl := c.truth(aTrue, up)
			cd := 0.01 + 0.05*cl*cl
			// The balance reads the loads at the true angle; the angle
			// error turns them with the wrong angle: ∂C_L/∂α = −C_D at
			// fixed loads. The area error scales every C_L alike.
			clMeas := (cl-cd*dAlpha)/(1+areaErr) + c.UScatter*norm()
			uAng := rig.Rad(c.UAngleDeg)
			budget := []estimate.Contribution{
				{Input: "C_L scatter (loads and q together) (type A)", U: c.UScatter, Sensitivity: 1, UY: c.UScatter, Dof: math.Inf(1), TypeA: true},
				{Input: "angle of attack", U: uAng, Sensitivity: -cd, UY: cd * uAng, Dof: math.Inf(1)},
				{Input: "reference area", U: c.UAreaRel, Sensitivity: -clMeas, UY: math.Abs(clMeas) * c.UAreaRel, Dof: math.Inf(1)},
			}
			segs = append(segs, estimate.Segment{
				Index:    len(segs),
				AlphaRad: calibrate.Value{X: aTrue + rig.Rad(c.UAlphaScatterDeg)*norm() + dAlpha, U: math.Hypot(rig.Rad(c.UAlphaScatterDeg), uAng), Dof: math.Inf(1)},
				CL:       estimate.Combine(budget),
				CD:       calibrate.Value{X: cd, U: 0.001, Dof: math.Inf(1)},
				CLBudget: budget,
			})
			segs[len(segs)-1].CL.X = clMeas
		}
	}
	return segs
}

// fiveSweeps is the record of issue 10: −4°…14° five times, 50 segments.
var fiveSweeps = sweepRun{
	SlopePerRad: 5.0, Alpha0Deg: -1.5, StallDeg: 11, ReattachDeg: 10.5, DownLoss: 0.15,
	StepsDeg: []float64{-4, -2, 0, 2, 4, 6, 8, 10, 12, 14}, Sweeps: 5,
	UScatter: 0.004, UAlphaScatterDeg: 0.02, UAngleDeg: 0.1, UAreaRel: 0.01, Noise: 1,
}

// Ensure that five repeated sweeps with C_L exactly linear give back the
// line exactly (issue 10: the fit printed "lift slope −22.99 ± 3057 /rad,
// linear −0.0° to 0.0°"), with the repeats grouped into set-points and
// counted, and χ² zero.
func TestFitPolar_RepeatedSweepsExact(t *testing.T) {
	c := fiveSweeps
	c.Noise = 0
	p, err := estimate.FitPolar(c.segments(nil), estimate.PolarOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if p.Points != 50 || p.Angles != 10 || p.Sweeps != 5 {
		t.Errorf("points %d, angles %d, sweeps %d; want 50, 10, 5", p.Points, p.Angles, p.Sweeps)
	}
	if math.Abs(p.SlopePerRad.X-5) > 1e-9 || math.Abs(rig.Deg(p.AlphaZeroRad.X)+1.5) > 1e-9 {
		t.Errorf("slope %.12g /rad, α_L0 %.12g°; want 5 and −1.5", p.SlopePerRad.X, rig.Deg(p.AlphaZeroRad.X))
	}
	if rig.Deg(p.LinearMinRad) != -4 || math.Abs(rig.Deg(p.LinearMaxRad)-10) > 1e-9 {
		t.Errorf("linear %.2f° to %.2f°, want −4° to 10°", rig.Deg(p.LinearMinRad), rig.Deg(p.LinearMaxRad))
	}
	if len(p.Linear) != 40 {
		t.Errorf("linear range holds %d segments, want 40 (8 angles × 5 sweeps)", len(p.Linear))
	}
	if p.ChiSq > 1e-12 || p.Scaled {
		t.Errorf("χ² = %g, scaled %v; want 0", p.ChiSq, p.Scaled)
	}
	if !p.Stalled || math.Abs(rig.Deg(p.StallRad)-10) > 1e-9 {
		t.Errorf("stalled %v at %.2f°, want the stall found with C_L,max at 10°", p.Stalled, rig.Deg(p.StallRad))
	}
	// The down sweeps lose 0.15 at 12° (14° is only met at the turn).
	h, ok := p.MaxHysteresis()
	if !ok || !h.Significant() || math.Abs(h.CLDiff.X-0.15) > 1e-9 {
		t.Errorf("hysteresis %+v (ok %v), want up − down = 0.15", h, ok)
	}
}

// Ensure the must-show of issue 10 for five repeated sweeps with noise, a
// common angle error and a common area error: over many seeded records the
// lift slope lies within its U95 of the truth 90–99 % of the time (and so
// does α_L0, which carries the common angle error), C_L,max's U95 is at
// least that of its own segment, and χ² tests the scatter about the line:
// its mean over the records is near ν, and tripled scatter makes it fire.
func TestFitPolar_RepeatedSweepsCoverage(t *testing.T) {
	const runs = 300
	var covS, covA, fired int
	var sumChi2, sumNu float64
	for seed := range uint64(runs) {
		r := rand.New(rand.NewPCG(seed, 1010))
		segs := fiveSweeps.segments(r)
		p, err := estimate.FitPolar(segs, estimate.PolarOptions{})
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		if math.Abs(p.SlopePerRad.X-5) <= p.SlopePerRad.U95() {
			covS++
		}
		if math.Abs(p.AlphaZeroRad.X-rig.Rad(-1.5)) <= p.AlphaZeroRad.U95() {
			covA++
		}
		sumChi2 += p.ChiSq
		sumNu += float64(p.FitDof)
		var own calibrate.Value
		for _, s := range segs {
			if s.CL.X == p.CLMax.X && s.AlphaRad.X == p.AlphaCLMaxRad {
				own = s.CL
			}
		}
		if !(own.U > 0) || p.CLMax.U95() < own.U95() {
			t.Fatalf("seed %d: C_L,max %.4f ± %.4f, its own segment %.4f ± %.4f", seed, p.CLMax.X, p.CLMax.U95(), own.X, own.U95())
		}
		// Scatter three times the stated Type A u: χ² must see it.
		noisy := fiveSweeps
		noisy.UScatter *= 3
		segs = noisy.segments(r)
		for i := range segs {
			segs[i].CLBudget[0].U, segs[i].CLBudget[0].UY = fiveSweeps.UScatter, fiveSweeps.UScatter
		}
		if pn, err := estimate.FitPolar(segs, estimate.PolarOptions{}); err == nil && pn.Scaled {
			fired++
		}
	}
	fs, fa := float64(covS)/runs, float64(covA)/runs
	t.Logf("five sweeps: slope coverage %.3f, α_L0 coverage %.3f, mean χ²/ν %.2f, χ² fired on tripled scatter in %d of %d", fs, fa, sumChi2/sumNu, fired, runs)
	if fs < 0.90 || fs > 0.99 {
		t.Errorf("slope coverage %.3f outside 0.90–0.99", fs)
	}
	if fa < 0.90 || fa > 0.99 {
		t.Errorf("α_L0 coverage %.3f outside 0.90–0.99", fa)
	}
	if m := sumChi2 / sumNu; m < 0.85 || m > 1.15 {
		t.Errorf("mean χ²/ν = %.2f, want about 1 (χ² against the Type A u)", m)
	}
	if fired < runs*9/10 {
		t.Errorf("χ² fired on tripled scatter in %d of %d records, want ≥ 90 %%", fired, runs)
	}
}

// Ensure that degenerate records are refused with a plain reason wrapping
// ErrPolar: repeats of too few angles, and no spread in α.
func TestFitPolar_Degenerate(t *testing.T) {
	c := fiveSweeps
	c.Noise = 0
	c.StepsDeg = []float64{2, 4}
	_, err := estimate.FitPolar(c.segments(nil), estimate.PolarOptions{})
	if !errors.Is(err, estimate.ErrPolar) || !strings.Contains(err.Error(), "only 2 distinct angles") {
		t.Errorf("two angles swept five times: err = %v", err)
	}
	c.StepsDeg = []float64{3}
	_, err = estimate.FitPolar(c.segments(nil), estimate.PolarOptions{})
	if !errors.Is(err, estimate.ErrPolar) || !strings.Contains(err.Error(), "same angle") {
		t.Errorf("one angle: err = %v", err)
	}
}
