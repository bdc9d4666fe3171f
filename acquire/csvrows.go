package acquire

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"errors"
	"io"
	"math"
	"strconv"
)

// csvRows splits a raw CSV into rows of fields without allocating per row:
// the fast path of ReadRawCSV. It reads what encoding/csv reads, with the
// same line numbers and errors: lines end in \n or \r\n (one \r before the
// end of the file is dropped too), empty lines are skipped, and every row
// has as many fields as the header. A field with a double quote is where
// the fast path stops: from that line on, the rest of the file goes through
// encoding/csv (quoted fields, "" escapes, newlines inside quotes, its
// errors), so a quoted file reads exactly as it always did.
type csvRows struct {
	br      *bufio.Reader
	numLine int // lines read by the fast path (encoding/csv's numLine)
	nfields int // fields per row, set by the first row (0 until then)
	fields  [][]byte
	long    []byte // a line longer than br's buffer

	cr     *csv.Reader // non-nil once the rest goes through encoding/csv
	crBase int         // lines read before cr's first line
	rec    [][]byte
}

// newCSVRows reads from br; straight sends the whole file through
// encoding/csv (the reference the fast path is tested against).
func newCSVRows(br *bufio.Reader, straight bool) *csvRows {
	rr := &csvRows{br: br}
	if straight {
		rr.cr = csv.NewReader(br)
		rr.cr.ReuseRecord = true
	}
	return rr
}

// errCSV is an encoding/csv error with its line in the whole file.
type errCSV struct {
	line int
	err  error
}

func (e *errCSV) Error() string { return e.err.Error() }

// next returns the next row's fields (valid until the next call) and its
// first line, io.EOF at the end, or an *errCSV.
func (rr *csvRows) next() ([][]byte, int, error) {
	if rr.cr != nil {
		return rr.nextCSV()
	}
	for {
		line, err := rr.br.ReadSlice('\n')
		if err == bufio.ErrBufferFull {
			rr.long = append(rr.long[:0], line...)
			for err == bufio.ErrBufferFull {
				line, err = rr.br.ReadSlice('\n')
				rr.long = append(rr.long, line...)
			}
			line = rr.long
		}
		if err != nil && err != io.EOF {
			return nil, 0, &errCSV{err: err}
		}
		if len(line) == 0 && err == io.EOF {
			return nil, rr.numLine, io.EOF
		}
		rr.numLine++
		if bytes.IndexByte(line, '"') >= 0 {
			// Quotes: encoding/csv from this line on.
			rr.crBase = rr.numLine - 1
			rr.cr = csv.NewReader(io.MultiReader(bytes.NewReader(append([]byte(nil), line...)), rr.br))
			rr.cr.ReuseRecord = true
			rr.cr.FieldsPerRecord = rr.nfields
			return rr.nextCSV()
		}
		body := line
		if n := len(body); n > 0 && body[n-1] == '\n' {
			body = body[:n-1]
		}
		if n := len(body); n > 0 && body[n-1] == '\r' {
			body = body[:n-1]
		}
		if len(body) == 0 {
			if err == io.EOF {
				return nil, rr.numLine, io.EOF
			}
			continue // empty line
		}
		rr.fields = rr.fields[:0]
		for {
			i := bytes.IndexByte(body, ',')
			if i < 0 {
				rr.fields = append(rr.fields, body)
				break
			}
			rr.fields = append(rr.fields, body[:i])
			body = body[i+1:]
		}
		if rr.nfields == 0 {
			rr.nfields = len(rr.fields)
		} else if len(rr.fields) != rr.nfields {
			return nil, rr.numLine, &errCSV{line: rr.numLine, err: csv.ErrFieldCount}
		}
		return rr.fields, rr.numLine, nil
	}
}

// nextCSV is next through encoding/csv.
func (rr *csvRows) nextCSV() ([][]byte, int, error) {
	rec, err := rr.cr.Read()
	if err == io.EOF {
		return nil, 0, io.EOF
	}
	if err != nil {
		var pe *csv.ParseError
		if errors.As(err, &pe) {
			return nil, pe.Line + rr.crBase, &errCSV{line: pe.Line + rr.crBase, err: pe.Err}
		}
		return nil, 0, &errCSV{err: err}
	}
	if rr.nfields == 0 {
		rr.nfields = len(rec)
	}
	line, _ := rr.cr.FieldPos(0)
	rr.rec = rr.rec[:0]
	for _, f := range rec {
		rr.rec = append(rr.rec, []byte(f))
	}
	return rr.rec, line + rr.crBase, nil
}

// pow10 holds the powers of ten that float64 represents exactly.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// parseFloat is strconv.ParseFloat(string(s), 64) without the string: the
// same value, bit for bit, and the same verdict. Plain decimals ("-3959",
// "812.1", "3.345049e+06") whose digits fit in 2⁵³ and whose power of ten
// is within 10^±22 are one exact conversion and one correctly rounded
// multiplication or division (the exact case of correctly rounded decimal
// conversion, as strconv takes it too); anything else goes to strconv.
func parseFloat(s []byte) (float64, error) {
	if v, ok := parseFloatExact(s); ok {
		return v, nil
	}
	return strconv.ParseFloat(string(s), 64)
}

func parseFloatExact(s []byte) (float64, bool) {
	i, n := 0, len(s)
	neg := false
	if i < n && (s[i] == '+' || s[i] == '-') {
		neg = s[i] == '-'
		i++
	}
	var mant uint64
	digits, exp := 0, 0 // significant digits taken; power of ten
	sawDigit := false
	for ; i < n && s[i] >= '0' && s[i] <= '9'; i++ {
		sawDigit = true
		if mant == 0 && s[i] == '0' {
			continue
		}
		if digits == 19 {
			return 0, false
		}
		mant = mant*10 + uint64(s[i]-'0')
		digits++
	}
	if i < n && s[i] == '.' {
		i++
		for ; i < n && s[i] >= '0' && s[i] <= '9'; i++ {
			sawDigit = true
			exp--
			if mant == 0 && s[i] == '0' {
				continue
			}
			if digits == 19 {
				return 0, false
			}
			mant = mant*10 + uint64(s[i]-'0')
			digits++
		}
	}
	if !sawDigit {
		return 0, false
	}
	if i < n && (s[i] == 'e' || s[i] == 'E') {
		i++
		eneg := false
		if i < n && (s[i] == '+' || s[i] == '-') {
			eneg = s[i] == '-'
			i++
		}
		e, ed := 0, 0
		for ; i < n && s[i] >= '0' && s[i] <= '9'; i++ {
			if ed == 4 {
				return 0, false
			}
			e = e*10 + int(s[i]-'0')
			ed++
		}
		if ed == 0 {
			return 0, false
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	if i != n || mant > 1<<53 {
		return 0, false
	}
	f := float64(mant)
	switch {
	case mant == 0:
	case exp == 0:
	case exp > 0 && exp <= 22:
		f *= pow10[exp]
	case exp < 0 && exp >= -22:
		f /= pow10[-exp]
	default:
		return 0, false
	}
	if neg {
		f = -f
	}
	return f, !math.IsInf(f, 0)
}
