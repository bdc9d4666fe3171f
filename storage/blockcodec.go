package storage

import (
	"encoding/binary"
	"errors"
	"math"
	"math/bits"
)

// The per-channel codecs of block format v2 (docs/storage.md). Each channel
// of a block is stored by the smallest of these that gives every reading
// back bit for bit:
//
//   - scaled (tag 0x80 | exceptions<<6 | order<<4 | d): the readings are
//     k/10^d for integers k (|k| < 2^53) and one d in 0…9, bit for bit; k is
//     stored as its offset from the block's least k (order 0, frame of
//     reference), its first difference (order 1) or its second-order linear
//     prediction residual (order 2), bit-packed at the width of the largest
//     (zigzag mapped for orders 1 and 2). The first stored integer (the least
//     k, or k0) is coded against the previous scaled channel's of the same
//     d, as neighbouring taps and bridges sit at neighbouring levels.
//   - like (tag 4, 5, 6): scaled with the previous scaled channel's tag and
//     its width, its width + 1 or its width − 1; the header a scanner's
//     channels repeat costs one byte instead of two.
//   - chanXOR: each reading's bits XOR the previous one's, with the leading
//     and trailing zero windows of Gorilla (Pelkonen et al. 2015).
//   - chanRaw: float64 bits, 8 bytes each.
//   - chanConst: one float64 for every reading (any bits, NaN included).
const (
	chanRaw    = 0
	chanXOR    = 2
	chanConst  = 3
	chanLike   = 4    // 4, 5, 6: width +0, +1, −1
	chanScaled = 0x80 // | 0x40 with exceptions | order<<4 | d
)

// scaledCtx is what a scaled channel's header is coded against: the last
// scaled channel before it in the block (channels of other codecs leave it
// as it is).
type scaledCtx struct {
	ok     bool
	tag    byte
	w      uint
	d      int
	anchor int64 // its first stored integer: the least k (order 0) or k0
}

// ref is the integer a channel of d decimals codes its first stored integer
// against.
func (c *scaledCtx) ref(d int) int64 {
	if c.ok && c.d == d {
		return c.anchor
	}
	return 0
}

// maxScaledDecimals is the most decimals decimal scaling tries: 10^9 keeps
// a count of a 24-bit converter with nine decimals below 2^53.
const maxScaledDecimals = 9

// maxExact is 2^53: every integer of smaller magnitude is a float64.
const maxExact = 1 << 53

var pow10 = [maxScaledDecimals + 1]float64{1, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9}

// errShort is the codecs' one error: the data ended or did not fit. The
// block decoder wraps it with the block and channel.
var errShort = errors.New("channel data cut short or malformed")

// scaleExact reports whether v == float64(k)/10^d bit for bit for the k
// nearest v·10^d, and k.
func scaleExact(v float64, d int) (int64, bool) {
	p := pow10[d]
	f := math.Round(v * p)
	if !(f > -maxExact && f < maxExact) { // also false for NaN
		return 0, false
	}
	k := int64(f)
	if math.Float64bits(float64(k)/p) != math.Float64bits(v) { // −0 fails here: k is 0
		return 0, false
	}
	return k, true
}

// isException reports whether v cannot be a decimal at all: NaN, ±Inf
// and −0 are stored beside the scaled integers, bit for bit.
func isException(v float64) bool {
	return math.IsNaN(v) || math.IsInf(v, 0) || (v == 0 && math.Signbit(v))
}

// decimalsOf returns the least d in 0…9 at which every value of raw but the
// exceptions (isException) scales exactly, the integers in ks (an exception
// gets the integer before it, so that it costs no residual), the number of
// exceptions, and false when there is no such d. Division by an exact power
// of ten is correctly rounded, so k/10^d reproduces strconv.ParseFloat of
// the decimal text k·10^-d, and a value that scales at d scales at every
// larger d as well (the same rational), which the final pass confirms.
func decimalsOf(raw []float64, ks []int64) (d, exceptions int, ok bool) {
	rose := 0 // values before this index were scaled at a smaller d
	first := -1
	for i, v := range raw {
		k, ok := scaleExact(v, d)
		if !ok {
			if isException(v) {
				exceptions++
				continue
			}
			for !ok && d < maxScaledDecimals {
				d++
				k, ok = scaleExact(v, d)
			}
			if !ok {
				return 0, 0, false
			}
			rose = i
		}
		if first < 0 {
			first = i
		}
		ks[i] = k
	}
	if first < 0 {
		return 0, 0, false
	}
	for i, v := range raw[:rose] {
		if isException(v) {
			continue
		}
		k, ok := scaleExact(v, d)
		if !ok {
			return 0, 0, false
		}
		ks[i] = k
	}
	if exceptions > 0 {
		// An exception takes the integer before it (the first value's for
		// leading ones), so that it costs no residual.
		prev := ks[first]
		for i, v := range raw {
			if isException(v) {
				ks[i] = prev
			} else {
				prev = ks[i]
			}
		}
	}
	return d, exceptions, true
}

