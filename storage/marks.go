package storage

import (
	"encoding/json"
	"fmt"

	bolt "go.etcd.io/bbolt"

	"liftyard/estimate"
)

// Marks (steady segments set by hand) live in the meta bucket, one value
// per run, so no new top-level bucket is needed:
//
//	meta/marks/<run id u64 BE>   JSON array of estimate.Mark, in time order
var metaMarks = []byte("marks")

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
		if data, err = json.Marshal(marks); err != nil {
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
		if err := json.Unmarshal(data, &marks); err != nil {
			return fmt.Errorf("marks of run %d: %w: %w", id, ErrCorrupt, err)
		}
		return nil
	})
	if err == nil && marks == nil {
		marks = []estimate.Mark{}
	}
	return marks, err
}
