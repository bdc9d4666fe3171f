package storage

import (
	"bytes"
	"fmt"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
)

// readChunk is how many blocks one read transaction returns. A long-lived
// read transaction stalls the writer when the file must be re-mapped and
// keeps freed pages from reuse, so readers take short bites (a few hundred
// kilobytes at most) and let go between them.
const readChunk = 64

// RawBlocks calls fn with every stored block of run id: source by source in
// name order, and within a source in device time order (t0_us, then seq).
// Blocks are read in short read transactions of a few dozen blocks each and
// fn runs outside any transaction, so fn may take its time and may keep the
// block (it is a copy). An error from fn stops the walk and is returned.
// A run that does not exist gives ErrNotFound; a record that does not decode
// gives ErrCorrupt.
func (s *Store) RawBlocks(id uint64, fn func(acquire.Block) error) error {
	sources, err := s.rawSources(id)
	if err != nil {
		return err
	}
	for _, src := range sources {
		if err := s.sourceBlocks(id, src, func(b *acquire.Block) error { return fn(*b) }); err != nil {
			return err
		}
	}
	return nil
}

// sourceBlocks calls fn with each block of source src of run id, in time
// order, as RawBlocks does (fn may keep the block).
func (s *Store) sourceBlocks(id uint64, src string, fn func(*acquire.Block) error) error {
	it := s.newBlockIter(id, src)
	for {
		b, ok, err := it.next()
		if err != nil || !ok {
			return err
		}
		if err := fn(&b); err != nil {
			return err
		}
	}
}

// RawSources returns the names of the sources that stored blocks in run id,
// in name order.
func (s *Store) RawSources(id uint64) ([]string, error) { return s.rawSources(id) }

func (s *Store) rawSources(id uint64) (names []string, err error) {
	defer guard(&err, fmt.Sprintf("read raw blocks of run %d", id))()
	err = s.db.View(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketRuns).Get(u64(id)) == nil {
			return fmt.Errorf("run %d: %w", id, ErrNotFound)
		}
		rb := tx.Bucket(bucketRaw).Bucket(u64(id))
		if rb == nil {
			return nil
		}
		return rb.ForEachBucket(func(k []byte) error {
			names = append(names, string(k))
			return nil
		})
	})
	return names, err
}

// blockIter walks one source's blocks in chunks, one short read transaction
// per chunk, resuming after the last key it returned.
type blockIter struct {
	s       *Store
	runID   uint64
	source  string
	lastKey []byte // copy of the last key read, nil before the first chunk
	buf     []acquire.Block
	done    bool
}

func (s *Store) newBlockIter(runID uint64, source string) *blockIter {
	return &blockIter{s: s, runID: runID, source: source}
}

// next returns the next block, or ok false at the end.
func (it *blockIter) next() (acquire.Block, bool, error) {
	if len(it.buf) == 0 {
		if it.done {
			return acquire.Block{}, false, nil
		}
		if err := it.fill(); err != nil {
			return acquire.Block{}, false, err
		}
		if len(it.buf) == 0 {
			return acquire.Block{}, false, nil
		}
	}
	b := it.buf[0]
	it.buf[0] = acquire.Block{}
	it.buf = it.buf[1:]
	return b, true, nil
}

func (it *blockIter) fill() (err error) {
	defer guard(&err, fmt.Sprintf("read raw blocks of run %d source %q", it.runID, it.source))()
	it.buf = it.buf[:0:0]
	return it.s.db.View(func(tx *bolt.Tx) error {
		rb := tx.Bucket(bucketRaw).Bucket(u64(it.runID))
		var sb *bolt.Bucket
		if rb != nil {
			sb = rb.Bucket([]byte(it.source))
		}
		if sb == nil {
			it.done = true
			return nil
		}
		c := sb.Cursor()
		var k, v []byte
		if it.lastKey == nil {
			k, v = c.First()
		} else {
			k, v = c.Seek(it.lastKey)
			if k != nil && bytes.Equal(k, it.lastKey) {
				k, v = c.Next()
			}
		}
		for ; k != nil && len(it.buf) < readChunk; k, v = c.Next() {
			blocks, err := decodeRecord(v)
			if err != nil {
				return fmt.Errorf("run %d source %q key %x: %w", it.runID, it.source, k, err)
			}
			for i := range blocks {
				blocks[i].Source = it.source
			}
			it.buf = append(it.buf, blocks...)
			it.lastKey = bytes.Clone(k)
		}
		if k == nil {
			it.done = true
		}
		return nil
	})
}
