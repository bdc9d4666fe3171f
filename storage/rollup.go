package storage

import (
	"encoding/binary"
	"fmt"
	"math"
	"slices"
	"sort"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
)

// RollupWidths are the bin widths of a run's trend rollups: the minimum,
// maximum and mean of every channel over each bin of device time, kept
// with the run as its blocks are committed so that a timeline of any
// length reads a few thousand bins instead of every reading
// (docs/storage.md §4). Finest first, each ten times the one before.
var RollupWidths = []time.Duration{time.Second, 10 * time.Second, 100 * time.Second}

// RollupMinSamples is the fewest sample times a bin of a level must hold
// for the writer to keep that level of a source: below it (a 100 Hz tap
// scanner's 1 s bins hold 100) the bins would cost about a third of a byte
// per reading, as much as the readings' own headers, and RunRollups works
// the level out from the raw blocks when it is asked for.
const RollupMinSamples = 1000

// bucketRollup holds rollup/<run id>/<source>/<level u8, bin start key>.
// It is created by the first commit that stores a rollup: stores written
// before rollups existed do not have it (RunRollups then computes them from
// the raw blocks).
var bucketRollup = []byte("rollup")

// rollupVersion is the first byte of a stored bin.
const rollupVersion = 1

// RollupChannel is one channel's summary over a bin: the finite raw
// readings' count, least, greatest and sum, in the instrument's own units
// (NaN and ±Inf are not counted).
type RollupChannel struct {
	Channel        string
	N              int
	RawMin, RawMax float64
	sum            float64 // of the finite readings: RawMean is sum/N
}

// RawMean returns the mean of the finite readings, or NaN for a bin
// without one.
func (c RollupChannel) RawMean() float64 {
	if c.N == 0 {
		return math.NaN()
	}
	return c.sum / float64(c.N)
}

// RollupBin is one bin of one source's rollup.
type RollupBin struct {
	T0Us    int64 // start of the bin, device time µs (a multiple of the width)
	Samples int   // sample times in the bin
	// OffsetUs is the least (receive time − device time of the block's last
	// sample) over the bin's blocks, µs: what the pipeline's clock
	// alignment needs. HasOffset is false when no block had a receive time.
	OffsetUs  int64
	HasOffset bool
	Channels  []RollupChannel
}

// merge adds o (a bin of the same source and time) into b.
func (b *RollupBin) merge(o *RollupBin) {
	b.Samples += o.Samples
	if o.HasOffset && (!b.HasOffset || o.OffsetUs < b.OffsetUs) {
		b.OffsetUs, b.HasOffset = o.OffsetUs, true
	}
	for _, oc := range o.Channels {
		i := 0
		for i < len(b.Channels) && b.Channels[i].Channel != oc.Channel {
			i++
		}
		if i == len(b.Channels) {
			b.Channels = append(b.Channels, RollupChannel{Channel: oc.Channel, RawMin: math.Inf(1), RawMax: math.Inf(-1)})
		}
		c := &b.Channels[i]
		c.N += oc.N
		c.sum += oc.sum
		c.RawMin = math.Min(c.RawMin, oc.RawMin)
		c.RawMax = math.Max(c.RawMax, oc.RawMax)
	}
}

func encodeRollupBin(b *RollupBin) []byte {
	dst := []byte{rollupVersion}
	dst = binary.AppendUvarint(dst, uint64(b.Samples))
	if b.HasOffset {
		dst = append(dst, 1)
		dst = binary.AppendVarint(dst, b.OffsetUs)
	} else {
		dst = append(dst, 0)
	}
	dst = binary.AppendUvarint(dst, uint64(len(b.Channels)))
	for _, c := range b.Channels {
		dst = binary.AppendUvarint(dst, uint64(len(c.Channel)))
		dst = append(dst, c.Channel...)
		dst = binary.AppendUvarint(dst, uint64(c.N))
		for _, v := range [3]float64{c.RawMin, c.RawMax, c.sum} {
			dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(v))
		}
	}
	return dst
}

func decodeRollupBin(data []byte, b *RollupBin) error { return decodeRollupBinAfter(data, b, nil) }

