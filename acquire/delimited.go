package acquire

import (
	"bytes"
	"math"
	"strconv"
	"strings"

	"liftyard/rig"
)

// DelimitedFormat describes plain delimited lines from a third-party
// amplifier, one sample time per line, for example with Delimiter ";" and
// Columns ["t_ms", "n_fore", "_", "pitot"]:
//
//	1250.0 ; 812.4 ; 17 ; 201.9
//
// Each field is trimmed of surrounding spaces and tabs. Columns names the
// fields in order: a channel name, "_" to skip the field, or at most one of
// "t_us", "t_ms", "t_s" for a device time column (rig.TimeColumns). A line
// must have exactly len(Columns) fields. A Delimiter of spaces only (" ")
// splits on runs of spaces and tabs, as column-aligned output needs; any
// other Delimiter, "\t" included, splits on each occurrence of the exact
// string, so an empty field is seen (and rejected) rather than merged away.
// An empty Delimiter means ",".
//
// What a source does with lines that do not parse: an empty line is
// ErrEmptyLine and a header line (names, not numbers) is ErrFrameSyntax;
// both are counted once each under ReasonParse, like any other bad line, so
// the counts stay exact and nothing is skipped silently.
type DelimitedFormat struct {
	Delimiter string
	Columns   []string
}

// DelimitedRecord is one parsed delimited line.
type DelimitedRecord struct {
	TUs     int64     // device time, µs, when HasTime
	HasTime bool      // the line has a time column
	Values  []float64 // in the order of DelimitedFormat.Channels
}

// Channels returns the channel names in the order of DelimitedRecord.Values:
// the columns that are neither "_" nor a time column.
func (f *DelimitedFormat) Channels() []string { return rig.ColumnChannels(f.Columns) }

// Parse parses one line into dst, reusing dst.Values. The line may end in
// "\n" or "\r\n". Errors are *FrameError wrapping ErrFrameTooLong,
// ErrEmptyLine, ErrFieldCount, ErrFrameSyntax, ErrFrameRange or ErrFrameNaN
// (a NaN or infinite reading or time), with Field set for a bad field.
func (f *DelimitedFormat) Parse(line []byte, dst *DelimitedRecord) error {
	line = trimEOL(line)
	if len(line) > MaxLineBytes {
		return &FrameError{Reason: ReasonParse, Err: ErrFrameTooLong}
	}
	if len(bytes.Trim(line, " \t")) == 0 {
		return &FrameError{Reason: ReasonParse, Err: ErrEmptyLine}
	}
	delim := f.Delimiter
	if delim == "" {
		delim = ","
	}
	blank := strings.Trim(delim, " ") == ""
	if n := countFields(line, delim, blank); n != len(f.Columns) {
		return &FrameError{Reason: ReasonFieldCount, Err: ErrFieldCount,
			Text: strconv.Itoa(n) + " fields, columns name " + strconv.Itoa(len(f.Columns))}
	}
	dst.Values = dst.Values[:0]
	dst.HasTime, dst.TUs = false, 0
	rest := line
	if blank {
		rest = bytes.Trim(rest, " \t")
	}
	for i, col := range f.Columns {
		var field []byte
		field, rest = cutField(rest, delim, blank)
		field = bytes.Trim(field, " \t")
		if col == "_" {
			continue
		}
		v, err := parseValue(field)
		if err != nil {
			return fieldError(i+1, field, err)
		}
		if factor, isTime := rig.TimeColumns[col]; isTime {
			us := v * factor
			if math.Abs(us) >= 9.2e18 {
				return fieldError(i+1, field, ErrFrameRange)
			}
			dst.TUs, dst.HasTime = int64(math.Round(us)), true
			continue
		}
		dst.Values = append(dst.Values, v)
	}
	return nil
}

// countFields counts the fields of line.
func countFields(line []byte, delim string, blank bool) int {
	if !blank {
		return bytes.Count(line, []byte(delim)) + 1
	}
	n := 0
	in := false
	for _, c := range line {
		sp := c == ' ' || c == '\t'
		if !sp && !in {
			n++
		}
		in = !sp
	}
	return n
}

// cutField returns the first field of rest and what follows its delimiter.
func cutField(rest []byte, delim string, blank bool) (field, after []byte) {
	if !blank {
		i := bytes.Index(rest, []byte(delim))
		if i < 0 {
			return rest, nil
		}
		return rest[:i], rest[i+len(delim):]
	}
	i := bytes.IndexAny(rest, " \t")
	if i < 0 {
		return rest, nil
	}
	return rest[:i], bytes.TrimLeft(rest[i:], " \t")
}
