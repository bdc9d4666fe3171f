package storage

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/calibrate"
	"liftyard/estimate"
)

// valueRec is a calibrate.Value as stored.
type valueRec struct {
	X   estimate.Num `json:"x"`
	U   estimate.Num `json:"u"`
	Dof estimate.Num `json:"dof"`
}

func toValueRec(v calibrate.Value) valueRec {
	return valueRec{estimate.Num(v.X), estimate.Num(v.U), estimate.Num(v.Dof)}
}

func (r valueRec) value() calibrate.Value {
	return calibrate.Value{X: float64(r.X), U: float64(r.U), Dof: float64(r.Dof)}
}

type contributionRec struct {
	Input       string       `json:"input"`
	U           estimate.Num `json:"u"`
	Sensitivity estimate.Num `json:"sensitivity"`
	UY          estimate.Num `json:"u_y"`
	Dof         estimate.Num `json:"dof"`
	TypeA       bool         `json:"type_a,omitempty"`
}

// segmentRec is an estimate.Segment as stored in results/<run>/<index>.
// Field names follow the Go fields in snake_case (DEVELOPERS.md "Units in names").
type segmentRec struct {
	Index      int          `json:"index"`
	TStart     time.Time    `json:"t_start"`
	TEnd       time.Time    `json:"t_end"`
	N          int          `json:"n"`
	NEff       estimate.Num `json:"n_eff"`
	AlphaRad   valueRec     `json:"alpha_rad"`
	QPa        valueRec     `json:"q_pa"`
	SpeedMPerS valueRec     `json:"speed_m_s"`
	RhoKgPerM3 estimate.Num `json:"rho_kg_m3"`
	MuPaS      estimate.Num `json:"mu_pa_s"`
	Re         estimate.Num `json:"re"`
	Fn         estimate.Num `json:"fn,omitempty"`
	LiftN      valueRec     `json:"lift_n"`
	DragN      valueRec     `json:"drag_n"`
	CL         valueRec     `json:"cl"`
	CD         valueRec     `json:"cd"`
	SpinRatio  estimate.Num `json:"spin_ratio"`
	// issue 12: the spin ratio's u and dof; absent in older records (0).
	SpinRatioU   estimate.Num      `json:"spin_ratio_u,omitempty"`
	SpinRatioDof estimate.Num      `json:"spin_ratio_dof,omitempty"`
	DesignCL     valueRec          `json:"design_cl"`
	En           estimate.Num      `json:"en"`
	CLBudget     []contributionRec `json:"cl_budget,omitempty"`
	CDBudget     []contributionRec `json:"cd_budget,omitempty"`

	// Roof rows only (Zone set); absent on force-balance rows.
	Zone     string       `json:"zone,omitempty"`
	CpMean   *valueRec    `json:"cp_mean,omitempty"`
	CpRMS    estimate.Num `json:"cp_rms,omitempty"`
	CpPeak   estimate.Num `json:"cp_peak,omitempty"` // rows stored before block peaks: an epoch value, not read back (docs/roof.md §5)
	UpliftN  *valueRec    `json:"uplift_n,omitempty"`
	DesignCp *valueRec    `json:"design_cp,omitempty"`
	// Roof rows since block peaks, p/q̄ and per-tap rows (issue 11). An
	// absent field reads as unknown (NaN, or Block −1).
	Tap                 string        `json:"tap,omitempty"`
	Block               *int          `json:"block,omitempty"`
	CpMin               *estimate.Num `json:"cp_min,omitempty"`
	CpMax               *estimate.Num `json:"cp_max,omitempty"`
	CpPeakBlock         *estimate.Num `json:"cp_peak_block,omitempty"`
	CpPeakU             *estimate.Num `json:"cp_peak_u,omitempty"`
	CpPeakMax           *estimate.Num `json:"cp_peak_max,omitempty"`
	CpPeakMaxU          *estimate.Num `json:"cp_peak_max_u,omitempty"`
	CpInt               *valueRec     `json:"cp_int,omitempty"`
	QHeightM            estimate.Num  `json:"q_height_m,omitempty"`
	QAt                 string        `json:"q_at,omitempty"`
	TurbulenceIntensity *estimate.Num `json:"turbulence_intensity,omitempty"`
	DirectionRad        *estimate.Num `json:"direction_rad,omitempty"`
	DirectionSpreadRad  *estimate.Num `json:"direction_spread_rad,omitempty"`
	SectorRad           *estimate.Num `json:"sector_rad,omitempty"`
	SectorOutFrac       *estimate.Num `json:"sector_out_frac,omitempty"`
	SamplesUnblocked    int           `json:"samples_unblocked,omitempty"`
	DesignVs            string        `json:"design_vs,omitempty"`
}

// numPtr stores x; NaN is stored as absent.
func numPtr(x float64) *estimate.Num {
	if math.IsNaN(x) {
		return nil
	}
	n := estimate.Num(x)
	return &n
}

