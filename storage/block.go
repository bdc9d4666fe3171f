package storage

import (
	"encoding/binary"
	"fmt"
	"math"
	"slices"
	"strconv"
	"time"

	"liftyard/acquire"
)

// Block record versions: the first byte of every stored block. Version 1
// (float64 bits per reading) is still read; new blocks are written as
// version 2 (per-channel compact codecs). docs/storage.md describes both.
const (
	blockV1      = 1
	blockV2      = 2
	blockVersion = blockV2
	// blockGroup (version 3) is a record of several consecutive small
	// blocks of one source (encodeGroup); the writer makes them.
	blockGroup = 3
)

// blockHeaderLen is the fixed header of a version 1 record: version (1),
// seq (8), t0_us (8), dt_us (8), received unix ns (8), channel count (2),
// sample count (4).
const blockHeaderLen = 1 + 8 + 8 + 8 + 8 + 2 + 4

// maxBlockReadings bounds channels × samples of one block. A compact channel
// may hold any number of equal readings in a few bytes, so the decoder
// needs a bound before it allocates; a real block is a fraction of a second
// of data, far below it (4 M readings, 32 MB of float64; an MQTT payload
// holds at most about 0.2 M).
const maxBlockReadings = 1 << 22

// encodeBlock appends the binary form of b (block format version 2) to
// dst. The source name is not part of it: it is the name of the bucket the
// block is stored in.
//
// Layout (docs/storage.md §2): u8 version (2); uvarint seq; zigzag varints
// t0_us, dt_us and received Unix ns (0 = zero time); uvarint channel count
// C; uvarint sample count N; C names, each as (uvarint bytes shared with the
// previous name's start, uvarint length of the rest, the rest); then C
// channels, each in the smallest exact codec of blockcodec.go. Every
// reading decodes to the same float64 bits (NaN payloads and −0 included).
func encodeBlock(dst []byte, b *acquire.Block) ([]byte, error) {
	if err := checkBlock(b); err != nil {
		return dst, err
	}
	n := b.Len()
	size := 1 + 5*binary.MaxVarintLen64
	for i := range b.Series {
		size += 3 + len(b.Series[i].Channel) + 3*n + 16
	}
	var recv int64
	if !b.Received.IsZero() {
		recv = b.Received.UnixNano()
	}
	if cap(dst)-len(dst) < size {
		grown := make([]byte, len(dst), len(dst)+size)
		copy(grown, dst)
		dst = grown
	}
	dst = append(dst, blockV2)
	dst = binary.AppendUvarint(dst, b.Seq)
	dst = binary.AppendVarint(dst, b.T0Us)
	dst = binary.AppendVarint(dst, b.DtUs)
	dst = binary.AppendVarint(dst, recv)
	return appendBody(dst, [][]acquire.Series{b.Series}, n), nil
}

// appendBody appends the body of a record (version 2 and 3) holding the
// series of parts one after the other, channel by channel: uvarint channel
// count C, uvarint sample count N (all parts), the names, then each channel
// in its codec. Every part has the channels of parts[0] in its order and
// together they hold n samples.
func appendBody(dst []byte, parts [][]acquire.Series, n int) []byte {
	series := parts[0]
	dst = binary.AppendUvarint(dst, uint64(len(series)))
	dst = binary.AppendUvarint(dst, uint64(n))
	prev := ""
	for i := 0; i < len(series); {
		name := series[i].Channel
		if isNextName(prev, name) {
			m := 1
			for i+m < len(series) && isNextName(series[i+m-1].Channel, series[i+m].Channel) {
				m++
			}
			dst = binary.AppendUvarint(dst, 0)
			dst = binary.AppendUvarint(dst, uint64(m-1))
			i += m
			prev = series[i-1].Channel
			continue
		}
		shared := 0
		for shared < len(name) && shared < len(prev) && name[shared] == prev[shared] {
			shared++
		}
		dst = binary.AppendUvarint(dst, uint64(shared)+1)
		dst = binary.AppendUvarint(dst, uint64(len(name)-shared))
		dst = append(dst, name[shared:]...)
		prev = name
		i++
	}
	ks := make([]int64, n)
	var ctx scaledCtx
	var joined []float64
	for c := range series {
		raw := series[c].Raw
		if len(parts) > 1 {
			joined = joined[:0]
			for _, p := range parts {
				joined = append(joined, p[c].Raw...)
			}
			raw = joined
		}
		dst = appendChannel(dst, raw, ks, &ctx)
	}
	return dst
}

