package storage

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math/big"
	"strings"

	bolt "go.etcd.io/bbolt"
)

// Damage is one place of a store file that could not be read: a bucket
// whose pages bbolt could not walk from a key on (a damaged leaf or branch
// page), or a record that does not decode.
type Damage struct {
	// Path names the bucket, e.g. "raw/3/bal" (run ids in decimal).
	Path string
	// After is the last key read before the damage (hex), "" when the
	// bucket could not be read from its start.
	After string
	// Resumed is the first key read again after the damage (hex), "" when
	// nothing after it could be read.
	Resumed string
	// Records is how many records were found unreadable (values that do
	// not decode); 0 for a page that could not be walked, whose record
	// count is unknown.
	Records int
	// Reason is what went wrong.
	Reason string
}

func (d Damage) String() string {
	var where string
	switch {
	case d.After == "" && d.Resumed == "":
		where = "from its start to its end"
	case d.After == "":
		where = "before key " + d.Resumed
	case d.Resumed == "":
		where = "after key " + d.After
	default:
		where = "between keys " + d.After + " and " + d.Resumed
	}
	if d.Records > 0 {
		return fmt.Sprintf("%s: %d record(s) unreadable (%s)", d.Path, d.Records, d.Reason)
	}
	return fmt.Sprintf("%s: unreadable %s (%s)", d.Path, where, d.Reason)
}

// visit is called by walk for every readable key/value pair; path is the
// bucket path (top-level bucket name first, raw byte names). v is only
// valid during the call. seq is the bucket's sequence.
type visit func(path [][]byte, seq uint64, k, v []byte) error

// walk reads every bucket and key of tx, depth first, in key order. Where
// bbolt cannot read a page (it panics on a bad page type, faults past the
// mapped file), walk records the damage and probes for the next readable
// key further on, so one bad page costs the keys of that page, not the
// rest of the bucket. bad is called for each damage found; fn (nil: none)
// for each readable pair, and its error ends the walk.
func walk(tx *bolt.Tx, fn visit, bad func(Damage)) error {
	w := walker{fn: fn, bad: bad}
	var err error
	for _, name := range topBuckets {
		var b *bolt.Bucket
		if perr := protect(func() { b = tx.Bucket(name) }); perr != nil {
			bad(Damage{Path: string(name), Reason: perr.Error()})
			continue
		}
		if b == nil {
			bad(Damage{Path: string(name), Reason: "bucket missing"})
			continue
		}
		if err = w.bucket(b, [][]byte{name}); err != nil {
			return err
		}
	}
	return nil
}

type walker struct {
	fn  visit
	bad func(Damage)
}

// protect runs f and turns a bbolt panic or a memory fault into an error.
func protect(f func()) (err error) {
	defer guard(&err, "read page")()
	f()
	return nil
}

func (w *walker) bucket(b *bolt.Bucket, path [][]byte) error {
	var seq uint64
	if perr := protect(func() { seq = b.Sequence() }); perr != nil {
		w.bad(Damage{Path: showPath(path), Reason: perr.Error()})
		return nil
	}
	var (
		c    *bolt.Cursor
		k, v []byte
		last []byte
	)
	perr := protect(func() { c = b.Cursor(); k, v = c.First() })
	for {
		if perr != nil {
			d := Damage{Path: showPath(path), After: hexKey(last), Reason: perr.Error()}
			c, k, v = w.skip(b, last)
			d.Resumed = hexKey(k)
			w.bad(d)
			if k == nil {
				return nil
			}
		}
		if k == nil {
			return nil
		}
		if last != nil && bytes.Compare(k, last) <= 0 {
			// A damaged page can hand back keys out of order; stop here
			// rather than loop.
			w.bad(Damage{Path: showPath(path), After: hexKey(last), Reason: "keys out of order"})
			return nil
		}
		if v == nil { // a nested bucket
			var child *bolt.Bucket
			if err := protect(func() { child = b.Bucket(k) }); err != nil || child == nil {
				reason := "not a bucket"
				if err != nil {
					reason = err.Error()
				}
				w.bad(Damage{Path: showPath(append(path, k)), Reason: reason})
			} else if err := w.bucket(child, append(path[:len(path):len(path)], bytes.Clone(k))); err != nil {
				return err
			}
		} else if w.fn != nil {
			if err := w.fn(path, seq, k, v); err != nil {
				return err
			}
		}
		last = bytes.Clone(k)
		perr = protect(func() { k, v = c.Next() })
	}
}

