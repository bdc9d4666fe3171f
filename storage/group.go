package storage

import (
	"bytes"
	"fmt"
	"slices"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
)

// Small blocks are stored in groups (docs/storage.md §1): every record also
// costs its bbolt key and leaf element (32 bytes), a block header and a few
// bytes per channel, which a device sending one or a few samples at a time
// pays per block. So the writer appends each new block of a source to the
// source's last record while they have the same channels, the block comes
// after every block in it, and together they hold at most
// GroupReadings readings: the record becomes a group record (version
// 3) that keeps every block's header, so the blocks read back exactly as
// they came. A block that arrives late goes into its place: into the
// group whose span it falls in (rewritten as records that fit), so a
// source's blocks always read back in time order.
// A block is stored once: one with the key (device time, seq) of a block
// already stored is a duplicate and is left out.

// GroupReadings bounds the readings of a group record. Smaller groups cost
// more headers; larger ones lose more of each bbolt page (the last record
// of a source grows at every commit, and each split of a full page leaves
// two records behind): 1-sample blocks of 16 channels stored 3.02 bytes a
// reading with 512, 3.07 with 384, 3.14 with 256, 3.36 with 1,024 and 3.65
// with 2,048 (20 min at 100 Hz, BenchmarkStoreSize).
const GroupReadings = 512

// rawPutter encodes and puts the blocks of one commit into the source buckets
// of a run, grouping small ones. It holds each source's open group until
// flush.
type rawPutter struct {
	rb    *bolt.Bucket
	open  map[string]*openGroup
	order []string // sources with an open group, for a deterministic flush
	grown int      // bytes the records put add to the store (for its write rate)
}

// openGroup is the last record of a source as this commit will leave it.
type openGroup struct {
	sb       *bolt.Bucket
	key      []byte           // the record's key: its first block's
	blocks   []*acquire.Block // in key order
	keys     [][]byte         // each block's key
	readings int
	dirty    bool // to be written by flush
}

func newRawPutter(rb *bolt.Bucket) *rawPutter {
	return &rawPutter{rb: rb, open: map[string]*openGroup{}}
}

// put stores e unless it is a duplicate; it reports whether e was new.
func (p *rawPutter) put(e *toStore) (bool, error) {
	sb, err := p.rb.CreateBucketIfNotExists([]byte(e.source))
	if err != nil {
		return false, fmt.Errorf("source %q: %w", e.source, err)
	}
	sb.FillPercent = appendFill
	g, err := p.tail(e.source, sb)
	if err != nil {
		return false, err
	}
	readings := e.n * len(e.blk.Series)
	if g == nil || bytes.Compare(e.key, g.keys[len(g.keys)-1]) > 0 {
		// After everything stored for this source: join the last record,
		// or start a new one after it.
		if g != nil && g.readings+readings <= GroupReadings && e.n > 0 && sameLayout(g.blocks[0], e.blk) {
			g.blocks = append(g.blocks, e.blk)
			g.keys = append(g.keys, e.key)
			g.readings += readings
			g.dirty = true
			return true, nil
		}
		if err := p.write(g); err != nil {
			return false, err
		}
		if g == nil {
			p.order = append(p.order, e.source)
		}
		p.open[e.source] = newOpenGroup(sb, []*acquire.Block{e.blk})
		return true, nil
	}
	if bytes.Compare(e.key, g.key) >= 0 {
		// Within the last record's span: a duplicate, or a late block
		// that goes in its place.
		i, found := slices.BinarySearchFunc(g.keys, e.key, bytes.Compare)
		if found {
			return false, nil
		}
		g.blocks = slices.Insert(g.blocks, i, e.blk)
		g.keys = slices.Insert(g.keys, i, e.key)
		g.readings += readings
		g.dirty = true
		if g.readings <= GroupReadings && sameLayout(g.blocks[0], e.blk) {
			return true, nil
		}
		// Too many readings, or other channels, for one record now:
		// rewrite it as records that fit; the last stays open.
		recs := fitRecords(g.blocks)
		for _, r := range recs[:len(recs)-1] {
			if err := p.putRecord(sb, r); err != nil {
				return false, err
			}
		}
		last := recs[len(recs)-1]
		p.open[e.source] = newOpenGroup(sb, last)
		return true, nil
	}
	// Before the last record: a late block for an older record.
	return p.late(sb, e)
}