func zigzag(v int64) uint64   { return uint64(v<<1) ^ uint64(v>>63) }
func unzigzag(u uint64) int64 { return int64(u>>1) ^ -int64(u&1) }

// appendChannel appends the smallest exact encoding of raw to dst, coding a
// scaled header against ctx (and updating it). ks is scratch of len(raw).
func appendChannel(dst []byte, raw []float64, ks []int64, ctx *scaledCtx) []byte {
	n := len(raw)
	if n == 0 {
		return append(dst, chanConst, 0, 0, 0, 0, 0, 0, 0, 0)
	}
	first := math.Float64bits(raw[0])
	constant := true
	for _, v := range raw[1:] {
		if math.Float64bits(v) != first {
			constant = false
			break
		}
	}
	if d, exc, ok := decimalsOf(raw, ks); ok && exc <= n/8 {
		pl := planScaled(raw, ks, d, exc, ctx)
		limit := 1 + 8*n // raw float64
		if constant {
			limit = 9
		}
		if pl.size < limit {
			return appendScaled(dst, raw, ks, pl, ctx)
		}
	}
	if constant {
		dst = append(dst, chanConst)
		return binary.BigEndian.AppendUint64(dst, first)
	}
	xorStart := len(dst)
	dst = appendXOR(dst, raw)
	if len(dst)-xorStart <= 1+8*n {
		return dst
	}
	dst = append(dst[:xorStart], chanRaw)
	for _, v := range raw {
		dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(v))
	}
	return dst
}

// scaledPlan is the layout appendScaled writes for one channel.
type scaledPlan struct {
	d, order, exc int
	tag           byte
	like          byte // 0, or the chanLike code that replaces tag and width
	w             uint
	anchor        int64
	size          int // bytes
}

func uvarintLen(u uint64) int { return (bits.Len64(u|1) + 6) / 7 }

// planScaled picks the order whose header and packed residuals take the
// fewest bits, and whether the header can be a like code.
func planScaled(raw []float64, ks []int64, d, exc int, ctx *scaledCtx) scaledPlan {
	n := len(ks)
	ref := ctx.ref(d)
	lo, hi := ks[0], ks[0]
	var or1, or2 uint64
	for i, k := range ks {
		lo, hi = min(lo, k), max(hi, k)
		if i >= 1 {
			or1 |= zigzag(k - ks[i-1])
		}
		if i >= 2 {
			or2 |= zigzag(k - 2*ks[i-1] + ks[i-2])
		}
	}
	widths := [3]uint{uint(bits.Len64(uint64(hi - lo))), uint(bits.Len64(or1)), uint(bits.Len64(or2))}
	anchors := [3]int64{lo, ks[0], ks[0]}
	best := scaledPlan{size: math.MaxInt}
	for o := range 3 {
		if o > 0 && o >= n {
			break
		}
		head := uvarintLen(zigzag(anchors[o] - ref))
		if o == 2 {
			head += uvarintLen(zigzag(ks[1] - ks[0]))
		}
		bitsN := uint64(widths[o]) * uint64(n-o)
		if b := 8*uint64(head) + bitsN; best.size == math.MaxInt || b < uint64(best.size) {
			best = scaledPlan{d: d, order: o, exc: exc, w: widths[o], anchor: anchors[o], size: int(b)}
		}
	}
	best.tag = byte(chanScaled | best.order<<4 | d)
	if exc > 0 {
		best.tag |= 0x40
	}
	size := 2 + (best.size+7)/8 // tag, width, header varints and packed bits
	if ctx.ok && ctx.tag == best.tag {
		switch {
		case best.w == ctx.w:
			best.like = chanLike
		case best.w == ctx.w+1:
			best.like = chanLike + 1
		case best.w+1 == ctx.w:
			best.like = chanLike + 2
		}
		if best.like != 0 {
			size--
		}
	}
	if exc > 0 {
		size += uvarintLen(uint64(exc))
		last := 0
		for i, v := range raw {
			if isException(v) {
				size += uvarintLen(uint64(i-last)) + 8
				last = i
			}
		}
	}
	best.size = size
	return best
}

