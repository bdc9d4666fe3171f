package process

import (
	"math"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// corrections applies the rig file's weight tare against the angle and the
// balance interaction matrix to calibrated blocks (docs/physics.md
// "Corrections"). The pipeline order is: calibrate → tare(α) → balance
// matrix → flow-off zero / drift → stage.
//
// The tare comes first because its flow-off sweep holds the zero of its
// time (its constant a): after it the outputs are zero-corrected as of the
// sweep, which is what the matrix wants (calibrate.Balance), and a
// flow-off reading no longer depends on the angle. What the run's flow-off
// zero then removes, in component space, is only the change of the
// bridges' zeros since the sweep, at whatever angle it is taken. For a
// linear matrix the order of matrix and zero makes no difference; for a
// second-order one, give a tare (or zero the outputs at the amplifier) so
// that the products are formed from zero-corrected outputs.
//
// It is not safe for concurrent use; the pipeline owns it.
type corrections struct {
	tare []tareSI
	bal  *balanceSI

	angle      string  // angle channel; "" when the angle is fixed
	angleFixed float64 // fixed angle, rad
	lastAngle  float64 // newest finite angle seen (an angle from another source), rad; NaN before
}

// tareSI is one channel's tare in SI.
type tareSI struct {
	channel string
	coef    [3]float64
}

// balanceSI is the interaction matrix on SI values: outputs are divided by
// their channels' unit scale before the matrix, components multiplied by
// theirs after it.
type balanceSI struct {
	outputs, components []string
	inScale, outScale   []float64
	m                   calibrate.Balance
}

// newCorrections returns nil when the rig names neither a tare nor a
// balance matrix (old rig files: nothing changes).
func newCorrections(r *rig.Rig) *corrections {
	if len(r.Tare) == 0 && r.Balance == nil {
		return nil
	}
	c := &corrections{angle: r.Lift.AngleChannel, angleFixed: r.Lift.AngleRad, lastAngle: math.NaN()}
	for _, t := range r.Tare {
		s := r.UnitScale(t.Channel)
		c.tare = append(c.tare, tareSI{channel: t.Channel, coef: [3]float64{s * t.Coef[0], s * t.Coef[1], s * t.Coef[2]}})
	}
	if b := r.Balance; b != nil {
		bs := &balanceSI{outputs: b.Outputs, components: b.Components,
			m: calibrate.Balance{Components: len(b.Components), Outputs: len(b.Outputs), SecondOrder: b.SecondOrder(), C: b.Matrix}}
		for _, o := range b.Outputs {
			bs.inScale = append(bs.inScale, r.UnitScale(o))
		}
		for _, k := range b.Components {
			bs.outScale = append(bs.outScale, r.UnitScale(k))
		}
		// Apply needs a covariance of the right shape; the matrix's
		// uncertainty enters the budget through [balance] u instead.
		for range b.Components {
			p := len(b.Matrix[0])
			cov := make([][]float64, p)
			for j := range cov {
				cov[j] = make([]float64, p)
			}
			bs.m.Cov = append(bs.m.Cov, cov)
		}
		c.bal = bs
	}
	return c
}

// alphaAt returns the angle of sample i of b: the block's own angle
// channel, else the newest angle seen in another block, else the fixed
// angle.
func (c *corrections) alphaAt(angle []float64, i int) float64 {
	switch {
	case c.angle == "":
		return c.angleFixed
	case angle != nil && i < len(angle):
		return angle[i]
	default:
		return c.lastAngle
	}
}

// applyTare subtracts each tared channel's tare(α) at the sample's angle,
// in place. A sample whose angle is not known becomes NaN (no value).
func (c *corrections) applyTare(b *calibrate.Block) {
	if c == nil {
		return
	}
	var angle []float64
	if c.angle != "" {
		if s := b.Find(c.angle); s != nil {
			angle = s.Values
		}
	}
	if len(c.tare) > 0 {
		for _, t := range c.tare {
			s := b.Find(t.channel)
			if s == nil {
				continue
			}
			for i := range s.Values {
				a := c.alphaAt(angle, i)
				s.Values[i] -= t.coef[0] + t.coef[1]*math.Sin(a) + t.coef[2]*math.Cos(a)
			}
		}
	}
	for i := len(angle) - 1; i >= 0; i-- {
		if !math.IsNaN(angle[i]) && !math.IsInf(angle[i], 0) {
			c.lastAngle = angle[i]
			break
		}
	}
}

// applyBalance replaces the component channels of b by the matrix applied
// to the outputs, in place. A block holding some but not all outputs gets
// NaN components (the matrix needs every output of one instant); a block
// with none is left alone. The components carry the outputs' calibration
// uncertainties through the linear part of the matrix.
func (c *corrections) applyBalance(b *calibrate.Block) {
	if c == nil || c.bal == nil {
		return
	}
	bs := c.bal
	outs := make([]*calibrate.Series, len(bs.outputs))
	found := 0
	for j, name := range bs.outputs {
		if outs[j] = b.Find(name); outs[j] != nil {
			found++
		}
	}
	if found == 0 {
		return
	}
	n := b.Len()
	comp := make([][]float64, len(bs.components))
	for k := range comp {
		comp[k] = make([]float64, n)
	}
	o := make([]float64, len(bs.outputs))
	for i := range n {
		for j, s := range outs {
			o[j] = math.NaN()
			if s != nil && i < len(s.Values) {
				o[j] = s.Values[i] / bs.inScale[j]
			}
		}
		f := bs.m.Apply(o)
		for k := range comp {
			comp[k][i] = f[k] * bs.outScale[k]
		}
	}
	// Calibration u of each component: √Σ_j (C_kj·u_j)² over the linear
	// terms, in SI.
	us := make([]float64, len(bs.components))
	dofs := make([]float64, len(bs.components))
	for k := range bs.components {
		var cs []estimate.Contribution
		for j, s := range outs {
			if s == nil {
				continue
			}
			uy := math.Abs(bs.m.C[k][j]*bs.outScale[k]/bs.inScale[j]) * s.U
			d := s.Dof
			if d == 0 || math.IsNaN(d) {
				d = math.Inf(1)
			}
			cs = append(cs, estimate.Contribution{UY: uy, Dof: d})
		}
		v := estimate.Combine(cs)
		us[k], dofs[k] = v.U, v.Dof
	}
	for k, name := range bs.components {
		if s := b.Find(name); s != nil {
			s.Values, s.U, s.Dof = comp[k], us[k], dofs[k]
			continue
		}
		b.Series = append(b.Series, calibrate.Series{Channel: name, Values: comp[k], U: us[k], Dof: dofs[k]})
	}
}

// correctionInputs are the Type B inputs the rig's corrections add to the
// force-balance budget: one line for the weight tare and one for the
// balance matrix, each on the normal and the axial force. A tare on a
// balance output reaches the components through the linear part of the
// matrix. Channels within one role are taken as independent.
func correctionInputs(r *rig.Rig) []estimate.CorrectionInput {
	var out []estimate.CorrectionInput
	role := func(names []string, u map[string]float64) float64 {
		s := 0.0
		for _, n := range names {
			s += u[n] * u[n]
		}
		return math.Sqrt(s)
	}
	if len(r.Tare) > 0 {
		u := map[string]float64{}
		for _, t := range r.Tare {
			u[t.Channel] = r.UnitScale(t.Channel) * t.U
		}
		if b := r.Balance; b != nil {
			// Map the output-space tare u through the matrix's linear terms.
			mapped := map[string]float64{}
			for name, v := range u {
				mapped[name] = v
			}
			for k, comp := range b.Components {
				s := 0.0
				for j, o := range b.Outputs {
					uj := u[o] / r.UnitScale(o)
					s += math.Pow(b.Matrix[k][j]*uj*r.UnitScale(comp), 2)
				}
				mapped[comp] = math.Sqrt(s)
			}
			u = mapped
		}
		out = append(out, estimate.CorrectionInput{Name: "weight tare", NormalUN: role(r.Lift.Normal, u), AxialUN: role(r.Lift.Axial, u)})
	}
	if b := r.Balance; b != nil {
		u := map[string]float64{}
		for k, comp := range b.Components {
			if k < len(b.U) {
				u[comp] = r.UnitScale(comp) * b.U[k]
			}
		}
		out = append(out, estimate.CorrectionInput{Name: "balance interaction matrix", NormalUN: role(r.Lift.Normal, u), AxialUN: role(r.Lift.Axial, u)})
	}
	return out
}
