package acquire

import (
	"bytes"
	"errors"
	"math"
	"strconv"
)

// MaxLineBytes is the longest line a serial source accepts, newline not
// counted. A longer line is rejected as ErrFrameTooLong (ReasonParse) and the
// reader skips to the next newline, so noise never grows a buffer.
const MaxLineBytes = 4096

// Frame is one serial frame (docs/design.md §3.3): one sample time of a device.
//
// On the wire it is one ASCII line
//
//	seq,t_us,v1,...,vN*CCCC
//
// ended by "\n" (a "\r" before it is accepted). seq is a 32-bit counter that
// wraps from 4294967295 to 0, t_us the device clock in microseconds, v1…vN
// the raw readings in the order of the source's channels (any Go float
// syntax, e.g. 812, -3.5, 1.25e-3), and CCCC the CRC-16/CCITT-FALSE of every
// byte before '*' as four hex digits in either case. Example, two channels:
//
//	17,1733061000000000,812.1,201.4*DFD2
type Frame struct {
	Seq    uint32
	TUs    int64
	Values []float64
}

// crcTable is the byte-wise table of CRC-16/CCITT-FALSE (poly 0x1021, MSB first).
var crcTable = func() (t [256]uint16) {
	for i := range t {
		c := uint16(i) << 8
		for range 8 {
			if c&0x8000 != 0 {
				c = c<<1 ^ 0x1021
			} else {
				c <<= 1
			}
		}
		t[i] = c
	}
	return t
}()

// CRC16CCITTFalse returns the CRC-16/CCITT-FALSE of p: polynomial 0x1021,
// initial value 0xFFFF, no reflection of input or output, final XOR 0.
// Its check value, the CRC of the ASCII string "123456789", is 0x29B1.
func CRC16CCITTFalse(p []byte) uint16 {
	crc := uint16(0xFFFF)
	for _, b := range p {
		crc = crc<<8 ^ crcTable[byte(crc>>8)^b]
	}
	return crc
}

// ParseFrame parses one frame line into dst, expecting nValues readings.
// line may end in "\n", "\r\n" or neither. dst.Values is reused (resliced,
// grown only when too small), so a steady stream allocates nothing.
//
// The checks run in this order, and the first failure is returned as a
// *FrameError: length (ErrFrameTooLong), the "*CCCC" suffix (ErrFrameSyntax),
// the checksum (ErrCRC), the number of fields (ErrFieldCount), then each
// field: syntax (ErrFrameSyntax), range (ErrFrameRange), NaN or infinity
// (ErrFrameNaN). On error dst holds partial results and must not be used.
func ParseFrame(line []byte, nValues int, dst *Frame) error {
	line = trimEOL(line)
	if len(line) > MaxLineBytes {
		return &FrameError{Reason: ReasonParse, Err: ErrFrameTooLong}
	}
	star := bytes.LastIndexByte(line, '*')
	if star < 0 {
		return &FrameError{Reason: ReasonParse, Err: ErrFrameSyntax, Text: "no '*' before the checksum: " + excerpt(line)}
	}
	want, ok := parseHex4(line[star+1:])
	if !ok {
		return &FrameError{Reason: ReasonParse, Err: ErrFrameSyntax, Text: "checksum is not four hex digits: " + excerpt(line[star+1:])}
	}
	body := line[:star]
	if got := CRC16CCITTFalse(body); got != want {
		return &FrameError{Reason: ReasonCRC, Err: ErrCRC, Text: "computed " + hex4(got) + ", frame says " + hex4(want)}
	}
	if n := bytes.Count(body, []byte{','}) + 1; n != nValues+2 {
		return &FrameError{Reason: ReasonFieldCount, Err: ErrFieldCount,
			Text: strconv.Itoa(n) + " fields, want seq, t_us and " + strconv.Itoa(nValues) + " values"}
	}
	field := 0
	next := func() []byte {
		field++
		i := bytes.IndexByte(body, ',')
		if i < 0 {
			f := body
			body = nil
			return f
		}
		f := body[:i]
		body = body[i+1:]
		return f
	}
	f := next()
	seq, err := parseInt(f, false)
	if err == nil && seq > math.MaxUint32 {
		err = ErrFrameRange
	}
	if err != nil {
		return fieldError(field, f, err)
	}
	f = next()
	tUs, err := parseInt(f, true)
	if err != nil {
		return fieldError(field, f, err)
	}
	dst.Seq, dst.TUs = uint32(seq), tUs
	dst.Values = dst.Values[:0]
	for range nValues {
		f = next()
		v, err := parseValue(f)
		if err != nil {
			return fieldError(field, f, err)
		}
		dst.Values = append(dst.Values, v)
	}
	return nil
}

