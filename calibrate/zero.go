package calibrate

import (
	"errors"
	"fmt"
	"maps"
	"math"
	"slices"
	"time"
)

// Zero is a flow-off zero: the mean calibrated value of each channel with
// the model at rest and no flow, captured before or after a run.
type Zero struct {
	T      time.Time          // when it was captured (mid-point of the samples)
	Values map[string]float64 // mean per channel, in the SI unit of its quantity (from calibrated blocks)
	N      int                // samples behind the mean of the channel with the fewest
}

// CaptureZero averages flow-off samples into a Zero taken at t. Every
// channel that appears in the blocks gets its mean over the samples that are
// not NaN. It refuses a capture with no samples, or a channel with none (a
// zero from nothing would silently shift every value of the run).
func CaptureZero(t time.Time, blocks []Block) (Zero, error) {
	sum := map[string]float64{}
	cnt := map[string]int{}
	for _, b := range blocks {
		for _, s := range b.Series {
			if _, ok := cnt[s.Channel]; !ok {
				cnt[s.Channel] = 0
			}
			for _, v := range s.Values {
				if !math.IsNaN(v) && !math.IsInf(v, 0) {
					sum[s.Channel] += v
					cnt[s.Channel]++
				}
			}
		}
	}
	if len(cnt) == 0 {
		return Zero{}, errors.New("capture zero: no flow-off samples")
	}
	z := Zero{T: t, Values: make(map[string]float64, len(cnt)), N: math.MaxInt}
	for _, ch := range slices.Sorted(maps.Keys(cnt)) {
		n := cnt[ch]
		if n == 0 {
			return Zero{}, fmt.Errorf("capture zero: channel %q has no samples in the flow-off capture", ch)
		}
		z.Values[ch] = sum[ch] / float64(n)
		z.N = min(z.N, n)
	}
	return z, nil
}

// Drift is the change of the flow-off zero over a run, from the zero
// captured before it (Start) to the one captured after (End). The zero is
// taken to move linearly in time between them (common practice for slow
// thermal drift of strain-gauge bridges).
type Drift struct {
	Start, End Zero
}

// At returns the zero of a channel at time t, linearly interpolated between
// Start and End:
//
//	z(t) = z_s + (z_e − z_s)·(t − t_s)/(t_e − t_s)
//
// Before Start.T it is Start's value and after End.T End's (no
// extrapolation). A channel in only one of the zeros keeps that value; a
// channel in neither has zero 0. With End.T not after Start.T, Start's value
// is used.
func (d Drift) At(channel string, t time.Time) float64 {
	zs, okS := d.Start.Values[channel]
	ze, okE := d.End.Values[channel]
	switch {
	case !okS && !okE:
		return 0
	case !okE:
		return zs
	case !okS:
		return ze
	}
	span := d.End.T.Sub(d.Start.T)
	if span <= 0 || !t.After(d.Start.T) {
		return zs
	}
	if !t.Before(d.End.T) {
		return ze
	}
	return zs + (ze-zs)*(float64(t.Sub(d.Start.T))/float64(span))
}

// Correct subtracts the drifting zero from every value of a calibrated
// block, in place: v ← v − z(t) with t the sample's time on the host
// timeline (AlignedT0Us + i·DtUs, or T0Us when not aligned, µs since the
// Unix epoch). NaN stays NaN.
//
// With a weight tare (Tare), whose sweep already holds the zero of its
// time, subtract only the change: apply the tare, then a Drift whose Start
// is the zero captured with the sweep.
func (d Drift) Correct(b *Block) {
	t0 := b.AlignedT0Us
	if t0 == 0 {
		t0 = b.T0Us
	}
	for si := range b.Series {
		s := &b.Series[si]
		for i := range s.Values {
			s.Values[i] -= d.At(s.Channel, time.UnixMicro(t0+int64(i)*b.DtUs))
		}
	}
}

// DriftLine reports one channel's zero drift over a run.
type DriftLine struct {
	Channel  string  `json:"channel"`
	StartSI  float64 `json:"start_si"`  // zero before the run, SI unit of the channel's quantity
	EndSI    float64 `json:"end_si"`    // zero after the run
	ChangeSI float64 `json:"change_si"` // EndSI − StartSI
}

