package calibrate

import (
	"errors"
	"fmt"
	"math"
	"slices"

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
// calibrations: inline polynomials, or stored records named by id (see
// NewCalibratorFrom). It holds no state that changes, so one Calibrator may
// be used from several goroutines.
type Calibrator struct {
	channels map[string]channelCal
	stored   []Record // stored records in use, in rig channel order
}

type channelCal struct {
	poly  Poly
	toSI  rig.Affine
	uSI   float64
	uRel  float64 // relative span uncertainty
	dof   float64
	calID string // stored calibration id; "" for inline
}

// Lookup returns the stored calibration record with the given id, or an
// error (wrapping the store's not-found error when there is none). It is
// called only while a Calibrator is built.
type Lookup func(id string) (Record, error)

// NewCalibrator builds a Calibrator for every channel of r that has an inline
// calibration. A channel without one is passed through as raw·ToSI, so an
// instrument that already sends engineering units needs no polynomial.
// A channel that names a stored calibration id is refused; use
// NewCalibratorFrom with the store's lookup.
func NewCalibrator(r *rig.Rig) (*Calibrator, error) { return NewCalibratorFrom(r, nil) }

// NewCalibratorFrom is NewCalibrator that also resolves stored calibrations
// (`calibration = { id = "…" }` in the rig file) through lookup. A nil lookup
// refuses ids, as NewCalibrator does.
//
// A stored record is used as follows:
//   - values: the record's Fit.Poly, in the record's Unit, converted to SI
//     with that unit (rig.UnitToSI for the channel's quantity), so a record
//     made in kgf serves a channel declared in N;
//   - span: the record's SpanURel (Series.URel), unless the rig file's
//     span_u_pct replaces it;
//   - uncertainty: one u per series (Series.U), so the largest standard
//     uncertainty of a calibrated value over the calibrated range is used:
//     Record.Apply (fit curve plus reference standard) evaluated at every
//     calibration point's reading and at 64 readings spread evenly between
//     the lowest and highest one. Taking the largest, not the mid-range
//     value, is the conservative choice: a fit is least certain at the ends
//     of its range, where loads are highest. Its degrees of freedom are
//     Record.Apply's Welch–Satterthwaite value at that reading.
//
// A record made for another channel, or whose unit does not fit the
// channel's quantity, is refused with a message that says what to fix. An
// expired record is used (Stored lets the caller warn about it).
func NewCalibratorFrom(r *rig.Rig, lookup Lookup) (*Calibrator, error) {
	c := &Calibrator{channels: make(map[string]channelCal, len(r.Channels))}
	for _, ch := range r.Channels {
		if id := ch.Calibration.ID; id != "" {
			if lookup == nil {
				return nil, fmt.Errorf("channel %q: stored calibration %q: no calibration store to look it up in; give an inline poly", ch.Name, id)
			}
			rec, err := lookup(id)
			if err != nil {
				return nil, fmt.Errorf("channel %q: stored calibration %q: %w (list them with the dashboard's calibration page, or run liftyard calibrate)", ch.Name, id, err)
			}
			cal, err := storedCal(ch, rec)
			if err != nil {
				return nil, fmt.Errorf("channel %q: stored calibration %q: %w", ch.Name, id, err)
			}
			if ch.Calibration.SpanURel > 0 {
				cal.uRel = ch.Calibration.SpanURel // the rig file's word replaces the record's
			}
			c.channels[ch.Name] = cal
			c.stored = append(c.stored, rec)
			continue
		}
		p := Poly{Coef: ch.Calibration.Poly}
		if len(p.Coef) == 0 {
			p.Coef = []float64{0, 1}
		}
		c.channels[ch.Name] = channelCal{poly: p, toSI: ch.ToSI, uSI: math.Abs(ch.ToSI.Scale) * ch.Calibration.U,
			uRel: ch.Calibration.SpanURel, dof: math.Inf(1)}
	}
	return c, nil
}

// uRangeSteps is how many readings between the lowest and highest
// calibration reading are searched for the largest uncertainty.
const uRangeSteps = 64

// storedCal turns a stored record into a channel's calibration.
func storedCal(ch rig.Channel, rec Record) (channelCal, error) {
	if rec.Channel != "" && rec.Channel != ch.Name {
		return channelCal{}, fmt.Errorf("it was made for channel %q; calibrate channel %q, or name the channel %q in the rig file", rec.Channel, ch.Name, rec.Channel)
	}
	if len(rec.Fit.Poly) == 0 {
		return channelCal{}, errors.New("the record holds no fitted polynomial")
	}
	for _, v := range rec.Fit.Poly {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return channelCal{}, errors.New("the record's polynomial is not finite")
		}
	}
	toSI := ch.ToSI
	if rec.Unit != "" && rec.Unit != ch.Unit {
		a, err := rig.UnitToSI(ch.Quantity, rec.Unit)
		if err != nil {
			return channelCal{}, fmt.Errorf("its unit %q does not fit channel quantity %q: %w", rec.Unit, ch.Quantity, err)
		}
		toSI = a
	}
	worst := Value{Dof: math.Inf(1)}
	consider := func(x float64) {
		if v := rec.Apply(x); v.U > worst.U && !math.IsNaN(v.U) {
			worst = v
		}
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range rec.Points {
		consider(p.Reading)
		lo, hi = min(lo, p.Reading), max(hi, p.Reading)
	}
	if lo < hi {
		for i := 0; i <= uRangeSteps; i++ {
			consider(lo + (hi-lo)*float64(i)/uRangeSteps)
		}
	}
	if len(rec.Points) == 0 {
		worst = Value{U: rec.ReferenceU, Dof: math.Inf(1)}
	}
	return channelCal{
		poly:  Poly{Coef: slices.Clone(rec.Fit.Poly)},
		toSI:  toSI,
		uSI:   math.Abs(toSI.Scale) * worst.U,
		uRel:  rec.SpanURel,
		dof:   worst.Dof,
		calID: rec.ID,
	}, nil
}

// StoredID returns the id of the stored calibration that produces the
// channel's values, or "" when the channel is calibrated inline (or not at
// all). Every calibrated value of the channel comes from that record.
func (c *Calibrator) StoredID(channel string) string { return c.channels[channel].calID }

// Stored returns the stored calibration records in use, one per channel that
// names one, in the rig file's channel order. Callers use it to record which
// calibrations a run used and to warn about expired ones (Record.Expired).
func (c *Calibrator) Stored() []Record { return slices.Clone(c.stored) }

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
		out.Series = append(out.Series, Series{Channel: s.Channel, Values: vals, U: cal.uSI, URel: cal.uRel, Dof: cal.dof})
	}
	return out
}
