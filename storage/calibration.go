package storage

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"unicode"

	bolt "go.etcd.io/bbolt"

	"liftyard/calibrate"
)

// Layout of the cal bucket (created by Open):
//
//	cal/rec/<id>                                  record as JSON
//	cal/idx/<channel>/<created ns, i64 key><seq>  id   (history, oldest → newest)
//	cal/run/<run id u64 BE>                       JSON array of the ids a run used
//
// seq is the cal bucket's NextSequence: records created in the same
// nanosecond keep their order of storing.
var (
	calRecords = []byte("rec")
	calIndex   = []byte("idx")
	calRuns    = []byte("run")
)

// maxCalIDLen bounds a calibration id (it appears in URLs and rig files).
const maxCalIDLen = 200

// PutCalibration stores a new calibration record and returns its id.
//
// When rec.ID is empty, the id is "<channel>-<YYYYMMDD>-<n>" with the UTC
// date of rec.Created and n the lowest number from 1 not yet used by that
// channel on that day. When rec.Created is zero, the store's clock sets it.
// Records are history: an id that is already stored is refused
// (ErrBadRecord), never overwritten. A record without a channel, with an
// id or channel that would not survive a URL or a rig file (empty, '/',
// spaces, control characters, longer than 200 bytes), or holding a
// non-finite number gives ErrBadRecord.
//
// Each call is one short write transaction: do not call it while a
// recording holds the store in another process (Open fails with ErrLocked
// then).
func (s *Store) PutCalibration(rec calibrate.Record) (string, error) {
	if err := checkCalName("channel", rec.Channel); err != nil {
		return "", fmt.Errorf("store calibration: %w", err)
	}
	if rec.ID != "" {
		if err := checkCalName("id", rec.ID); err != nil {
			return "", fmt.Errorf("store calibration: %w", err)
		}
	}
	if rec.Created.IsZero() {
		rec.Created = s.now()
	}
	var id string
	err := s.db.Update(func(tx *bolt.Tx) error {
		top := tx.Bucket(bucketCal)
		recs, err := top.CreateBucketIfNotExists(calRecords)
		if err != nil {
			return err
		}
		if rec.ID == "" {
			prefix := rec.Channel + "-" + rec.Created.UTC().Format("20060102") + "-"
			for n := 1; ; n++ {
				cand := prefix + strconv.Itoa(n)
				if recs.Get([]byte(cand)) == nil {
					rec.ID = cand
					break
				}
			}
		} else if recs.Get([]byte(rec.ID)) != nil {
			return fmt.Errorf("calibration %q is already stored (records are kept as history; leave the id empty for a new one): %w", rec.ID, ErrBadRecord)
		}
		data, err := json.Marshal(rec)
		if err != nil {
			return fmt.Errorf("calibration %q: %w: %w", rec.ID, ErrBadRecord, err)
		}
		seq, err := top.NextSequence()
		if err != nil {
			return err
		}
		idx, err := top.CreateBucketIfNotExists(calIndex)
		if err != nil {
			return err
		}
		chb, err := idx.CreateBucketIfNotExists([]byte(rec.Channel))
		if err != nil {
			return err
		}
		key := appendI64Key(make([]byte, 0, 16), rec.Created.UnixNano())
		key = binary.BigEndian.AppendUint64(key, seq)
		if err := chb.Put(key, []byte(rec.ID)); err != nil {
			return err
		}
		id = rec.ID
		return recs.Put([]byte(rec.ID), data)
	})
	if err != nil {
		return "", writeError("store calibration", err)
	}
	return id, nil
}

// checkCalName refuses ids and channel names that would break a URL path
// segment, a rig file string or the index key.
func checkCalName(what, v string) error {
	switch {
	case v == "":
		return fmt.Errorf("%s is empty: %w", what, ErrBadRecord)
	case len(v) > maxCalIDLen:
		return fmt.Errorf("%s is %d bytes long, at most %d: %w", what, len(v), maxCalIDLen, ErrBadRecord)
	case strings.ContainsFunc(v, func(r rune) bool { return r == '/' || r == '\\' || unicode.IsSpace(r) || !unicode.IsPrint(r) }):
		return fmt.Errorf("%s %q holds a '/', a space or a control character: %w", what, v, ErrBadRecord)
	}
	return nil
}

// decodeCal decodes a stored record; the key is the truth for its id.
func decodeCal(id string, data []byte) (calibrate.Record, error) {
	var rec calibrate.Record
	if err := json.Unmarshal(data, &rec); err != nil {
		return calibrate.Record{}, fmt.Errorf("calibration %q: %w: %w", id, ErrCorrupt, err)
	}
	rec.ID = id
	return rec, nil
}

