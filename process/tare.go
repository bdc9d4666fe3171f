package process

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
	"liftyard/storage"
)

// Tare sweep settings: a hold is a run of tareChunk pieces whose mean
// angles stay within TareAngleTolRad of the hold's first; it counts when it
// lasts tareMinHold, and its first and last piece are dropped (the model
// still swinging after a move).
const (
	tareChunk   = 500 * time.Millisecond
	tareMinHold = 2 * time.Second
	// TareAngleTolRad is the default spread of one hold's angle (0.05°).
	TareAngleTolRad = 0.05 * math.Pi / 180
	// tareFlowFrac is the q, as a fraction of the pitot's rated range,
	// above which a hold is taken to have the flow on.
	tareFlowFrac = 0.02
)

// TareHold is one angle of a flow-off sweep: the mean calibrated reading
// of each tared channel while the model rested there.
type TareHold struct {
	AlphaRad   float64
	QPa        float64 // mean q over the hold (NaN without a q channel)
	Start, End time.Time
	N          int                // samples averaged
	Readings   map[string]float64 // SI, per tared channel
	// SE is the standard error of each reading (sample SD/√N), SI.
	SE map[string]float64
}

// TareSweep is a weight tare fitted to a stored flow-off angle sweep.
type TareSweep struct {
	Rig      *rig.Rig
	Channels []string // the tared channels: the [balance] outputs, else the [lift] normal and axial channels
	Holds    []TareHold
	Fit      calibrate.Tare // per channel, in SI
	// U is the standard uncertainty to state with each channel's tare, SI:
	// the larger of the fit's residual SD and the RMS standard error of
	// the holds' means (with few holds the residual SD alone can come out
	// far too small).
	U        map[string]float64
	Warnings []string
}

// FitTareRun finds the holds of a stored flow-off angle sweep (run id) and
// fits each balance channel's weight tare a + b·sin α + c·cos α to them
// (calibrate.FitTare). The readings are the channels' calibrated values
// only: no tare, zero or matrix of the stored rig is applied. angleTolRad
// ≤ 0 takes TareAngleTolRad.
func FitTareRun(ctx context.Context, store *storage.Store, id uint64, angleTolRad float64) (TareSweep, error) {
	if angleTolRad <= 0 {
		angleTolRad = TareAngleTolRad
	}
	run, err := store.Run(id)
	if err != nil {
		return TareSweep{}, err
	}
	r, err := StoredRig(run)
	if err != nil {
		return TareSweep{}, err
	}
	if r.Lift.AngleChannel == "" {
		return TareSweep{}, fmt.Errorf("run %d: rig %q has a fixed angle ([lift] angle is not a channel): a tare sweep needs the measured angle", id, r.Name)
	}
	chans := slices.Concat(r.Lift.Normal, r.Lift.Axial)
	if r.Balance != nil {
		chans = slices.Clone(r.Balance.Outputs)
	}
	cal, err := calibrate.NewCalibratorFrom(r, store.Calibration)
	if err != nil {
		return TareSweep{}, err
	}
	sw := TareSweep{Rig: r, Channels: chans}
	var (
		aligner acquire.Aligner
		chunks  []tareChunkSum
		cur     *tareChunkSum
		missing string
	)
	errMixed := errors.New("mixed sources")
	err = (&acquire.StoredRun{Store: store, RunID: id}).Replay(ctx, func(b acquire.Block) error {
		aligner.Align(&b)
		cb := cal.Apply(&b)
		al := cb.Find(r.Lift.AngleChannel)
		if al == nil {
			return nil
		}
		vals := make([][]float64, len(chans))
		for k, c := range chans {
			s := cb.Find(c)
			if s == nil {
				missing = c
				return errMixed
			}
			vals[k] = s.Values
		}
		var q []float64
		if s := cb.Find(r.Lift.DynamicPressure); s != nil {
			q = s.Values
		}
		for i := range cb.Len() {
			t := time.UnixMicro(cb.T0Us + int64(i)*cb.DtUs)
			if cur == nil || t.Sub(cur.start) >= tareChunk {
				chunks = append(chunks, tareChunkSum{start: t, sums: make([]float64, len(chans)), sqs: make([]float64, len(chans)), qSum: math.NaN()})
				cur = &chunks[len(chunks)-1]
			}
			cur.add(t, al.Values[i], vals, q, i)
		}
		return nil
	})
	switch {
	case errors.Is(err, errMixed):
		return TareSweep{}, fmt.Errorf("run %d: channel %q comes from another source than the angle %q: a tare sweep needs them in one source", id, missing, r.Lift.AngleChannel)
	case err != nil:
		return TareSweep{}, err
	}
	sw.Holds = tareHolds(chunks, chans, angleTolRad)
	var qCap float64
	if ch, ok := r.Channel(r.Lift.DynamicPressure); ok {
		qCap = ch.CapacitySI
	}
	for _, h := range sw.Holds {
		if qCap > 0 && h.QPa > tareFlowFrac*qCap {
			sw.Warnings = append(sw.Warnings, fmt.Sprintf("the flow looks on at %.2f°: q = %.4g Pa (a tare sweep is taken with the flow off)", rig.Deg(h.AlphaRad), h.QPa))
		}
	}
	if len(sw.Holds) < 4 {
		return sw, fmt.Errorf("run %d: %d holds found (each %s at one angle within %.2f°); a tare sweep needs at least 4 angles", id, len(sw.Holds), tareMinHold, rig.Deg(angleTolRad))
	}
	alphas := make([]float64, len(sw.Holds))
	readings := map[string][]float64{}
	for i, h := range sw.Holds {
		alphas[i] = h.AlphaRad
		for _, c := range chans {
			readings[c] = append(readings[c], h.Readings[c])
		}
	}
	fit, err := calibrate.FitTare(alphas, readings)
	if err != nil {
		return sw, fmt.Errorf("run %d: %w", id, err)
	}
	sw.Fit = fit
	sw.U = map[string]float64{}
	for _, c := range chans {
		ms := 0.0
		for _, h := range sw.Holds {
			ms += h.SE[c] * h.SE[c]
		}
		sw.U[c] = math.Max(fit.Channels[c].ResidualSD, math.Sqrt(ms/float64(len(sw.Holds))))
	}
	sw.Warnings = append(sw.Warnings, fit.Warnings...)
	return sw, nil
}