// Report lists the drift of every channel that has both zeros, sorted by
// channel name.
func (d Drift) Report() []DriftLine {
	var out []DriftLine
	for _, ch := range slices.Sorted(maps.Keys(d.Start.Values)) {
		ze, ok := d.End.Values[ch]
		if !ok {
			continue
		}
		zs := d.Start.Values[ch]
		out = append(out, DriftLine{Channel: ch, StartSI: zs, EndSI: ze, ChangeSI: ze - zs})
	}
	return out
}

// Tare is the weight tare of a model on its balance: what each channel reads
// with no flow as the model's own weight turns with the angle of attack.
type Tare struct {
	Channels map[string]TareFit
	Warnings []string // e.g. an angle range too small to separate the terms
}

// TareFit is one channel's weight-tare model,
//
//	reading(α) = a + b·sin α + c·cos α
//
// the components of a fixed weight vector in axes that turn with α, plus a
// constant (common practice for flow-off tare sweeps). Over a small range
// of α, a and c are nearly interchangeable: their uncertainties are then
// large but the curve itself is still well determined inside the range.
type TareFit struct {
	Coef       [3]float64 // a, b, c, in the unit of the readings (SI from calibrated blocks)
	CoefU      [3]float64 // their standard uncertainties
	ResidualSD float64    // s = √(SSR/ν), unit of the readings
	Dof        int        // ν = angles − 3
}

// FitTare fits the weight-tare model of every channel to a flow-off angle
// sweep: alphaRad[i] is the i-th angle, readings[ch][i] the channel's mean
// value there. It needs at least 4 angles (so that ν ≥ 1) spread enough to
// separate sin α and cos α from the constant. Errors for mismatched
// lengths and values that are not finite; never panics.
func FitTare(alphaRad []float64, readings map[string][]float64) (Tare, error) {
	n := len(alphaRad)
	if n < 4 {
		return Tare{}, fmt.Errorf("%w: weight tare: need at least 4 angles, have %d", ErrPoints, n)
	}
	if len(readings) == 0 {
		return Tare{}, fmt.Errorf("%w: weight tare: no channels", ErrPoints)
	}
	for i, a := range alphaRad {
		if !allFinite(a) {
			return Tare{}, fmt.Errorf("%w: weight tare: angle %d is not a finite number", ErrPoints, i+1)
		}
	}
	a := make([]float64, 0, 3*n)
	for _, al := range alphaRad {
		a = append(a, 1, math.Sin(al), math.Cos(al))
	}
	t := Tare{Channels: make(map[string]TareFit, len(readings))}
	for _, ch := range slices.Sorted(maps.Keys(readings)) {
		y := readings[ch]
		if len(y) != n {
			return Tare{}, fmt.Errorf("%w: weight tare: channel %q has %d readings for %d angles", ErrPoints, ch, len(y), n)
		}
		for i, v := range y {
			if !allFinite(v) {
				return Tare{}, fmt.Errorf("%w: weight tare: channel %q, angle %d: reading is not a finite number", ErrPoints, ch, i+1)
			}
		}
		res, err := lsq(n, 3, a, y)
		if err != nil {
			return Tare{}, fmt.Errorf("%w: weight tare: the angles do not separate the constant, sin α and cos α: sweep over a wider range of angles", ErrPoints)
		}
		f := TareFit{Dof: n - 3}
		s2 := res.ssr / float64(f.Dof)
		f.ResidualSD = math.Sqrt(s2)
		for j := range 3 {
			f.Coef[j] = res.coef[j]
			f.CoefU[j] = math.Sqrt(s2 * res.xtxi.At(j, j))
		}
		if !allFinite(f.Coef[:]...) || !allFinite(f.ResidualSD) {
			return Tare{}, fmt.Errorf("%w: weight tare: channel %q: the fit is not finite (values too large)", ErrPoints, ch)
		}
		if res.illC && len(t.Warnings) == 0 {
			t.Warnings = append(t.Warnings, fmt.Sprintf("weight tare is ill-conditioned (condition number %.3g): sweep over a wider range of angles", res.cond))
		}
		t.Channels[ch] = f
	}
	return t, nil
}

// At returns the weight tare of a channel at angle α (rad): the flow-off
// reading to subtract. A channel without a tare has tare 0.
func (t Tare) At(channel string, alphaRad float64) float64 {
	f, ok := t.Channels[channel]
	if !ok {
		return 0
	}
	return f.Coef[0] + f.Coef[1]*math.Sin(alphaRad) + f.Coef[2]*math.Cos(alphaRad)
}