// Calibration returns the stored calibration record with the given id, or
// an error wrapping ErrNotFound. A record that cannot be decoded gives
// ErrCorrupt.
func (s *Store) Calibration(id string) (rec calibrate.Record, err error) {
	defer guard(&err, fmt.Sprintf("read calibration %q", id))()
	err = s.db.View(func(tx *bolt.Tx) error {
		var data []byte
		if recs := tx.Bucket(bucketCal).Bucket(calRecords); recs != nil {
			data = recs.Get([]byte(id))
		}
		if data == nil {
			return fmt.Errorf("calibration %q: %w", id, ErrNotFound)
		}
		rec, err = decodeCal(id, data)
		return err
	})
	return rec, err
}

// Calibrations returns the calibration history of a channel, newest first
// (by Created, then by order of storing). An empty channel returns every
// channel's records in the same order. A channel without records gives an
// empty slice and no error.
func (s *Store) Calibrations(channel string) (recs []calibrate.Record, err error) {
	defer guard(&err, "read calibrations")()
	type entry struct{ key, id []byte }
	err = s.db.View(func(tx *bolt.Tx) error {
		top := tx.Bucket(bucketCal)
		idx, rb := top.Bucket(calIndex), top.Bucket(calRecords)
		if idx == nil || rb == nil {
			return nil
		}
		var entries []entry
		collect := func(b *bolt.Bucket) error {
			return b.ForEach(func(k, v []byte) error {
				entries = append(entries, entry{bytes.Clone(k), bytes.Clone(v)})
				return nil
			})
		}
		if channel != "" {
			if b := idx.Bucket([]byte(channel)); b != nil {
				if err := collect(b); err != nil {
					return err
				}
			}
		} else {
			err := idx.ForEachBucket(func(name []byte) error { return collect(idx.Bucket(name)) })
			if err != nil {
				return err
			}
		}
		slices.SortFunc(entries, func(a, b entry) int { return bytes.Compare(b.key, a.key) })
		for _, e := range entries {
			data := rb.Get(e.id)
			if data == nil {
				return fmt.Errorf("calibration index names %q, which is not stored: %w", e.id, ErrCorrupt)
			}
			rec, err := decodeCal(string(e.id), data)
			if err != nil {
				return err
			}
			recs = append(recs, rec)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	if recs == nil {
		recs = []calibrate.Record{}
	}
	return recs, nil
}

// SetRunCalibrations records which stored calibrations produced run id's
// values (calibrate.Calibrator.Stored), so every stored value can be traced
// to its calibration. It replaces an earlier list for the run. The run must
// exist (ErrNotFound otherwise).
func (s *Store) SetRunCalibrations(id uint64, ids []string) error {
	data, err := json.Marshal(slices.Clone(ids))
	if err != nil {
		return fmt.Errorf("run %d calibrations: %w: %w", id, ErrBadRecord, err)
	}
	err = s.db.Update(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketRuns).Get(u64(id)) == nil {
			return fmt.Errorf("run %d: %w", id, ErrNotFound)
		}
		b, err := tx.Bucket(bucketCal).CreateBucketIfNotExists(calRuns)
		if err != nil {
			return err
		}
		b.FillPercent = appendFill
		return b.Put(u64(id), data)
	})
	if err != nil {
		return writeError(fmt.Sprintf("store calibrations of run %d", id), err)
	}
	return nil
}

// RunCalibrations returns the ids of the stored calibrations that run id
// used, in the rig file's channel order; an empty slice when it used none
// (inline calibrations only) or was recorded before runs kept the list.
func (s *Store) RunCalibrations(id uint64) (ids []string, err error) {
	defer guard(&err, fmt.Sprintf("read calibrations of run %d", id))()
	err = s.db.View(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketRuns).Get(u64(id)) == nil {
			return fmt.Errorf("run %d: %w", id, ErrNotFound)
		}
		b := tx.Bucket(bucketCal).Bucket(calRuns)
		if b == nil {
			return nil
		}
		data := b.Get(u64(id))
		if data == nil {
			return nil
		}
		if err := json.Unmarshal(data, &ids); err != nil {
			return fmt.Errorf("calibrations of run %d: %w: %w", id, ErrCorrupt, err)
		}
		return nil
	})
	if ids == nil && err == nil {
		ids = []string{}
	}
	return ids, err
}