// encodeGroup appends a group record (block format version 3) of blocks,
// two or more consecutive blocks of one source with the same channels in
// the same order (sameLayout), which checkBlock accepts and which hold
// at most maxBlockReadings readings together:
//
//	u8 3, uvarint G (blocks), G block headers, then the body of version 2
//	(appendBody) over the blocks' samples one after the other.
//
// A block header is five varints: seq, t0_us, dt_us, received (Unix ns, 0 =
// none) and the sample count (uvarint). The first block's are the values
// (seq and the count as uvarints); each later block's are differences, in
// wrapping 64-bit arithmetic: seq from the previous seq, t0_us from the
// previous block's end (its t0_us + samples × dt_us), dt_us and received
// from the previous block's — for a device sending steadily, 0, 0, 0 and
// its sending period, 6–8 bytes a block instead of 20–25.
//
// It decodes back to the same blocks, headers included (decodeRecord).
func encodeGroup(dst []byte, blocks []*acquire.Block) []byte {
	dst = append(dst, blockGroup)
	dst = binary.AppendUvarint(dst, uint64(len(blocks)))
	parts := make([][]acquire.Series, len(blocks))
	n := 0
	var prev groupHeader
	for i, b := range blocks {
		h := groupHeader{seq: b.Seq, t0: b.T0Us, dt: b.DtUs, n: uint64(b.Len())}
		if !b.Received.IsZero() {
			h.recv = b.Received.UnixNano()
		}
		if i == 0 {
			dst = binary.AppendUvarint(dst, h.seq)
			dst = binary.AppendVarint(dst, h.t0)
			dst = binary.AppendVarint(dst, h.dt)
			dst = binary.AppendVarint(dst, h.recv)
		} else {
			dst = binary.AppendVarint(dst, int64(h.seq-prev.seq))
			dst = binary.AppendVarint(dst, h.t0-prev.end())
			dst = binary.AppendVarint(dst, h.dt-prev.dt)
			dst = binary.AppendVarint(dst, h.recv-prev.recv)
		}
		dst = binary.AppendUvarint(dst, h.n)
		prev = h
		parts[i] = b.Series
		n += b.Len()
	}
	return appendBody(dst, parts, n)
}

// groupHeader is one block's header in a group record.
type groupHeader struct {
	seq          uint64
	t0, dt, recv int64
	n            uint64
}

// end is the device time after the block's last sample, in wrapping
// arithmetic.
func (h groupHeader) end() int64 { return h.t0 + int64(h.n)*h.dt }

// sameLayout reports whether a and b have the same channels in the same
// order (so that a group record can hold both).
func sameLayout(a, b *acquire.Block) bool {
	return slices.EqualFunc(a.Series, b.Series, func(x, y acquire.Series) bool { return x.Channel == y.Channel })
}

// maxNameDigits is how many trailing digits of a channel name count as its
// number (10^18 + 1 still fits a uint64).
const maxNameDigits = 18

// nameNumber splits name into a stem and its number: the trailing decimal
// digits, at most maxNameDigits of them; ok is false without a digit at
// the end.
func nameNumber(name string) (stem string, digits string, ok bool) {
	i := len(name)
	for i > 0 && len(name)-i < maxNameDigits && name[i-1] >= '0' && name[i-1] <= '9' {
		i--
	}
	return name[:i], name[i:], i < len(name)
}

// appendNextNumber appends the number of digits plus one, zero-padded to
// the width of digits (tap_09 → tap_10, p9 → p10, x099 → x100).
func appendNextNumber(dst []byte, digits string) []byte {
	var v uint64
	for i := 0; i < len(digits); i++ {
		v = 10*v + uint64(digits[i]-'0')
	}
	var buf [20]byte
	num := strconv.AppendUint(buf[:0], v+1, 10)
	for range len(digits) - len(num) {
		dst = append(dst, '0')
	}
	return append(dst, num...)
}

