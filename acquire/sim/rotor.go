package sim

import (
	"errors"
	"math"

	"liftyard/rig"
)

// Rotor is the simulator's true spinning body: a rotating cylinder's lift
// and drag coefficients against the spin ratio S = ωR/V, on the projected
// area (span × diameter). Invented numbers for a scenario of our own: they
// describe no measured cylinder. The lift saturates as a finite cylinder's
// does (tip losses), below the inviscid bounds C_L ≤ 2πS (potential flow
// with circulation) and C_L ≤ 4π (Prandtl's limit), docs/references.md §10.
type Rotor struct {
	CLMax     float64 // lift coefficient the curve saturates at (default 9; below 4π)
	SpinScale float64 // spin ratio of the saturation: C_L = CLMax·tanh(S/SpinScale) (default 4, so dC_L/dS = 2.25 at S = 0)
	CD0       float64 // drag coefficient at rest (default 0.9)
	CDSpin    float64 // drag rise with spin: C_D = CD0 + CDSpin·S² (default 0.12)
}

func (r *Rotor) defaults() {
	if r.CLMax == 0 {
		r.CLMax = 9
	}
	if r.SpinScale == 0 {
		r.SpinScale = 4
	}
	if r.CD0 == 0 {
		r.CD0 = 0.9
	}
	if r.CDSpin == 0 {
		r.CDSpin = 0.12
	}
}

// Truth returns the rotor's true C_L and C_D at spin ratio S:
//
//	C_L = CLMax·tanh(S/SpinScale),  C_D = CD0 + CDSpin·S²
//
// C_L is odd in S (a reversed spin reverses the lift).
func (r Rotor) Truth(spinRatio float64) (cl, cd float64) {
	r.defaults()
	return r.CLMax * math.Tanh(spinRatio/r.SpinScale), r.CD0 + r.CDSpin*spinRatio*spinRatio
}

// DefaultSpinSteps are the spin ratios a simulated rotor steps through
// (0 … 3 by 0.5: seven steps) when Config.SpinSteps is empty.
var DefaultSpinSteps = []float64{0, 0.5, 1, 1.5, 2, 2.5, 3}

// rotorSetup prepares the rotor mode of New for a rotor rig: the spin
// (tachometer) channel, the radius and the mean speed that sets ω for each
// step's spin ratio.
func (s *Rig) rotorSetup(r *rig.Rig, rhoKgPerM3 float64) error {
	if r.Lift.Spin == "" {
		return errors.New("sim: a rotor rig needs [lift] spin, the tachometer channel")
	}
	if !(r.Reference.RadiusM > 0) {
		return errors.New("sim: a rotor rig needs [reference] radius_m")
	}
	if !(rhoKgPerM3 > 0) {
		return errors.New("sim: a rotor needs the fluid density to set its spin from the spin ratio")
	}
	c, err := newChanInv(r, r.Lift.Spin)
	if err != nil {
		return err
	}
	s.spin = c
	s.channels = append(s.channels, r.Lift.Spin)
	s.radiusM = r.Reference.RadiusM
	s.speedMeanMPerS = math.Sqrt(2 * s.cfg.QPa / rhoKgPerM3)
	s.fixedAlphaRad = r.Lift.AngleRad
	s.cfg.Rotor.defaults()
	if len(s.cfg.SpinSteps) == 0 {
		s.cfg.SpinSteps = append([]float64(nil), DefaultSpinSteps...)
	}
	return nil
}

// Rotor returns the true rotor model (meaningful for a rotor rig).
func (s *Rig) Rotor() Rotor { return s.cfg.Rotor }

// SpinAt returns the commanded spin ratio at time t (seconds since the
// sweep started) and whether the rotor is holding a step. The spin ratio
// is set on the mean flow speed: the motor holds ω = S·V̄/R, so gusts move
// the instantaneous spin ratio and not the spin.
func (s *Rig) SpinAt(tS float64) (spinRatio float64, holding bool) {
	return stepAt(s.cfg.SpinSteps, s.cfg.Hold.Seconds(), s.cfg.Move.Seconds(), tS)
}

// rotorSample returns the true normal and axial forces, N, and the spin,
// rad/s, of a rotor at sweep time tS in a flow of dynamic pressure qPa.
func (s *Rig) rotorSample(tS, qPa float64) (normalN, axialN, omegaRadPerS, alphaRad float64) {
	set, _ := s.SpinAt(tS)
	omegaRadPerS = set * s.speedMeanMPerS / s.radiusM
	if qPa <= 0 {
		return 0, 0, omegaRadPerS, s.fixedAlphaRad
	}
	// Quasi-steady: the coefficients follow the instantaneous spin ratio.
	v := s.speedMeanMPerS * math.Sqrt(qPa/s.cfg.QPa)
	cl, cd := s.cfg.Rotor.Truth(omegaRadPerS * s.radiusM / v)
	lift, drag := cl*qPa*s.areaM2, cd*qPa*s.areaM2
	a := s.fixedAlphaRad
	return lift*math.Cos(a) + drag*math.Sin(a), drag*math.Cos(a) - lift*math.Sin(a), omegaRadPerS, a
}