// numOr reads a stored number, NaN when absent.
func numOr(p *estimate.Num) float64 {
	if p == nil {
		return math.NaN()
	}
	return float64(*p)
}

func budgetRec(in []estimate.Contribution) []contributionRec {
	if in == nil {
		return nil
	}
	out := make([]contributionRec, len(in))
	for i, c := range in {
		out[i] = contributionRec{c.Input, estimate.Num(c.U), estimate.Num(c.Sensitivity), estimate.Num(c.UY), estimate.Num(c.Dof), c.TypeA}
	}
	return out
}

func budget(in []contributionRec) []estimate.Contribution {
	if in == nil {
		return nil
	}
	out := make([]estimate.Contribution, len(in))
	for i, c := range in {
		out[i] = estimate.Contribution{Input: c.Input, U: float64(c.U), Sensitivity: float64(c.Sensitivity),
			UY: float64(c.UY), Dof: float64(c.Dof), TypeA: c.TypeA}
	}
	return out
}

func encodeSegment(sg *estimate.Segment) ([]byte, error) {
	if sg.Index < 0 || sg.Index > math.MaxUint32 {
		return nil, fmt.Errorf("segment index %d: %w", sg.Index, ErrBadRecord)
	}
	rec := segmentRec{
		Index: sg.Index, TStart: sg.TStart, TEnd: sg.TEnd, N: sg.N, NEff: estimate.Num(sg.NEff),
		AlphaRad: toValueRec(sg.AlphaRad), QPa: toValueRec(sg.QPa), SpeedMPerS: toValueRec(sg.SpeedMPerS),
		RhoKgPerM3: estimate.Num(sg.RhoKgPerM3), MuPaS: estimate.Num(sg.MuPaS), Re: estimate.Num(sg.Re), Fn: estimate.Num(sg.Fn),
		LiftN: toValueRec(sg.LiftN), DragN: toValueRec(sg.DragN), CL: toValueRec(sg.CL), CD: toValueRec(sg.CD),
		SpinRatio: estimate.Num(sg.SpinRatio), SpinRatioU: estimate.Num(sg.SpinRatioU), SpinRatioDof: estimate.Num(sg.SpinRatioDof), DesignCL: toValueRec(sg.DesignCL), En: estimate.Num(sg.En),
		CLBudget: budgetRec(sg.CLBudget), CDBudget: budgetRec(sg.CDBudget),
	}
	if sg.Zone != "" {
		cp, up, d := toValueRec(sg.CpMean), toValueRec(sg.UpliftN), toValueRec(sg.DesignCp)
		ci := toValueRec(sg.CpInt)
		blk := sg.Block
		rec.Zone, rec.CpMean, rec.CpRMS, rec.UpliftN, rec.DesignCp =
			sg.Zone, &cp, estimate.Num(sg.CpRMS), &up, &d
		rec.Tap, rec.Block, rec.CpInt, rec.QHeightM, rec.QAt, rec.SamplesUnblocked, rec.DesignVs =
			sg.Tap, &blk, &ci, estimate.Num(sg.QHeightM), sg.QAt, sg.SamplesUnblocked, sg.DesignVs
		rec.CpMin, rec.CpMax, rec.CpPeakBlock, rec.CpPeakU = numPtr(sg.CpMin), numPtr(sg.CpMax), numPtr(sg.CpPeak), numPtr(sg.CpPeakU)
		rec.CpPeakMax, rec.CpPeakMaxU, rec.TurbulenceIntensity = numPtr(sg.CpPeakMax), numPtr(sg.CpPeakMaxU), numPtr(sg.TurbulenceIntensity)
		rec.DirectionRad, rec.DirectionSpreadRad = numPtr(sg.DirectionRad), numPtr(sg.DirectionSpreadRad)
		rec.SectorRad, rec.SectorOutFrac = numPtr(sg.SectorRad), numPtr(sg.SectorOutFrac)
	}
	data, err := json.Marshal(rec)
	if err != nil {
		return nil, fmt.Errorf("segment %d: %w: %w", sg.Index, ErrBadRecord, err)
	}
	return data, nil
}