// appendScaled writes: u8 tag (0x80 | 0x40 when there are exceptions |
// order<<4 | d), or a like code 4–6 in its place; with exceptions, uvarint
// count E and E × (uvarint gap to the previous exception's index (the
// first: its index), 8 bytes of float64 bits); the anchor (the least k for
// order 0, k0 otherwise) as a zigzag varint of its difference to ctx's
// anchor (same d; else to 0); for order 2, k1−k0 as a zigzag varint; u8
// width w unless the tag was a like code; then the residuals as w-bit codes
// (order 0: k − least k; orders 1 and 2: zigzag of the residual of values
// order…), packed most significant bit first.
func appendScaled(dst []byte, raw []float64, ks []int64, pl scaledPlan, ctx *scaledCtx) []byte {
	if pl.like != 0 {
		dst = append(dst, pl.like)
	} else {
		dst = append(dst, pl.tag)
	}
	if pl.exc > 0 {
		dst = binary.AppendUvarint(dst, uint64(pl.exc))
		last := 0
		for i, v := range raw {
			if isException(v) {
				dst = binary.AppendUvarint(dst, uint64(i-last))
				dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(v))
				last = i
			}
		}
	}
	dst = binary.AppendUvarint(dst, zigzag(pl.anchor-ctx.ref(pl.d)))
	if pl.order == 2 {
		dst = binary.AppendUvarint(dst, zigzag(ks[1]-ks[0]))
	}
	*ctx = scaledCtx{ok: true, tag: pl.tag, w: pl.w, d: pl.d, anchor: pl.anchor}
	w := pl.w
	if pl.like == 0 {
		dst = append(dst, byte(w))
	}
	if w == 0 {
		return dst
	}
	var bw bitWriter
	bw.buf = dst
	switch pl.order {
	case 0:
		for _, k := range ks {
			bw.write(uint64(k-pl.anchor), w)
		}
	case 1:
		for i := 1; i < len(ks); i++ {
			bw.write(zigzag(ks[i]-ks[i-1]), w)
		}
	case 2:
		for i := 2; i < len(ks); i++ {
			bw.write(zigzag(ks[i]-2*ks[i-1]+ks[i-2]), w)
		}
	}
	return bw.flush()
}

// appendXOR writes: u8 chanXOR, the first value's 8 bytes, then for each
// further value a bit stream after Pelkonen et al. 2015 (Gorilla, §4.1.2):
// '0' when it equals the previous value; '10' and the meaningful bits when
// its XOR with the previous value fits the previous window; '11', 6 bits of
// leading zeros, 6 bits of length − 1 and the meaningful bits otherwise.
// (Gorilla uses 5 bits of leading zeros; 6 keep any window exact.)
func appendXOR(dst []byte, raw []float64) []byte {
	dst = append(dst, chanXOR)
	prev := math.Float64bits(raw[0])
	dst = binary.BigEndian.AppendUint64(dst, prev)
	var bw bitWriter
	bw.buf = dst
	lead, trail := uint(65), uint(0) // no window yet
	for _, v := range raw[1:] {
		cur := math.Float64bits(v)
		x := cur ^ prev
		prev = cur
		if x == 0 {
			bw.write(0, 1)
			continue
		}
		l, t := uint(bits.LeadingZeros64(x)), uint(bits.TrailingZeros64(x))
		if lead <= 64 && l >= lead && t >= trail {
			bw.write(0b10, 2)
			bw.write(x>>trail, 64-lead-trail)
			continue
		}
		lead, trail = l, t
		m := 64 - l - t
		bw.write(0b11, 2)
		bw.write(uint64(l), 6)
		bw.write(uint64(m-1), 6)
		bw.write(x>>t, m)
	}
	return bw.flush()
}

