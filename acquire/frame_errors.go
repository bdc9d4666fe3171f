package acquire

import (
	"errors"
	"strconv"
)

// ErrFrameTooLong is returned when a line exceeds MaxLineBytes before its
// newline. The rest of the line, up to the next newline, is discarded.
var ErrFrameTooLong = errors.New("line too long")

// ErrFrameSyntax is returned when a serial frame is not of the form
// seq,t_us,v1,...,vN*CCCC: no '*', a checksum that is not four hex digits,
// a seq or t_us that is not a whole number, or a value that is not a number.
var ErrFrameSyntax = errors.New("frame syntax")

// ErrCRC is returned when the CRC-16/CCITT-FALSE of a frame's bytes before
// '*' differs from the four hex digits after it.
var ErrCRC = errors.New("checksum mismatch")

// ErrFieldCount is returned when a frame or delimited line has a different
// number of fields than the source's channels (or columns) say.
var ErrFieldCount = errors.New("wrong field count")

// ErrFrameRange is returned when a number is out of its representable range:
// a seq above 4294967295, a t_us beyond int64, or a value that overflows
// float64 (such as 1e999).
var ErrFrameRange = errors.New("number out of range")

// ErrFrameNaN is returned when a value's text is NaN or an infinity ("NaN",
// "Inf", "-inf", "infinity"): a device that sends these has no reading.
var ErrFrameNaN = errors.New("NaN or infinite value")

// ErrEmptyLine is returned when a delimited line is empty or only spaces.
var ErrEmptyLine = errors.New("empty line")

// FrameError says why one line from a serial stream was rejected. It wraps
// one of the sentinels above (ErrCRC, ErrFrameSyntax, ...), so errors.Is
// works, and carries the Reason under which the source counts it.
//
// ParseFrame and DelimitedFormat.Parse leave Source empty and Offset zero;
// the serial source fills them in.
type FrameError struct {
	Source string // source name
	Offset int64  // byte offset of the line in the stream since the port was opened
	Field  int    // 1-based field number, 0 when the line as a whole is at fault
	Text   string // the offending text, at most 32 bytes, when it helps
	Reason Reason // how the rejection is counted
	Err    error  // one of the sentinels
}

func (e *FrameError) Error() string {
	b := make([]byte, 0, 96)
	if e.Source != "" {
		b = append(b, "source "...)
		b = append(b, e.Source...)
		b = append(b, ": "...)
	}
	b = append(b, "line at byte "...)
	b = strconv.AppendInt(b, e.Offset, 10)
	if e.Field > 0 {
		b = append(b, ", field "...)
		b = strconv.AppendInt(b, int64(e.Field), 10)
	}
	b = append(b, ": "...)
	b = append(b, e.Err.Error()...)
	if e.Text != "" {
		b = append(b, ": "...)
		b = strconv.AppendQuote(b, e.Text)
	}
	return string(b)
}

func (e *FrameError) Unwrap() error { return e.Err }

// excerpt returns at most 32 bytes of p as a string for an error message.
func excerpt(p []byte) string {
	if len(p) > 32 {
		p = p[:32]
	}
	return string(p)
}
