package storage

import (
	"encoding/json"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/estimate"
)

// Marks (steady segments set by hand) live in the meta bucket, one value
// per run, so no new top-level bucket is needed:
//
//	meta/marks/<run id u64 BE>   {"clock":"utc","marks":[estimate.Mark, …]}, in time order
//
// Stores written before marks were on the wall clock hold a bare JSON
// array of marks on the timeline source's device clock; Marks maps those
// to UTC by the run's clock offset (RunClock), so they select the same
// samples as before.
var metaMarks = []byte("marks")

// marksRecord is the stored value of a run's marks.
type marksRecord struct {
	Clock string          `json:"clock"` // "utc"
	Marks []estimate.Mark `json:"marks"`
}

// marksClockUTC names the clock of marksRecord.Marks.
const marksClockUTC = "utc"

// PutMarks stores the user marks of run id, replacing any stored before;
// nil or empty marks clear them. The marks must pass estimate.CheckMarks
// (time order, no overlap, short labels): otherwise the error wraps
// ErrBadRecord and estimate.ErrMarks and nothing is written. The run must
// exist (ErrNotFound). Storing marks does not change the run's segments:
// the caller recomputes them (liftyard marks --apply) and stores them with
// CorrectRun.
func (s *Store) PutMarks(id uint64, marks []estimate.Mark) error {
	if err := estimate.CheckMarks(marks, 0); err != nil {
		return fmt.Errorf("marks of run %d: %w: %w", id, ErrBadRecord, err)
	}
	var data []byte
	if len(marks) > 0 {
		var err error
		if data, err = json.Marshal(marksRecord{Clock: marksClockUTC, Marks: marks}); err != nil {
			return fmt.Errorf("marks of run %d: %w: %w", id, ErrBadRecord, err)
		}
	}
	err := s.db.Update(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketRuns).Get(u64(id)) == nil {
			return fmt.Errorf("run %d: %w", id, ErrNotFound)
		}
		if data == nil {
			if b := tx.Bucket(bucketMeta).Bucket(metaMarks); b != nil {
				return b.Delete(u64(id))
			}
			return nil
		}
		b, err := tx.Bucket(bucketMeta).CreateBucketIfNotExists(metaMarks)
		if err != nil {
			return err
		}
		return b.Put(u64(id), data)
	})
	if err != nil {
		return writeError(fmt.Sprintf("store marks of run %d", id), err)
	}
	return nil
}

// Marks returns the stored user marks of run id in time order; an empty
// slice when there are none. A run that does not exist gives ErrNotFound.
func (s *Store) Marks(id uint64) (marks []estimate.Mark, err error) {
	defer guard(&err, fmt.Sprintf("read marks of run %d", id))()
	legacy := false
	err = s.db.View(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketRuns).Get(u64(id)) == nil {
			return fmt.Errorf("run %d: %w", id, ErrNotFound)
		}
		b := tx.Bucket(bucketMeta).Bucket(metaMarks)
		if b == nil {
			return nil
		}
		data := b.Get(u64(id))
		if data == nil {
			return nil
		}
		if len(data) > 0 && data[0] == '[' {
			legacy = true
			if err := json.Unmarshal(data, &marks); err != nil {
				return fmt.Errorf("marks of run %d: %w: %w", id, ErrCorrupt, err)
			}
			return nil
		}
		var rec marksRecord
		if err := json.Unmarshal(data, &rec); err != nil {
			return fmt.Errorf("marks of run %d: %w: %w", id, ErrCorrupt, err)
		}
		if rec.Clock != marksClockUTC {
			return fmt.Errorf("marks of run %d: %w: clock %q, want %q", id, ErrCorrupt, rec.Clock, marksClockUTC)
		}
		marks = rec.Marks
		return nil
	})
	if err == nil && legacy && len(marks) > 0 {
		// Device-clock marks of an older store: shift them onto the wall
		// clock the estimator now uses.
		c, cerr := s.RunClock(id)
		if cerr != nil {
			return nil, fmt.Errorf("marks of run %d are on the device clock and cannot be mapped to UTC: %w", id, cerr)
		}
		off := time.Duration(c.OffsetUs()) * time.Microsecond
		for i := range marks {
			marks[i].Start, marks[i].End = marks[i].Start.Add(off), marks[i].End.Add(off)
		}
	}
	if err == nil && marks == nil {
		marks = []estimate.Mark{}
	}
	return marks, err
}