// decodeChannel decodes one channel of n readings from data into out
// (len n), a scaled header against ctx (which it updates), and returns the
// rest of data.
func decodeChannel(data []byte, out []float64, ctx *scaledCtx) ([]byte, error) {
	if len(data) < 1 {
		return nil, errShort
	}
	n := len(out)
	if data[0]&chanScaled != 0 {
		return decodeScaled(data[1:], out, data[0], -1, ctx)
	}
	switch data[0] {
	case chanLike, chanLike + 1, chanLike + 2:
		if !ctx.ok {
			return nil, errShort // like what?
		}
		w := int(ctx.w) + []int{0, 1, -1}[data[0]-chanLike]
		if w < 0 || w > 64 {
			return nil, errShort
		}
		return decodeScaled(data[1:], out, ctx.tag, w, ctx)
	case chanConst:
		if len(data) < 9 {
			return nil, errShort
		}
		v := math.Float64frombits(binary.BigEndian.Uint64(data[1:]))
		for i := range out {
			out[i] = v
		}
		return data[9:], nil
	case chanRaw:
		if uint64(len(data)-1) < 8*uint64(n) {
			return nil, errShort
		}
		data = data[1:]
		for i := range out {
			out[i] = math.Float64frombits(binary.BigEndian.Uint64(data[8*i:]))
		}
		return data[8*n:], nil
	case chanXOR:
		return decodeXOR(data[1:], out)
	}
	return nil, errShort
}

// decodeScaled decodes a scaled channel after its tag byte; width is the
// packed width, or −1 when it follows in data.
func decodeScaled(data []byte, out []float64, tag byte, width int, ctx *scaledCtx) ([]byte, error) {
	d, order, hasExc := int(tag&0x0f), int(tag>>4&0x03), tag&0x40 != 0
	n := len(out)
	if d > maxScaledDecimals || order > 2 || n == 0 || order >= n && order > 0 {
		return nil, errShort
	}
	// Exceptions are read first and put in place last.
	type exception struct {
		i    int
		bits uint64
	}
	var excs []exception
	if hasExc {
		e, m := binary.Uvarint(data)
		if m <= 0 || e == 0 || e > uint64(n) || e > uint64(len(data))/9 {
			return nil, errShort
		}
		data = data[m:]
		excs = make([]exception, e)
		at := uint64(0)
		for j := range excs {
			gap, m := binary.Uvarint(data)
			if m <= 0 || len(data)-m < 8 {
				return nil, errShort
			}
			at += gap
			if at >= uint64(n) || (j > 0 && gap == 0) {
				return nil, errShort
			}
			excs[j] = exception{int(at), binary.BigEndian.Uint64(data[m:])}
			data = data[m+8:]
		}
	}
	p := pow10[d]
	u, m := binary.Uvarint(data)
	if m <= 0 {
		return nil, errShort
	}
	data = data[m:]
	anchor := unzigzag(u) + ctx.ref(d)
	k1, k2 := anchor, int64(0) // the last two integers (orders 1 and 2)
	if order >= 1 {
		out[0] = float64(k1) / p
	}
	if order == 2 {
		u, m := binary.Uvarint(data)
		if m <= 0 {
			return nil, errShort
		}
		data = data[m:]
		k2, k1 = k1, k1+unzigzag(u)
		out[1] = float64(k1) / p
	}
	if width < 0 {
		if len(data) < 1 {
			return nil, errShort
		}
		width = int(data[0])
		data = data[1:]
		if width > 64 {
			return nil, errShort
		}
	}
	*ctx = scaledCtx{ok: true, tag: tag, w: uint(width), d: d, anchor: anchor}
	w := uint(width)
	cnt := uint64(n - order)
	nbytes := (cnt*uint64(w) + 7) / 8
	if uint64(len(data)) < nbytes {
		return nil, errShort
	}
	br := bitReader{buf: data[:nbytes]}
	// Most values are read as one 64-bit load; the last few bytes and
	// widths above 57 bits take bitReader's careful path.
	packed := data[:nbytes]
	fast := uint64(0)
	if w <= 57 && nbytes >= 8 {
		fast = ((nbytes-8)*8)/uint64(max(w, 1)) + 1 // values whose load stays inside
		fast = min(fast, cnt)
	}
	get := func(j uint64) uint64 {
		pos := j * uint64(w)
		v := binary.BigEndian.Uint64(packed[pos>>3:])
		return v << (pos & 7) >> (64 - w)
	}
	var j uint64
	switch order {
	case 0:
		if w == 0 {
			for i := range out {
				out[i] = float64(anchor) / p
			}
			break
		}
		for ; j < fast; j++ {
			out[j] = float64(anchor+int64(get(j))) / p
		}
		br.pos = j * uint64(w)
		for i := int(j); i < n; i++ {
			out[i] = float64(anchor+int64(br.read(w))) / p
		}
	case 1:
		for ; j < fast; j++ {
			k1 += unzigzag(get(j))
			out[j+1] = float64(k1) / p
		}
		br.pos = j * uint64(w)
		for i := int(j) + 1; i < n; i++ {
			k1 += unzigzag(br.read(w))
			out[i] = float64(k1) / p
		}
	case 2:
		for ; j < fast; j++ {
			k := 2*k1 - k2 + unzigzag(get(j))
			k2, k1 = k1, k
			out[j+2] = float64(k) / p
		}
		br.pos = j * uint64(w)
		for i := int(j) + 2; i < n; i++ {
			k := 2*k1 - k2 + unzigzag(br.read(w))
			k2, k1 = k1, k
			out[i] = float64(k) / p
		}
	}
	for _, e := range excs {
		out[e.i] = math.Float64frombits(e.bits)
	}
	return data[nbytes:], nil
}

