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
	CpPeak   estimate.Num `json:"cp_peak,omitempty"`
	UpliftN  *valueRec    `json:"uplift_n,omitempty"`
	DesignCp *valueRec    `json:"design_cp,omitempty"`
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
		rec.Zone, rec.CpMean, rec.CpRMS, rec.CpPeak, rec.UpliftN, rec.DesignCp =
			sg.Zone, &cp, estimate.Num(sg.CpRMS), estimate.Num(sg.CpPeak), &up, &d
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
		Zone: rec.Zone, CpRMS: float64(rec.CpRMS), CpPeak: float64(rec.CpPeak),
	}
	for _, f := range []struct {
		rec *valueRec
		to  *calibrate.Value
	}{{rec.CpMean, &sg.CpMean}, {rec.UpliftN, &sg.UpliftN}, {rec.DesignCp, &sg.DesignCp}} {
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