// isNextName reports whether name is the channel after prev in a numbered
// run (tap_01, tap_02, …), which a block stores in no bytes of its own.
func isNextName(prev, name string) bool {
	stem, digits, ok := nameNumber(prev)
	if !ok || len(name) < len(stem) || name[:len(stem)] != stem {
		return false
	}
	var buf [24]byte
	return string(appendNextNumber(buf[:0], digits)) == name[len(stem):]
}

// nextName is the channel after prev in a numbered run; ok is false when
// prev ends in no digit.
func nextName(prev string) (string, bool) {
	stem, digits, ok := nameNumber(prev)
	if !ok {
		return "", false
	}
	return string(appendNextNumber([]byte(stem), digits)), true
}

// checkBlock returns an error wrapping ErrBadRecord when b cannot be
// stored: too many channels or readings, channels of unequal lengths, a
// name too long.
func checkBlock(b *acquire.Block) error {
	n := b.Len()
	if len(b.Series) > math.MaxUint16 {
		return fmt.Errorf("block %s seq %d: %d channels (at most %d): %w",
			b.Source, b.Seq, len(b.Series), math.MaxUint16, ErrBadRecord)
	}
	if uint64(n)*uint64(max(len(b.Series), 1)) > maxBlockReadings {
		return fmt.Errorf("block %s seq %d: %d channels × %d samples (at most %d readings): %w",
			b.Source, b.Seq, len(b.Series), n, maxBlockReadings, ErrBadRecord)
	}
	for i := range b.Series {
		s := &b.Series[i]
		if len(s.Raw) != n {
			return fmt.Errorf("block %s seq %d: channel %q has %d samples, channel %q has %d: %w",
				b.Source, b.Seq, s.Channel, len(s.Raw), b.Series[0].Channel, n, ErrBadRecord)
		}
		if len(s.Channel) > math.MaxUint16 {
			return fmt.Errorf("block %s seq %d: channel name of %d bytes: %w",
				b.Source, b.Seq, len(s.Channel), ErrBadRecord)
		}
	}
	return nil
}

// decodeBlock decodes data (block format version 1 or 2) into b (all but
// b.Source). Every slice and string in b is a copy, so data may be a bbolt
// page that goes away when its transaction ends. A malformed record returns
// an error wrapping ErrCorrupt; no input makes it panic (FuzzDecodeBlock).
func decodeBlock(data []byte, b *acquire.Block) error {
	if len(data) == 0 {
		return fmt.Errorf("block record of 0 bytes: %w", ErrCorrupt)
	}
	switch data[0] {
	case blockV1:
		return decodeBlockV1(data, b)
	case blockV2:
		return decodeBlockV2(data, b)
	case blockGroup:
		return fmt.Errorf("group record where one block was expected: %w", ErrCorrupt)
	}
	return fmt.Errorf("block record version %d (this liftyard reads 1, 2 and 3; a newer one wrote it?): %w", data[0], ErrCorrupt)
}

// decodeRecord decodes a stored record of any version into its blocks (one,
// or several for a group record), each with the source left empty. Every
// slice and string is a copy of data.
func decodeRecord(data []byte) ([]acquire.Block, error) {
	if len(data) > 0 && data[0] == blockGroup {
		return decodeGroup(data)
	}
	var b acquire.Block
	if err := decodeBlock(data, &b); err != nil {
		return nil, err
	}
	return []acquire.Block{b}, nil
}

func decodeBlockV2(data []byte, b *acquire.Block) error {
	rest := data[1:]
	var fields [4]uint64
	for i := range fields {
		u, m := binary.Uvarint(rest)
		if m <= 0 {
			return fmt.Errorf("block record of %d bytes: header cut short: %w", len(data), ErrCorrupt)
		}
		fields[i] = u
		rest = rest[m:]
	}
	seq := fields[0]
	t0, dt, recv := unzigzag(fields[1]), unzigzag(fields[2]), unzigzag(fields[3])
	series, err := decodeBody(rest, "block", seq)
	if err != nil {
		return err
	}
	setBlock(b, seq, t0, dt, recv, series)
	return nil
}

