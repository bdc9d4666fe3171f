package storage

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
	"liftyard/calibrate"
)

// runRecord is how a Run is stored: Run's own JSON plus the rig file, which
// Run keeps out of its JSON (it is long and the API does not need it).
type runRecord struct {
	Run
	RigTOML string `json:"rig_toml,omitempty"`
}

func encodeRun(r Run) ([]byte, error) {
	return json.Marshal(runRecord{Run: r, RigTOML: r.RigTOML})
}

func decodeRun(id uint64, data []byte) (Run, error) {
	var rec runRecord
	if err := json.Unmarshal(data, &rec); err != nil {
		return Run{}, fmt.Errorf("run %d: %w: %w", id, ErrCorrupt, err)
	}
	r := rec.Run
	r.RigTOML = rec.RigTOML
	r.ID = id // the key is the truth
	return r, nil
}

// getRun reads run id inside tx.
func getRun(tx *bolt.Tx, id uint64) (Run, error) {
	data := tx.Bucket(bucketRuns).Get(u64(id))
	if data == nil {
		return Run{}, fmt.Errorf("run %d: %w", id, ErrNotFound)
	}
	return decodeRun(id, data)
}

// putRun writes r under r.ID inside tx.
func putRun(tx *bolt.Tx, r Run) error {
	data, err := encodeRun(r)
	if err != nil {
		return fmt.Errorf("run %d: %w: %w", r.ID, ErrBadRecord, err)
	}
	b := tx.Bucket(bucketRuns)
	b.FillPercent = appendFill
	return b.Put(u64(r.ID), data)
}

// CreateRun stores r as a new run and returns its id. The id comes from the
// runs bucket's sequence (1, 2, ...) in the same transaction, so a failed
// create uses no id. The new run has StatusRecording, zero Samples and
// Segments, and Started = r.Started, or the store's clock when r.Started is
// zero. r.ID is ignored.
func (s *Store) CreateRun(r Run) (uint64, error) {
	if math.IsNaN(r.AreaM2) || math.IsInf(r.AreaM2, 0) {
		return 0, fmt.Errorf("create run: area_m2 is %v: %w", r.AreaM2, ErrBadRecord)
	}
	if r.Started.IsZero() {
		r.Started = s.now()
	}
	r.Status = StatusRecording
	r.Samples, r.Segments = 0, 0
	r.Ended = time.Time{}
	var id uint64
	err := s.db.Update(func(tx *bolt.Tx) error {
		seq, err := tx.Bucket(bucketRuns).NextSequence()
		if err != nil {
			return err
		}
		r.ID = seq
		id = seq
		return putRun(tx, r)
	})
	if err != nil {
		return 0, writeError("create run", err)
	}
	return id, nil
}

// FinishRun records the end of run id: its end time, its final status
// (StatusComplete or StatusInterrupted) and the health counters of its
// sources. Samples and Segments are kept as the Writer left them.
func (s *Store) FinishRun(id uint64, ended time.Time, status Status, sources []acquire.HealthSnapshot) error {
	if status != StatusComplete && status != StatusInterrupted {
		return fmt.Errorf("finish run %d: status %q (want %q or %q): %w",
			id, status, StatusComplete, StatusInterrupted, ErrBadRecord)
	}
	err := s.db.Update(func(tx *bolt.Tx) error {
		r, err := getRun(tx, id)
		if err != nil {
			return err
		}
		r.Ended = ended
		r.Status = status
		r.Sources = sources
		return putRun(tx, r)
	})
	if err != nil {
		return writeError(fmt.Sprintf("finish run %d", id), err)
	}
	return nil
}

// SetRunChannels stores the channels' health and loads at the end of a run
// (rates, missing and saturated samples, the largest load against capacity),
// so a finished run still shows how its inputs behaved.
func (s *Store) SetRunChannels(id uint64, channels []acquire.ChannelHealth, loads []calibrate.LoadHealth) error {
	err := s.db.Update(func(tx *bolt.Tx) error {
		r, err := getRun(tx, id)
		if err != nil {
			return err
		}
		r.Channels, r.Loads = channels, loads
		return putRun(tx, r)
	})
	if err != nil {
		return writeError(fmt.Sprintf("store channel health of run %d", id), err)
	}
	return nil
}

// Run returns run id, or an error wrapping ErrNotFound.
func (s *Store) Run(id uint64) (r Run, err error) {
	defer guard(&err, fmt.Sprintf("read run %d", id))()
	err = s.db.View(func(tx *bolt.Tx) error {
		r, err = getRun(tx, id)
		return err
	})
	return s.seen(r), err
}

