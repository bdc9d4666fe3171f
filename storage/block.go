package storage

import (
	"encoding/binary"
	"fmt"
	"math"
	"time"

	"liftyard/acquire"
)

// blockVersion is the first byte of every stored block.
const blockVersion = 1

// blockHeaderLen is the fixed part of an encoded block: version (1), seq (8),
// t0_us (8), dt_us (8), received unix ns (8), channel count (2), sample
// count (4).
const blockHeaderLen = 1 + 8 + 8 + 8 + 8 + 2 + 4

// encodeBlock appends the binary form of b to dst. The source name is not
// part of it: it is the name of the bucket the block is stored in.
//
// Layout, all integers big-endian:
//
//	u8  version (1)
//	u64 seq
//	i64 t0_us
//	i64 dt_us
//	i64 received, Unix ns (0 = zero time)
//	u16 channel count C
//	u32 sample count N
//	C × (u16 name length, name bytes)
//	C × N × float64 bits, channel by channel (NaN kept bit for bit)
//
// The encoding is canonical: decoding and encoding again gives the same
// bytes.
func encodeBlock(dst []byte, b *acquire.Block) ([]byte, error) {
	n := b.Len()
	if len(b.Series) > math.MaxUint16 {
		return dst, fmt.Errorf("block %s seq %d: %d channels (at most %d): %w",
			b.Source, b.Seq, len(b.Series), math.MaxUint16, ErrBadRecord)
	}
	if n > math.MaxUint32 {
		return dst, fmt.Errorf("block %s seq %d: %d samples: %w", b.Source, b.Seq, n, ErrBadRecord)
	}
	size := blockHeaderLen
	for i := range b.Series {
		s := &b.Series[i]
		if len(s.Raw) != n {
			return dst, fmt.Errorf("block %s seq %d: channel %q has %d samples, channel %q has %d: %w",
				b.Source, b.Seq, s.Channel, len(s.Raw), b.Series[0].Channel, n, ErrBadRecord)
		}
		if len(s.Channel) > math.MaxUint16 {
			return dst, fmt.Errorf("block %s seq %d: channel name of %d bytes: %w",
				b.Source, b.Seq, len(s.Channel), ErrBadRecord)
		}
		size += 2 + len(s.Channel) + 8*n
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
	dst = append(dst, blockVersion)
	dst = binary.BigEndian.AppendUint64(dst, b.Seq)
	dst = binary.BigEndian.AppendUint64(dst, uint64(b.T0Us))
	dst = binary.BigEndian.AppendUint64(dst, uint64(b.DtUs))
	dst = binary.BigEndian.AppendUint64(dst, uint64(recv))
	dst = binary.BigEndian.AppendUint16(dst, uint16(len(b.Series)))
	dst = binary.BigEndian.AppendUint32(dst, uint32(n))
	for i := range b.Series {
		dst = binary.BigEndian.AppendUint16(dst, uint16(len(b.Series[i].Channel)))
		dst = append(dst, b.Series[i].Channel...)
	}
	for i := range b.Series {
		for _, v := range b.Series[i].Raw {
			dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(v))
		}
	}
	return dst, nil
}

// decodeBlock decodes data into b (all but b.Source). Every slice and string
// in b is a copy, so data may be a bbolt page that goes away when its
// transaction ends. A malformed record returns an error wrapping ErrCorrupt.
func decodeBlock(data []byte, b *acquire.Block) error {
	if len(data) < blockHeaderLen {
		return fmt.Errorf("block record of %d bytes (header is %d): %w", len(data), blockHeaderLen, ErrCorrupt)
	}
	if data[0] != blockVersion {
		return fmt.Errorf("block record version %d (want %d): %w", data[0], blockVersion, ErrCorrupt)
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
	b.Seq, b.T0Us, b.DtUs = seq, t0, dt
	b.Received = time.Time{}
	if recv != 0 {
		b.Received = time.Unix(0, recv).UTC()
	}
	b.Series = series
	return nil
}

// blockKey is the key of a block in its source bucket: t0_us (order-
// preserving) then seq, both 8 bytes big-endian, so a cursor walks in device
// time order and two blocks with the same t0 stay apart.
func blockKey(dst []byte, b *acquire.Block) []byte {
	dst = appendI64Key(dst, b.T0Us)
	return binary.BigEndian.AppendUint64(dst, b.Seq)
}