func decodeSegment(data []byte) (estimate.Segment, error) {
	rec := segmentRec{En: estimate.Num(math.NaN())} // absent en means "no design value"
	if err := json.Unmarshal(data, &rec); err != nil {
		return estimate.Segment{}, fmt.Errorf("%w: %w", ErrCorrupt, err)
	}
	sg := estimate.Segment{
		Index: rec.Index, TStart: rec.TStart, TEnd: rec.TEnd, N: rec.N, NEff: float64(rec.NEff),
		AlphaRad: rec.AlphaRad.value(), QPa: rec.QPa.value(), SpeedMPerS: rec.SpeedMPerS.value(),
		RhoKgPerM3: float64(rec.RhoKgPerM3), MuPaS: float64(rec.MuPaS), Re: float64(rec.Re), Fn: float64(rec.Fn),
		LiftN: rec.LiftN.value(), DragN: rec.DragN.value(), CL: rec.CL.value(), CD: rec.CD.value(),
		SpinRatio: float64(rec.SpinRatio), SpinRatioU: float64(rec.SpinRatioU), SpinRatioDof: float64(rec.SpinRatioDof), DesignCL: rec.DesignCL.value(), En: float64(rec.En),
		CLBudget: budget(rec.CLBudget), CDBudget: budget(rec.CDBudget),
		Zone: rec.Zone, CpRMS: float64(rec.CpRMS),
	}
	if rec.Zone != "" {
		// A roof row stored before issue 11 has no block number, no block
		// peak (its cp_peak was an epoch value) and no direction: unknown.
		sg.Tap, sg.Block, sg.CpMin, sg.CpMax = rec.Tap, -1, numOr(rec.CpMin), numOr(rec.CpMax)
		sg.CpPeak, sg.CpPeakU, sg.CpPeakMax, sg.CpPeakMaxU = numOr(rec.CpPeakBlock), numOr(rec.CpPeakU), numOr(rec.CpPeakMax), numOr(rec.CpPeakMaxU)
		sg.QHeightM, sg.QAt, sg.TurbulenceIntensity = float64(rec.QHeightM), rec.QAt, numOr(rec.TurbulenceIntensity)
		sg.DirectionRad, sg.DirectionSpreadRad = numOr(rec.DirectionRad), numOr(rec.DirectionSpreadRad)
		sg.SectorRad, sg.SectorOutFrac = numOr(rec.SectorRad), numOr(rec.SectorOutFrac)
		sg.SamplesUnblocked, sg.DesignVs = rec.SamplesUnblocked, rec.DesignVs
		if rec.Block != nil {
			sg.Block = *rec.Block
		}
	}
	for _, f := range []struct {
		rec *valueRec
		to  *calibrate.Value
	}{{rec.CpMean, &sg.CpMean}, {rec.UpliftN, &sg.UpliftN}, {rec.DesignCp, &sg.DesignCp}, {rec.CpInt, &sg.CpInt}} {
		if f.rec != nil {
			*f.to = f.rec.value()
		}
	}
	return sg, nil
}

func segmentKey(index int) []byte {
	return binary.BigEndian.AppendUint32(nil, uint32(index))
}

// Segments returns the stored result rows of run id in segment order. A run
// that does not exist gives ErrNotFound; a run without results gives none.
func (s *Store) Segments(id uint64) (segs []estimate.Segment, err error) {
	defer guard(&err, fmt.Sprintf("read segments of run %d", id))()
	err = s.db.View(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketRuns).Get(u64(id)) == nil {
			return fmt.Errorf("run %d: %w", id, ErrNotFound)
		}
		b := tx.Bucket(bucketResults).Bucket(u64(id))
		if b == nil {
			return nil
		}
		return b.ForEach(func(k, v []byte) error {
			sg, err := decodeSegment(v)
			if err != nil {
				return fmt.Errorf("run %d segment key %x: %w", id, k, err)
			}
			segs = append(segs, sg)
			return nil
		})
	})
	return segs, err
}

// CorrectRun replaces the segment results of run id with segs (a corrected
// result set: a zero drift removed, a calibration mended), records why in
// the run's note and, when given, the zero drift found, and adds an event,
// all in one transaction. The raw blocks are untouched.
func (s *Store) CorrectRun(id uint64, segs []estimate.Segment, why string, drift []calibrate.DriftLine) error {
	enc := make([][]byte, len(segs))
	for i := range segs {
		data, err := encodeSegment(&segs[i])
		if err != nil {
			return fmt.Errorf("correct run %d: segment %d: %w", id, segs[i].Index, err)
		}
		enc[i] = data
	}
	err := s.db.Update(func(tx *bolt.Tx) error {
		r, err := getRun(tx, id)
		if err != nil {
			return err
		}
		res := tx.Bucket(bucketResults)
		if res.Bucket(u64(id)) != nil {
			if err := res.DeleteBucket(u64(id)); err != nil {
				return err
			}
		}
		sb, err := res.CreateBucket(u64(id))
		if err != nil {
			return err
		}
		for i, data := range enc {
			if err := sb.Put(segmentKey(segs[i].Index), data); err != nil {
				return err
			}
		}
		r.Segments = len(segs)
		if drift != nil {
			r.Drift = drift
		}
		if r.Note != "" {
			r.Note += "; "
		}
		r.Note += why
		if err := putEvent(tx, id, Event{T: s.now(), Kind: "corrected", Message: why}); err != nil {
			return err
		}
		return putRun(tx, r)
	})
	if err != nil {
		return writeError(fmt.Sprintf("correct run %d", id), err)
	}
	return nil
}