// AppendFrame appends f as one frame line, "\n" included, to dst and returns
// the extended slice. Values are written in the shortest form that reads
// back to the same float64, so AppendFrame followed by ParseFrame gives f
// back. A NaN or infinite value is written as such and ParseFrame rejects it.
func AppendFrame(dst []byte, f *Frame) []byte {
	start := len(dst)
	dst = strconv.AppendUint(dst, uint64(f.Seq), 10)
	dst = append(dst, ',')
	dst = strconv.AppendInt(dst, f.TUs, 10)
	for _, v := range f.Values {
		dst = append(dst, ',')
		dst = strconv.AppendFloat(dst, v, 'g', -1, 64)
	}
	crc := CRC16CCITTFalse(dst[start:])
	const digits = "0123456789ABCDEF"
	return append(dst, '*', digits[crc>>12], digits[crc>>8&15], digits[crc>>4&15], digits[crc&15], '\n')
}

// trimEOL removes one trailing "\n" and then one "\r".
func trimEOL(line []byte) []byte {
	if n := len(line); n > 0 && line[n-1] == '\n' {
		line = line[:n-1]
	}
	if n := len(line); n > 0 && line[n-1] == '\r' {
		line = line[:n-1]
	}
	return line
}

func parseHex4(p []byte) (uint16, bool) {
	if len(p) != 4 {
		return 0, false
	}
	var v uint16
	for _, c := range p {
		var d byte
		switch {
		case '0' <= c && c <= '9':
			d = c - '0'
		case 'a' <= c && c <= 'f':
			d = c - 'a' + 10
		case 'A' <= c && c <= 'F':
			d = c - 'A' + 10
		default:
			return 0, false
		}
		v = v<<4 | uint16(d)
	}
	return v, true
}

func hex4(v uint16) string {
	const digits = "0123456789ABCDEF"
	return string([]byte{digits[v>>12], digits[v>>8&15], digits[v>>4&15], digits[v&15]})
}

// parseInt parses a decimal whole number: digits only, with an optional '-'
// when signed is set. It returns ErrFrameSyntax or ErrFrameRange.
func parseInt(p []byte, signed bool) (int64, error) {
	neg := false
	if signed && len(p) > 0 && p[0] == '-' {
		neg, p = true, p[1:]
	}
	if len(p) == 0 {
		return 0, ErrFrameSyntax
	}
	var v uint64
	for _, c := range p {
		if c < '0' || c > '9' {
			return 0, ErrFrameSyntax
		}
		d := uint64(c - '0')
		if v > (math.MaxInt64-d)/10 {
			return 0, ErrFrameRange
		}
		v = v*10 + d
	}
	if neg {
		return -int64(v), nil
	}
	return int64(v), nil
}

// parseValue parses one reading: any Go float syntax that strconv accepts,
// without allocating. NaN and infinities are ErrFrameNaN, overflow is
// ErrFrameRange, anything else unreadable is ErrFrameSyntax.
func parseValue(p []byte) (float64, error) {
	v, err := strconv.ParseFloat(string(p), 64)
	if err != nil {
		if errors.Is(err, strconv.ErrRange) {
			return 0, ErrFrameRange
		}
		return 0, ErrFrameSyntax
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, ErrFrameNaN
	}
	return v, nil
}

// fieldError builds the FrameError for a bad field.
func fieldError(field int, text []byte, err error) *FrameError {
	r := ReasonParse
	switch err {
	case ErrFrameRange:
		r = ReasonRange
	case ErrFrameNaN:
		r = ReasonNaN
	}
	return &FrameError{Field: field, Text: excerpt(text), Reason: r, Err: err}
}