// seen is r as this store can tell it: a store opened read-only holds a
// shared lock that no recorder can hold at the same time (bbolt's flock),
// so a run it finds "recording" was cut off by a crash or a kill before it
// could be finished, and it is shown as interrupted. The file is not
// changed; the next read-write Open marks it (recover).
func (s *Store) seen(r Run) Run {
	if s.readOnly && r.Status == StatusRecording {
		r.Status = StatusInterrupted
	}
	return r
}

// Runs returns every run, newest first.
func (s *Store) Runs() (runs []Run, err error) {
	defer guard(&err, "list runs")()
	err = s.db.View(func(tx *bolt.Tx) error {
		c := tx.Bucket(bucketRuns).Cursor()
		for k, v := c.Last(); k != nil; k, v = c.Prev() {
			if len(k) != 8 {
				return fmt.Errorf("run key %x: %w", k, ErrCorrupt)
			}
			r, err := decodeRun(binary.BigEndian.Uint64(k), v)
			if err != nil {
				return err
			}
			runs = append(runs, s.seen(r))
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("list runs: %w", err)
	}
	return runs, nil
}

// LatestRun returns the run with the highest id, or an error wrapping
// ErrNotFound when the store holds no run.
func (s *Store) LatestRun() (r Run, err error) {
	defer guard(&err, "read latest run")()
	err = s.db.View(func(tx *bolt.Tx) error {
		k, v := tx.Bucket(bucketRuns).Cursor().Last()
		if k == nil {
			return fmt.Errorf("latest run: the store holds no run yet: %w", ErrNotFound)
		}
		if len(k) != 8 {
			return fmt.Errorf("run key %x: %w", k, ErrCorrupt)
		}
		r, err = decodeRun(binary.BigEndian.Uint64(k), v)
		return err
	})
	return s.seen(r), err
}

// ResolveRun turns a run reference given by a user into a run id: a decimal
// id ("17") or "latest". The run must exist (ErrNotFound otherwise); any
// other reference gives an error wrapping ErrBadRef that names it.
func (s *Store) ResolveRun(ref string) (uint64, error) {
	ref = strings.TrimSpace(ref)
	if ref == "latest" {
		r, err := s.LatestRun()
		if err != nil {
			return 0, err
		}
		return r.ID, nil
	}
	id, err := strconv.ParseUint(ref, 10, 64)
	if err != nil || id == 0 {
		return 0, fmt.Errorf("run %q is neither a run id (1, 2, ...) nor \"latest\": %w", ref, ErrBadRef)
	}
	if _, err := s.Run(id); err != nil {
		return 0, err
	}
	return id, nil
}

// recover marks every run still in StatusRecording as StatusInterrupted. Its
// end time becomes the host time of its last stored block (zero when it
// stored none), and an event records what happened.
func (s *Store) recover() (err error) {
	defer guard(&err, "recover runs in "+s.path)()
	err = s.db.Update(func(tx *bolt.Tx) error {
		var stale []Run
		err := tx.Bucket(bucketRuns).ForEach(func(k, v []byte) error {
			if len(k) != 8 {
				return fmt.Errorf("run key %x: %w", k, ErrCorrupt)
			}
			r, err := decodeRun(binary.BigEndian.Uint64(k), v)
			if err != nil {
				return err
			}
			if r.Status == StatusRecording {
				stale = append(stale, r)
			}
			return nil
		})
		if err != nil {
			return err
		}
		for _, r := range stale {
			r.Status = StatusInterrupted
			if r.Ended.IsZero() {
				r.Ended = lastReceived(tx, r.ID)
			}
			if err := putRun(tx, r); err != nil {
				return err
			}
			ev := Event{
				T:       s.now(),
				Kind:    EventInterrupted,
				Message: "run was still recording when the store was opened again (the recorder stopped without closing it); marked interrupted, data up to the last commit kept",
			}
			if err := putEvent(tx, r.ID, ev); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return writeError("mark interrupted runs in "+s.path, err)
	}
	return nil
}

// lastReceived returns the latest host receive time among the last blocks
// of each source of run id, or the zero time.
func lastReceived(tx *bolt.Tx, id uint64) time.Time {
	var last time.Time
	rb := tx.Bucket(bucketRaw).Bucket(u64(id))
	if rb == nil {
		return last
	}
	_ = rb.ForEachBucket(func(name []byte) error {
		sb := rb.Bucket(name)
		_, v := sb.Cursor().Last()
		if v == nil {
			return nil
		}
		if blocks, err := decodeRecord(v); err == nil && blocks[len(blocks)-1].Received.After(last) {
			last = blocks[len(blocks)-1].Received
		}
		return nil
	})
	return last
}