// tareChunkSum accumulates one piece of the sweep.
type tareChunkSum struct {
	start, end time.Time
	n          int
	alphaSum   float64
	sums, sqs  []float64
	qSum       float64
	qN         int
}

func (c *tareChunkSum) add(t time.Time, alpha float64, vals [][]float64, q []float64, i int) {
	if math.IsNaN(alpha) {
		return
	}
	for _, v := range vals {
		if math.IsNaN(v[i]) {
			return
		}
	}
	c.end = t
	c.n++
	c.alphaSum += alpha
	for k, v := range vals {
		c.sums[k] += v[i]
		c.sqs[k] += v[i] * v[i]
	}
	if q != nil && !math.IsNaN(q[i]) {
		if c.qN == 0 {
			c.qSum = 0
		}
		c.qSum += q[i]
		c.qN++
	}
}

func (c *tareChunkSum) alpha() float64 { return c.alphaSum / float64(c.n) }

// tareHolds groups the pieces into holds at one angle and averages each
// hold without its first and last piece.
func tareHolds(chunks []tareChunkSum, chans []string, tolRad float64) []TareHold {
	var out []TareHold
	for i := 0; i < len(chunks); {
		if chunks[i].n == 0 {
			i++
			continue
		}
		a0 := chunks[i].alpha()
		j := i + 1
		for j < len(chunks) && chunks[j].n > 0 && math.Abs(chunks[j].alpha()-a0) <= tolRad &&
			chunks[j].start.Sub(chunks[j-1].start) <= 2*tareChunk {
			j++
		}
		if chunks[j-1].end.Sub(chunks[i].start) >= tareMinHold && j-i >= 3 {
			h := TareHold{Start: chunks[i+1].start, End: chunks[j-2].end, Readings: map[string]float64{}, SE: map[string]float64{}, QPa: math.NaN()}
			var aSum, qSum float64
			qN := 0
			sums, sqs := make([]float64, len(chans)), make([]float64, len(chans))
			for _, c := range chunks[i+1 : j-1] {
				h.N += c.n
				aSum += c.alphaSum
				for k := range chans {
					sums[k] += c.sums[k]
					sqs[k] += c.sqs[k]
				}
				if c.qN > 0 {
					qSum += c.qSum
					qN += c.qN
				}
			}
			h.AlphaRad = aSum / float64(h.N)
			nf := float64(h.N)
			for k, c := range chans {
				m := sums[k] / nf
				h.Readings[c] = m
				if h.N > 1 {
					h.SE[c] = math.Sqrt(math.Max(0, sqs[k]-nf*m*m) / (nf - 1) / nf)
				}
			}
			if qN > 0 {
				h.QPa = qSum / float64(qN)
			}
			out = append(out, h)
		}
		i = j
	}
	return out
}
