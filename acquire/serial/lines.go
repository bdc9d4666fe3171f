package serial

import (
	"bytes"
	"errors"
	"io"

	"go.bug.st/serial"

	"liftyard/acquire"
)

// errReadTimeout is what timeoutReader returns for go.bug.st/serial's
// "no data within the read timeout", which the port itself reports as
// (0, nil). A loop over the port then never spins on empty reads.
var errReadTimeout = errors.New("serial: read timeout")

// errLineTooLong reports a line dropped for exceeding acquire.MaxLineBytes.
var errLineTooLong = errors.New("serial: line too long")

type timeoutReader struct{ p serial.Port }

func (r timeoutReader) Read(b []byte) (int, error) {
	n, err := r.p.Read(b)
	if n == 0 && err == nil {
		return 0, errReadTimeout
	}
	return n, err
}

// lineReader cuts a byte stream into lines in a fixed buffer. A line torn
// across reads (or across a read timeout) is joined; a line longer than
// acquire.MaxLineBytes is reported once and skipped to its newline, so noise
// never grows memory.
type lineReader struct {
	r          io.Reader
	buf        []byte
	start, end int
	off        int64 // stream offset of buf[start]
	skipping   bool  // inside an overlong line: discard up to the next '\n'
}

func newLineReader(r io.Reader) *lineReader {
	return &lineReader{r: r, buf: make([]byte, 2*acquire.MaxLineBytes+8)}
}

// next returns the next complete line, "\n" included, and its stream offset.
// The line is valid until the next call. Errors: errReadTimeout (no complete
// line yet; a partial one is kept), errLineTooLong (with the offset of the
// dropped line), or the reader's own error (the port is gone).
func (l *lineReader) next() (line []byte, off int64, err error) {
	for {
		if i := bytes.IndexByte(l.buf[l.start:l.end], '\n'); i >= 0 {
			line, off = l.buf[l.start:l.start+i+1], l.off
			l.start += i + 1
			l.off += int64(i + 1)
			if l.skipping {
				l.skipping = false
				continue
			}
			return line, off, nil
		}
		// No newline buffered. "+1" leaves room for a '\r' before it.
		if !l.skipping && l.end-l.start > acquire.MaxLineBytes+1 {
			off = l.off
			l.discard()
			l.skipping = true
			return nil, off, errLineTooLong
		}
		if l.skipping {
			l.discard()
		}
		if l.start > 0 {
			copy(l.buf, l.buf[l.start:l.end])
			l.end -= l.start
			l.start = 0
		}
		n, err := l.r.Read(l.buf[l.end:])
		l.end += n
		if n == 0 && err != nil {
			return nil, l.off, err
		}
	}
}

func (l *lineReader) discard() {
	l.off += int64(l.end - l.start)
	l.start, l.end = 0, 0
}

// partial returns the bytes of an unfinished line (not an overlong one).
func (l *lineReader) partial() []byte {
	if l.skipping {
		return nil
	}
	return l.buf[l.start:l.end]
}
