package storage

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Event is one entry in a run's log: a gap, drops, a reconnect, an alarm, a
// tare, a rejected block. Events are stored in time order.
type Event struct {
	T       time.Time `json:"t"`                // when it happened (host clock)
	Kind    string    `json:"kind"`             // short machine-readable kind, e.g. "gap", "reconnect"
	Source  string    `json:"source,omitempty"` // source it concerns; empty for the run as a whole
	Message string    `json:"message"`          // for people
}

// Event kinds written by this package. Other packages use their own.
const (
	// EventInterrupted is logged when Open finds a run still recording.
	EventInterrupted = "interrupted"
	// EventRejected is logged when the Writer refuses a block it cannot
	// store (series of different lengths, ...).
	EventRejected = "block_rejected"
)

// putEvent appends ev to run id's events. The key is the event time in Unix
// ns (order-preserving) then a 4-byte sequence number from the run's event
// bucket, so events at the same instant keep their order of arrival.
func putEvent(tx *bolt.Tx, id uint64, ev Event) error {
	top := tx.Bucket(bucketEvents)
	top.FillPercent = appendFill
	b, err := top.CreateBucketIfNotExists(u64(id))
	if err != nil {
		return err
	}
	b.FillPercent = appendFill
	seq, err := b.NextSequence()
	if err != nil {
		return err
	}
	ev.T = ev.T.UTC()
	data, err := json.Marshal(ev)
	if err != nil {
		return fmt.Errorf("event %q: %w: %w", ev.Kind, ErrBadRecord, err)
	}
	key := appendI64Key(make([]byte, 0, 12), ev.T.UnixNano())
	key = binary.BigEndian.AppendUint32(key, uint32(seq))
	return b.Put(key, data)
}

// Events returns the events of run id in time order. A run that does not
// exist gives ErrNotFound.
func (s *Store) Events(id uint64) (evs []Event, err error) {
	defer guard(&err, fmt.Sprintf("read events of run %d", id))()
	err = s.db.View(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketRuns).Get(u64(id)) == nil {
			return fmt.Errorf("run %d: %w", id, ErrNotFound)
		}
		b := tx.Bucket(bucketEvents).Bucket(u64(id))
		if b == nil {
			return nil
		}
		return b.ForEach(func(k, v []byte) error {
			var ev Event
			if err := json.Unmarshal(v, &ev); err != nil {
				return fmt.Errorf("run %d event key %x: %w: %w", id, k, ErrCorrupt, err)
			}
			evs = append(evs, ev)
			return nil
		})
	})
	return evs, err
}