// decodeGroup decodes a group record (version 3, encodeGroup) into its
// blocks, each with the source left empty.
func decodeGroup(data []byte) ([]acquire.Block, error) {
	rest := data[1:]
	g, m := binary.Uvarint(rest)
	if m <= 0 || g < 2 || g > uint64(len(rest)) {
		return nil, fmt.Errorf("group record of %d bytes: block count cut short or wrong: %w", len(data), ErrCorrupt)
	}
	rest = rest[m:]
	blocks := make([]acquire.Block, g)
	ns := make([]uint64, g)
	var total uint64
	var prev groupHeader
	for i := range blocks {
		var f [5]uint64
		for j := range f {
			u, m := binary.Uvarint(rest)
			if m <= 0 {
				return nil, fmt.Errorf("group record of %d bytes: header of block %d cut short: %w", len(data), i, ErrCorrupt)
			}
			f[j] = u
			rest = rest[m:]
		}
		h := groupHeader{seq: f[0], t0: unzigzag(f[1]), dt: unzigzag(f[2]), recv: unzigzag(f[3]), n: f[4]}
		if i > 0 {
			h.seq = prev.seq + uint64(unzigzag(f[0]))
			h.t0 += prev.end()
			h.dt += prev.dt
			h.recv += prev.recv
		}
		setBlock(&blocks[i], h.seq, h.t0, h.dt, h.recv, nil)
		prev = h
		ns[i] = h.n
		total += h.n
		if h.n == 0 || total > maxBlockReadings {
			return nil, fmt.Errorf("group record: block %d of %d samples (%d so far): %w", i, h.n, total, ErrCorrupt)
		}
	}
	series, err := decodeBody(rest, "group", blocks[0].Seq)
	if err != nil {
		return nil, err
	}
	if len(series) == 0 || uint64(len(series[0].Raw)) != total {
		return nil, fmt.Errorf("group record seq %d: %d blocks of %d samples, body of another length: %w", blocks[0].Seq, g, total, ErrCorrupt)
	}
	from := uint64(0)
	for i := range blocks {
		to := from + ns[i]
		blocks[i].Series = make([]acquire.Series, len(series))
		for c, sr := range series {
			blocks[i].Series[c] = acquire.Series{Channel: sr.Channel, Raw: sr.Raw[from:to:to]}
		}
		from = to
	}
	return blocks, nil
}

// decodeBody decodes the body of a version 2 or 3 record (appendBody):
// the channels, each with all its samples. kind ("block", "group") and
// seq name the record in errors.
func decodeBody(rest []byte, kind string, seq uint64) ([]acquire.Series, error) {
	what := func() string { return fmt.Sprintf("%s record seq %d", kind, seq) }
	var fields [2]uint64
	for i := range fields {
		u, m := binary.Uvarint(rest)
		if m <= 0 {
			return nil, fmt.Errorf("%s: header cut short: %w", what(), ErrCorrupt)
		}
		fields[i] = u
		rest = rest[m:]
	}
	nch, n64 := fields[0], fields[1]
	if nch > math.MaxUint16 {
		return nil, fmt.Errorf("%s: %d channels: %w", what(), nch, ErrCorrupt)
	}
	if nch == 0 && n64 != 0 {
		return nil, fmt.Errorf("%s: %d samples but no channel: %w", what(), n64, ErrCorrupt)
	}
	if n64*max(nch, 1) > maxBlockReadings || n64 > maxBlockReadings {
		return nil, fmt.Errorf("%s: %d channels × %d samples (at most %d readings): %w",
			what(), nch, n64, maxBlockReadings, ErrCorrupt)
	}
	n := int(n64)
	names := make([]string, nch)
	prev := ""
	for i := 0; i < len(names); {
		cut := func() error {
			return fmt.Errorf("%s: channel %d name cut short: %w", what(), i, ErrCorrupt)
		}
		x, m := binary.Uvarint(rest)
		if m <= 0 {
			return nil, cut()
		}
		rest = rest[m:]
		if x == 0 { // a numbered run after prev
			more, m := binary.Uvarint(rest)
			if m <= 0 || more >= uint64(len(names)-i) {
				return nil, cut()
			}
			rest = rest[m:]
			for range more + 1 {
				next, ok := nextName(prev)
				if !ok || len(next) > math.MaxUint16 {
					return nil, fmt.Errorf("%s: channel %d follows %q, which ends in no number: %w", what(), i, prev, ErrCorrupt)
				}
				names[i], prev = next, next
				i++
			}
			continue
		}
		shared := x - 1
		if shared > uint64(len(prev)) {
			return nil, cut()
		}
		l, m := binary.Uvarint(rest)
		if m <= 0 || uint64(len(rest)-m) < l || shared+l > math.MaxUint16 {
			return nil, cut()
		}
		rest = rest[m:]
		names[i] = prev[:shared] + string(rest[:l])
		rest = rest[l:]
		prev = names[i]
		i++
	}
	series := make([]acquire.Series, nch)
	all := make([]float64, int(nch)*n)
	var ctx scaledCtx
	for i := range series {
		raw := all[i*n : (i+1)*n : (i+1)*n]
		var err error
		if rest, err = decodeChannel(rest, raw, &ctx); err != nil {
			return nil, fmt.Errorf("%s: channel %d (%q) of %d samples: %w: %w", what(), i, names[i], n, err, ErrCorrupt)
		}
		series[i] = acquire.Series{Channel: names[i], Raw: raw}
	}
	if len(rest) != 0 {
		return nil, fmt.Errorf("%s: %d bytes after the last channel: %w", what(), len(rest), ErrCorrupt)
	}
	return series, nil
}