// late stores e, a block whose key is below its source's last record: it
// is left out when a stored block has its key; inside a group's span, the
// group is rewritten with e in its place (as records that fit); else e is
// put as a record of its own.
func (p *rawPutter) late(sb *bolt.Bucket, e *toStore) (bool, error) {
	c := sb.Cursor()
	k, _ := c.Seek(e.key)
	if k != nil && bytes.Equal(k, e.key) {
		return false, nil
	}
	var v []byte
	if k == nil {
		k, v = c.Last()
	} else {
		k, v = c.Prev()
	}
	if k != nil && len(v) > 0 && v[0] == blockGroup {
		stored, err := decodeRecord(v)
		if err != nil {
			return false, fmt.Errorf("source %q: record %x: %w", e.source, k, err)
		}
		blocks := make([]*acquire.Block, len(stored))
		keys := make([][]byte, len(stored))
		for i := range stored {
			blocks[i], keys[i] = &stored[i], blockKey(nil, &stored[i])
		}
		i, found := slices.BinarySearchFunc(keys, e.key, bytes.Compare)
		if found {
			return false, nil
		}
		if i < len(keys) { // inside the group
			blocks = slices.Insert(blocks, i, e.blk)
			for _, r := range fitRecords(blocks) {
				if err := p.putRecord(sb, r); err != nil { // the first replaces the group
					return false, err
				}
			}
			return true, nil
		}
	}
	return true, p.putRecord(sb, []*acquire.Block{e.blk})
}

// fitRecords cuts blocks (in key order) into runs that one record can
// hold: the same channels, at most GroupReadings readings (a block
// alone may hold more).
func fitRecords(blocks []*acquire.Block) [][]*acquire.Block {
	var out [][]*acquire.Block
	start, readings := 0, 0
	for i, b := range blocks {
		r := b.Len() * len(b.Series)
		if i > start && (readings+r > GroupReadings || !sameLayout(blocks[start], b)) {
			out = append(out, blocks[start:i:i])
			start, readings = i, 0
		}
		readings += r
	}
	return append(out, blocks[start:])
}

// putRecord puts blocks as one record under the first one's key: the
// block's own record (version 2) for one, a group record for more.
func (p *rawPutter) putRecord(sb *bolt.Bucket, blocks []*acquire.Block) error {
	var val []byte
	if len(blocks) == 1 {
		var err error
		if val, err = encodeBlock(nil, blocks[0]); err != nil {
			return err
		}
	} else {
		val = encodeGroup(nil, blocks)
	}
	key := blockKey(nil, blocks[0])
	p.grown += len(val) - len(sb.Get(key))
	return sb.Put(key, val)
}

// newOpenGroup is a changed open group of blocks (in key order).
func newOpenGroup(sb *bolt.Bucket, blocks []*acquire.Block) *openGroup {
	g := &openGroup{sb: sb, blocks: blocks, dirty: true}
	for _, b := range blocks {
		g.keys = append(g.keys, blockKey(nil, b))
		g.readings += b.Len() * len(b.Series)
	}
	g.key = g.keys[0]
	return g
}

// tail returns the open group of source, made from the last record of its
// bucket the first time (nil when the bucket is empty).
func (p *rawPutter) tail(source string, sb *bolt.Bucket) (*openGroup, error) {
	if g, ok := p.open[source]; ok {
		return g, nil
	}
	k, v := sb.Cursor().Last()
	if k == nil {
		return nil, nil
	}
	blocks, err := decodeRecord(v)
	if err != nil {
		return nil, fmt.Errorf("source %q: last record %x: %w", source, k, err)
	}
	g := &openGroup{sb: sb, key: bytes.Clone(k)}
	for i := range blocks {
		b := &blocks[i]
		g.blocks = append(g.blocks, b)
		g.keys = append(g.keys, blockKey(nil, b))
		g.readings += b.Len() * len(b.Series)
	}
	if v[0] == blockV1 {
		g.readings = GroupReadings + 1 // an old record is never rewritten: nothing joins it
	}
	p.open[source] = g
	p.order = append(p.order, source)
	return g, nil
}

// write puts g when it changed.
func (p *rawPutter) write(g *openGroup) error {
	if g == nil || !g.dirty {
		return nil
	}
	g.dirty = false
	return p.putRecord(g.sb, g.blocks)
}

// flush writes every open group that changed.
func (p *rawPutter) flush() error {
	for _, src := range p.order {
		if err := p.write(p.open[src]); err != nil {
			return err
		}
	}
	return nil
}
