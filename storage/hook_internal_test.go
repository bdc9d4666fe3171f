package storage

import bolt "go.etcd.io/bbolt"

// SetFailHook makes every commit of w call f first and fail with its error
// (a full disk as far as the Writer can tell). Tests only.
func SetFailHook(w *Writer, f func() error) { w.failHook = f }

// RawRecordCount counts the stored records (not blocks) of one source of a
// run.
func RawRecordCount(s *Store, id uint64, source string) (n int, err error) {
	err = s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketRaw).Bucket(u64(id)).Bucket([]byte(source)).ForEach(func(_, _ []byte) error {
			n++
			return nil
		})
	})
	return n, err
}
