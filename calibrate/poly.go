package calibrate

import (
	"fmt"
	"math"

	"liftyard/acquire"
	"liftyard/rig"
)

// Poly is a calibration polynomial from a raw reading to a value:
// value = Σ_k Coef[k]·reading^k (ascending powers), evaluated by Horner's rule.
type Poly struct {
	Coef []float64
}

// Eval returns the calibrated value of one reading.
func (p Poly) Eval(reading float64) float64 {
	v := 0.0
	for k := len(p.Coef) - 1; k >= 0; k-- {
		v = v*reading + p.Coef[k]
	}
	return v
}

// Calibrator turns raw blocks into calibrated blocks using the rig file's
// inline calibrations. It holds no state that changes, so one Calibrator may
// be used from several goroutines.
type Calibrator struct {
	channels map[string]channelCal
}

type channelCal struct {
	poly Poly
	toSI rig.Affine
	uSI  float64
}

// NewCalibrator builds a Calibrator for every channel of r that has an inline
// calibration. A channel without one is passed through as raw·ToSI, so an
// instrument that already sends engineering units needs no polynomial.
func NewCalibrator(r *rig.Rig) (*Calibrator, error) {
	c := &Calibrator{channels: make(map[string]channelCal, len(r.Channels))}
	for _, ch := range r.Channels {
		if ch.Calibration.ID != "" {
			return nil, fmt.Errorf("channel %q: stored calibration %q: stored calibrations are not supported yet; give an inline poly", ch.Name, ch.Calibration.ID)
		}
		p := Poly{Coef: ch.Calibration.Poly}
		if len(p.Coef) == 0 {
			p.Coef = []float64{0, 1}
		}
		c.channels[ch.Name] = channelCal{poly: p, toSI: ch.ToSI, uSI: math.Abs(ch.ToSI.Scale) * ch.Calibration.U}
	}
	return c, nil
}

// Apply calibrates one block. Series of channels the rig does not declare are
// dropped (the raw record keeps them). NaN readings stay NaN.
func (c *Calibrator) Apply(b *acquire.Block) Block {
	out := Block{Source: b.Source, Seq: b.Seq, T0Us: b.T0Us, DtUs: b.DtUs, AlignedT0Us: b.AlignedT0Us, Series: make([]Series, 0, len(b.Series))}
	for _, s := range b.Series {
		cal, ok := c.channels[s.Channel]
		if !ok {
			continue
		}
		vals := make([]float64, len(s.Raw))
		for i, r := range s.Raw {
			vals[i] = cal.toSI.Apply(cal.poly.Eval(r))
		}
		out.Series = append(out.Series, Series{Channel: s.Channel, Values: vals, U: cal.uSI, Dof: math.Inf(1)})
	}
	return out
}