// skip looks for the first readable key after last in b: it seeks to last
// plus growing steps (the key read as one big-endian number) until a seek
// succeeds, then bisects back to the smallest step that still succeeds,
// which lands on the first key of the next readable page. It returns a
// cursor placed on that key, or a nil key when nothing further can be read.
func (w *walker) skip(b *bolt.Bucket, last []byte) (*bolt.Cursor, []byte, []byte) {
	seek := func(key []byte) (c *bolt.Cursor, k, v []byte, ok bool) {
		err := protect(func() { c = b.Cursor(); k, v = c.Seek(key) })
		return c, k, v, err == nil
	}
	if last == nil {
		// The first page is unreadable: step from the smallest key of the
		// bucket's key length, which the last key tells when its page
		// reads (a probe of another length could not land on the first
		// key of the next page, and would skip the keys it prefixes), else
		// from the smallest 8-byte key.
		n := 8
		if err := protect(func() {
			if k, _ := b.Cursor().Last(); k != nil {
				n = len(k)
			}
		}); err != nil {
			n = 8
		}
		last = make([]byte, n)
	}
	bits := 8*len(last) + 1
	hi := -1
	for i := range bits {
		if _, _, _, ok := seek(addBig(last, new(big.Int).Lsh(big.NewInt(1), uint(i)))); ok {
			hi = i
			break
		}
	}
	if hi < 0 {
		return nil, nil, nil
	}
	// The step 2^hi reads; 2^(hi-1) did not. Bisect between them.
	lo := new(big.Int).Lsh(big.NewInt(1), uint(max(hi-1, 0)))
	up := new(big.Int).Lsh(big.NewInt(1), uint(hi))
	one := big.NewInt(1)
	for range bits {
		if new(big.Int).Sub(up, lo).Cmp(one) <= 0 {
			break
		}
		mid := new(big.Int).Add(lo, up)
		mid.Rsh(mid, 1)
		if _, _, _, ok := seek(addBig(last, mid)); ok {
			up = mid
		} else {
			lo = mid
		}
	}
	c, k, v, ok := seek(addBig(last, up))
	if !ok {
		return nil, nil, nil
	}
	return c, k, v
}

// addBig returns key + step, the key read as a big-endian number of its own
// length; past the largest such number, a key above every key of that
// length.
func addBig(key []byte, step *big.Int) []byte {
	n := new(big.Int).SetBytes(key)
	n.Add(n, step)
	if n.BitLen() > 8*len(key) {
		return bytes.Repeat([]byte{0xff}, len(key)+1)
	}
	return n.FillBytes(make([]byte, len(key)))
}

func hexKey(k []byte) string {
	if k == nil {
		return ""
	}
	return fmt.Sprintf("%x", k)
}

// showPath names a bucket path for a person: 8-byte names (run ids) in
// decimal, printable names as they are, others in hex.
func showPath(path [][]byte) string {
	parts := make([]string, len(path))
	for i, p := range path {
		switch {
		case len(p) == 8 && i > 0:
			parts[i] = fmt.Sprint(binary.BigEndian.Uint64(p))
		case printable(p):
			parts[i] = string(p)
		default:
			parts[i] = fmt.Sprintf("%x", p)
		}
	}
	return strings.Join(parts, "/")
}

func printable(p []byte) bool {
	if len(p) == 0 {
		return false
	}
	for _, c := range p {
		if c < 0x20 || c > 0x7e {
			return false
		}
	}
	return true
}

// Survey walks every bucket and key of the file (reading every branch and
// leaf page, not the values' contents) and returns the places it could not
// read. It is the quick structural check Open does before it lets anyone
// write to a file; Check is bbolt's full consistency check.
func (s *Store) Survey() (damage []Damage, err error) {
	defer guard(&err, "survey store "+s.path)()
	err = s.db.View(func(tx *bolt.Tx) error {
		return walk(tx, nil, func(d Damage) { damage = append(damage, d) })
	})
	return damage, err
}