func decodeXOR(data []byte, out []float64) ([]byte, error) {
	if len(data) < 8 {
		return nil, errShort
	}
	prev := binary.BigEndian.Uint64(data)
	data = data[8:]
	if len(out) == 0 {
		return nil, errShort
	}
	out[0] = math.Float64frombits(prev)
	br := bitReader{buf: data}
	lead, trail := uint(65), uint(0)
	for i := 1; i < len(out); i++ {
		if br.read(1) == 1 {
			if br.read(1) == 0 {
				if lead > 64 {
					return nil, errShort // a window before any was set
				}
			} else {
				lead = uint(br.read(6))
				m := uint(br.read(6)) + 1
				if lead+m > 64 {
					return nil, errShort
				}
				trail = 64 - lead - m
			}
			prev ^= br.read(64-lead-trail) << trail
		}
		if br.over {
			return nil, errShort
		}
		out[i] = math.Float64frombits(prev)
	}
	used := (br.pos + 7) / 8
	return data[used:], nil
}

// bitWriter appends bits to buf, most significant first.
type bitWriter struct {
	buf  []byte
	acc  uint64 // pending bits, right-aligned
	nacc uint   // how many
}

// write appends the low w bits of v (w ≤ 64).
func (b *bitWriter) write(v uint64, w uint) {
	if w > 32 {
		b.write(v>>32, w-32)
		w = 32
	}
	if w == 0 {
		return
	}
	v &= 1<<w - 1
	b.acc = b.acc<<w | v // nacc < 32 before, so nothing is lost
	b.nacc += w
	if b.nacc >= 32 {
		b.nacc -= 32
		b.buf = binary.BigEndian.AppendUint32(b.buf, uint32(b.acc>>b.nacc))
	}
}

// flush writes the last partial byte (zero-padded) and returns the buffer.
func (b *bitWriter) flush() []byte {
	for b.nacc >= 8 {
		b.nacc -= 8
		b.buf = append(b.buf, byte(b.acc>>b.nacc))
	}
	if b.nacc > 0 {
		b.buf = append(b.buf, byte(b.acc<<(8-b.nacc)))
		b.nacc = 0
	}
	return b.buf
}

// bitReader reads bits most significant first; reading past the end gives
// zeros and sets over.
type bitReader struct {
	buf  []byte
	pos  uint64 // bit position
	over bool
}

// read returns the next w bits (w ≤ 64).
func (b *bitReader) read(w uint) uint64 {
	if w == 0 {
		return 0
	}
	end := b.pos + uint64(w)
	if end > uint64(len(b.buf))*8 {
		b.over = true
		b.pos = end
		return 0
	}
	byteI := b.pos >> 3
	off := uint(b.pos & 7)
	var v uint64
	if byteI+8 <= uint64(len(b.buf)) {
		v = binary.BigEndian.Uint64(b.buf[byteI:])
	} else {
		var tmp [8]byte
		copy(tmp[:], b.buf[byteI:])
		v = binary.BigEndian.Uint64(tmp[:])
	}
	b.pos = end
	if off+w <= 64 {
		return v << off >> (64 - w)
	}
	// The bits straddle 9 bytes: take the rest from the ninth.
	hi := v << off >> (64 - w)
	extra := off + w - 64
	next := uint64(0)
	if byteI+8 < uint64(len(b.buf)) {
		next = uint64(b.buf[byteI+8])
	}
	return hi | next>>(8-extra)
}