// decodeRollupBinAfter decodes data into b, reusing the channel name
// strings of prev (the bin before, or nil) where they are the same: a
// run's bins repeat their channels, and an hour at 1 s is 3,600 bins.
func decodeRollupBinAfter(data []byte, b *RollupBin, prev *RollupBin) error {
	bad := func(what string) error {
		return fmt.Errorf("rollup bin of %d bytes: %s: %w", len(data), what, ErrCorrupt)
	}
	if len(data) < 1 || data[0] != rollupVersion {
		return bad("unknown version")
	}
	rest := data[1:]
	uv := func() (uint64, bool) {
		u, m := binary.Uvarint(rest)
		if m <= 0 {
			return 0, false
		}
		rest = rest[m:]
		return u, true
	}
	n, ok := uv()
	if !ok || len(rest) < 1 || n > math.MaxInt32 {
		return bad("header cut short")
	}
	b.Samples = int(n)
	b.HasOffset = rest[0] == 1
	rest = rest[1:]
	if b.HasOffset {
		v, m := binary.Varint(rest)
		if m <= 0 {
			return bad("offset cut short")
		}
		b.OffsetUs = v
		rest = rest[m:]
	}
	nch, ok := uv()
	if !ok || nch > uint64(len(rest)) {
		return bad("channel count")
	}
	b.Channels = make([]RollupChannel, nch)
	for i := range b.Channels {
		l, ok := uv()
		if !ok || l > uint64(len(rest)) {
			return bad("channel name cut short")
		}
		var name string
		if prev != nil && i < len(prev.Channels) && prev.Channels[i].Channel == string(rest[:l]) {
			name = prev.Channels[i].Channel // the comparison does not allocate
		} else {
			name = string(rest[:l])
		}
		rest = rest[l:]
		cnt, ok := uv()
		if !ok || len(rest) < 24 || cnt > math.MaxInt32 {
			return bad("channel summary cut short")
		}
		b.Channels[i] = RollupChannel{Channel: name, N: int(cnt),
			RawMin: math.Float64frombits(binary.BigEndian.Uint64(rest)),
			RawMax: math.Float64frombits(binary.BigEndian.Uint64(rest[8:])),
			sum:    math.Float64frombits(binary.BigEndian.Uint64(rest[16:]))}
		rest = rest[24:]
	}
	if len(rest) != 0 {
		return bad("trailing bytes")
	}
	return nil
}

// rollupKey is level (u8) then the bin start as an order-preserving key.
func rollupKey(level int, t0Us int64) []byte {
	return appendI64Key([]byte{byte(level)}, t0Us)
}

func floorDiv(a, b int64) int64 {
	q := a / b
	if (a%b != 0) && ((a < 0) != (b < 0)) {
		q--
	}
	return q
}

// rollupSet collects bins by source, level and start.
type rollupSet map[string]map[int]map[int64]*RollupBin

func (rs rollupSet) bin(source string, level int, t0 int64) *RollupBin {
	bySrc := rs[source]
	if bySrc == nil {
		bySrc = map[int]map[int64]*RollupBin{}
		rs[source] = bySrc
	}
	byLevel := bySrc[level]
	if byLevel == nil {
		byLevel = map[int64]*RollupBin{}
		bySrc[level] = byLevel
	}
	b := byLevel[t0]
	if b == nil {
		b = &RollupBin{T0Us: t0}
		byLevel[t0] = b
	}
	return b
}

// add summarises blk into the bins of every level.
func (rs rollupSet) add(blk *acquire.Block) { rs.addLevel(blk, -1) }

// addLevel summarises blk at the finest width and merges the parts into the
// bins of level only (every level when only < 0).
func (rs rollupSet) addLevel(blk *acquire.Block, only int) {
	n := blk.Len()
	if n == 0 || blk.DtUs <= 0 && n > 1 {
		return
	}
	w0 := RollupWidths[0].Microseconds()
	var offset int64
	hasOffset := !blk.Received.IsZero()
	if hasOffset {
		offset = blk.Received.UnixMicro() - (blk.T0Us + int64(n-1)*blk.DtUs)
	}
	// The block's samples, bin by bin at the finest width.
	for i := 0; i < n; {
		t := blk.T0Us + int64(i)*blk.DtUs
		start := floorDiv(t, w0) * w0
		j := i + 1
		for j < n && blk.T0Us+int64(j)*blk.DtUs < start+w0 {
			j++
		}
		part := RollupBin{T0Us: start, Samples: j - i, OffsetUs: offset, HasOffset: hasOffset,
			Channels: make([]RollupChannel, len(blk.Series))}
		for c, s := range blk.Series {
			rc := RollupChannel{Channel: s.Channel, RawMin: math.Inf(1), RawMax: math.Inf(-1)}
			for _, v := range s.Raw[i:j] {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					continue
				}
				rc.N++
				rc.sum += v
				rc.RawMin = math.Min(rc.RawMin, v)
				rc.RawMax = math.Max(rc.RawMax, v)
			}
			part.Channels[c] = rc
		}
		for level, w := range RollupWidths {
			if only >= 0 && level != only {
				continue
			}
			wu := w.Microseconds()
			if only < 0 && blk.DtUs > 0 && wu/blk.DtUs < RollupMinSamples {
				// Too few samples to a bin to be worth keeping (a slow
				// source's finest level): RunRollups works it out from
				// the raw blocks when it is asked for.
				continue
			}
			rs.bin(blk.Source, level, floorDiv(start, wu)*wu).merge(&part)
		}
		i = j
	}
}

