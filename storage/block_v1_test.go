package storage

import (
	"encoding/binary"
	"fmt"
	"math"

	"liftyard/acquire"
)

// encodeBlockV1 is the version 1 block encoder as it was before version 2
// (float64 bits per reading), kept for tests of reading old records.
func encodeBlockV1(dst []byte, b *acquire.Block) ([]byte, error) {
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
	dst = append(dst, blockV1)
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