func setBlock(b *acquire.Block, seq uint64, t0, dt, recv int64, series []acquire.Series) {
	b.Seq, b.T0Us, b.DtUs = seq, t0, dt
	b.Received = time.Time{}
	if recv != 0 {
		b.Received = time.Unix(0, recv).UTC()
	}
	b.Series = series
}

// decodeBlockV1 decodes a version 1 record:
//
//	u8  version (1)
//	u64 seq
//	i64 t0_us
//	i64 dt_us
//	i64 received, Unix ns (0 = zero time)
//	u16 channel count C
//	u32 sample count N
//	C × (u16 name length, name bytes)
//	C × N × float64 bits, channel by channel
//
// all integers big-endian.
func decodeBlockV1(data []byte, b *acquire.Block) error {
	if len(data) < blockHeaderLen {
		return fmt.Errorf("block record of %d bytes (header is %d): %w", len(data), blockHeaderLen, ErrCorrupt)
	}
	seq := binary.BigEndian.Uint64(data[1:])
	t0 := int64(binary.BigEndian.Uint64(data[9:]))
	dt := int64(binary.BigEndian.Uint64(data[17:]))
	recv := int64(binary.BigEndian.Uint64(data[25:]))
	nch := int(binary.BigEndian.Uint16(data[33:]))
	n := int(binary.BigEndian.Uint32(data[35:]))
	rest := data[blockHeaderLen:]
	if nch == 0 && n != 0 {
		return fmt.Errorf("block record seq %d: %d samples but no channel: %w", seq, n, ErrCorrupt)
	}

	names := make([]string, nch)
	for i := range names {
		if len(rest) < 2 {
			return fmt.Errorf("block record seq %d: channel %d name cut short: %w", seq, i, ErrCorrupt)
		}
		l := int(binary.BigEndian.Uint16(rest))
		rest = rest[2:]
		if len(rest) < l {
			return fmt.Errorf("block record seq %d: channel %d name cut short: %w", seq, i, ErrCorrupt)
		}
		names[i] = string(rest[:l])
		rest = rest[l:]
	}
	// Compare in uint64 so that a huge count cannot overflow the check.
	if uint64(len(rest)) != uint64(nch)*uint64(n)*8 {
		return fmt.Errorf("block record seq %d: %d bytes of readings for %d channels × %d samples: %w",
			seq, len(rest), nch, n, ErrCorrupt)
	}
	series := make([]acquire.Series, nch)
	for i := range series {
		raw := make([]float64, n)
		for j := range raw {
			raw[j] = math.Float64frombits(binary.BigEndian.Uint64(rest))
			rest = rest[8:]
		}
		series[i] = acquire.Series{Channel: names[i], Raw: raw}
	}
	setBlock(b, seq, t0, dt, recv, series)
	return nil
}

// blockKey is the key of a block in its source bucket: t0_us (order-
// preserving) then seq, both 8 bytes big-endian, so a cursor walks in device
// time order and two blocks with the same t0 stay apart.
func blockKey(dst []byte, b *acquire.Block) []byte {
	dst = appendI64Key(dst, b.T0Us)
	return binary.BigEndian.AppendUint64(dst, b.Seq)
}