// putRollups merges rs into the run's stored bins, in tx. hadBlocks says
// the run had blocks before this commit: when it has them but no rollups
// (blocks stored by a liftyard of before rollups), it gets none now either,
// so that RunRollups computes them from all its blocks rather than
// returning the new blocks' only.
func putRollups(tx *bolt.Tx, runID uint64, rs rollupSet, hadBlocks bool) error {
	if len(rs) == 0 {
		return nil
	}
	top := tx.Bucket(bucketRollup)
	if hadBlocks && (top == nil || top.Bucket(u64(runID)) == nil) {
		return nil
	}
	top, err := tx.CreateBucketIfNotExists(bucketRollup)
	if err != nil {
		return err
	}
	rb, err := top.CreateBucketIfNotExists(u64(runID))
	if err != nil {
		return err
	}
	rb.FillPercent = appendFill
	for src, levels := range rs {
		sb, err := rb.CreateBucketIfNotExists([]byte(src))
		if err != nil {
			return fmt.Errorf("rollup of source %q: %w", src, err)
		}
		sb.FillPercent = appendFill
		for level, bins := range levels {
			for t0, b := range bins {
				k := rollupKey(level, t0)
				if old := sb.Get(k); old != nil {
					var prev RollupBin
					if err := decodeRollupBin(old, &prev); err == nil {
						prev.merge(b)
						b = &prev
					}
				}
				if err := sb.Put(k, encodeRollupBin(b)); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

// RunRollups returns run id's rollup of the given level (an index into
// RollupWidths) for every source that stored blocks: bins in time order.
// stored is false when the run has no stored rollups (a store written
// before rollups existed, or a run with no blocks yet): the bins are then
// computed from the raw blocks, which reads every block of the run. A
// source whose stored level is not whole (RollupMinSamples, a rate
// change) has it computed from its own raw blocks, stored still true.
func (s *Store) RunRollups(id uint64, level int) (bins map[string][]RollupBin, stored bool, err error) {
	if level < 0 || level >= len(RollupWidths) {
		return nil, false, fmt.Errorf("rollup level %d: give 0 to %d", level, len(RollupWidths)-1)
	}
	defer guard(&err, fmt.Sprintf("read rollups of run %d", id))()
	bins = map[string][]RollupBin{}
	err = s.db.View(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketRuns).Get(u64(id)) == nil {
			return fmt.Errorf("run %d: %w", id, ErrNotFound)
		}
		top := tx.Bucket(bucketRollup)
		if top == nil {
			return nil
		}
		rb := top.Bucket(u64(id))
		if rb == nil {
			return nil
		}
		stored = true
		return rb.ForEachBucket(func(src []byte) error {
			c := rb.Bucket(src).Cursor()
			var list []RollupBin
			var samples [8]int // per level: the stored bins' sample times
			for k, v := c.First(); k != nil; k, v = c.Next() {
				if len(k) < 1 || int(k[0]) >= len(samples) {
					continue
				}
				if int(k[0]) != level {
					if len(v) > 1 {
						if n, m := binary.Uvarint(v[1:]); m > 0 {
							samples[k[0]] += int(n)
						}
					}
					continue
				}
				var b RollupBin
				var prev *RollupBin
				if len(list) > 0 {
					prev = &list[len(list)-1]
				}
				if err := decodeRollupBinAfter(v, &b, prev); err != nil {
					return fmt.Errorf("run %d source %q key %x: %w", id, src, k, err)
				}
				b.T0Us = i64FromKey(k[1:])
				samples[level] += b.Samples
				list = append(list, b)
			}
			// A level the writer did not keep for this source (too few
			// samples to a bin), or kept for part of the run only (its
			// rate changed), holds fewer sample times than another level.
			if samples[level] < slices.Max(samples[:]) {
				return nil // worked out from the raw blocks below
			}
			bins[string(src)] = list
			return nil
		})
	})
	if err != nil {
		return nil, stored, err
	}
	// A source without this level stored whole — every source of a run
	// stored before rollups existed, a slow source, a level kept for part
	// of the run only — has it worked out from its raw blocks (this level
	// only: the finest level of a long run would be large).
	srcs, err := s.rawSources(id)
	if err != nil {
		return nil, stored, err
	}
	for _, src := range srcs {
		if _, ok := bins[src]; ok {
			continue
		}
		if bins[src], err = s.rollupFromRaw(id, src, level); err != nil {
			return nil, stored, err
		}
	}
	return bins, stored, nil
}

// rollupFromRaw works out one level of source src's rollup of run id from
// its raw blocks, in time order.
func (s *Store) rollupFromRaw(id uint64, src string, level int) ([]RollupBin, error) {
	rs := rollupSet{}
	if err := s.sourceBlocks(id, src, func(b *acquire.Block) error { rs.addLevel(b, level); return nil }); err != nil {
		return nil, err
	}
	list := make([]RollupBin, 0, len(rs[src][level]))
	for _, b := range rs[src][level] {
		list = append(list, *b)
	}
	sort.Slice(list, func(i, j int) bool { return list[i].T0Us < list[j].T0Us })
	return list, nil
}
