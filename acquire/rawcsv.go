package acquire

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"liftyard/rig"
)

// ErrRawCSV is returned (wrapped in a *rig.Error) when a raw CSV file cannot
// be imported.
var ErrRawCSV = errors.New("bad raw CSV")

// rawCSVError is a problem in a raw CSV file, printed as
// `raw.csv:12: column "pitot": "1.2.3" is not a number`. col is the column
// (channel) at fault, or "".
func rawCSVError(name string, line int, col, format string, args ...any) error {
	if col != "" {
		format = "column %q: " + format
		args = append([]any{col}, args...)
	}
	return &rig.Error{File: name, Line: line, Key: col, Err: rig.Problem(ErrRawCSV, format, args...)}
}

// DefaultRawCSVBlock is the block length ReadRawCSV uses when asked for
// none: 100 samples, 0.1 s at 1 kHz, the size of a live block.
const DefaultRawCSVBlock = 100

// ReadRawCSV reads a raw CSV record (docs/design.md §3.3) and hands it on as Blocks
// of source, as a live source would:
//
//	t_s,n_fore,n_aft,pitot
//	1733061000.000000,812.1,790.4,201.4
//	1733061000.005000,813.0,,201.9
//
// The header's first column is t_s, the device time in seconds (read to the
// microsecond exactly from its decimal digits); the others are channel
// names, each once. Each row is one sample time with raw readings; a blank
// cell (or NaN) means no sample. Rows must be in increasing time order.
//
// Samples go into blocks of at most blockSamples (≤ 0: DefaultRawCSVBlock)
// that share one spacing: a change of spacing, such as a gap or a new rate,
// starts a new block, whose second sample sets its spacing. A block that
// follows a full one at the same spacing keeps it. A block of one sample
// (the last row, after a change) takes the spacing of the block before it;
// a file with one sample time cannot tell its spacing and is refused.
//
// Bad input never panics: every problem is a *rig.Error (wrapping
// ErrRawCSV) with the line and column, e.g. `raw.csv:12: column "pitot":
// "1.2.3" is not a number`. Blocks before the bad line have already been
// emitted. An error from emit stops the read and is returned as is. emit
// owns each Block.
func ReadRawCSV(r io.Reader, source string, blockSamples int, emit func(Block) error) error {
	return ReadRawCSVAt(r, source, blockSamples, time.Time{}, emit)
}

// RelativeBeforeUs is the device time (µs) below which a raw CSV's t_s is
// taken as relative (seconds from power-up or from the start of the file)
// rather than Unix time: 2001-09-09, before any file this tool reads.
const RelativeBeforeUs = 1_000_000_000 * 1_000_000

// ReadRawCSVAt is ReadRawCSV with the file's wall-clock start: the UTC time
// of its first row. A non-zero start, or else a first line
//
//	# start 2026-03-14T09:00:00Z
//
// before the header (RFC 3339; start overrides it), gives every block a
// receive time: start + (its last sample time − the first row's time). The
// pipeline's clock alignment (acquire.Aligner) then maps the file's t_s to
// UTC, whatever its origin. Without either, blocks have no receive time and
// t_s is taken as Unix time.
func ReadRawCSVAt(r io.Reader, source string, blockSamples int, start time.Time, emit func(Block) error) error {
	return readRawCSV(r, source, blockSamples, start, rawReadOptions{}, emit)
}

// rawReadOptions are the ways of reading a raw CSV that give the same
// blocks.
type rawReadOptions struct {
	// straight reads every line with encoding/csv (csvRows): the
	// reference the fast path is tested against.
	straight bool
	// reuse hands emit the same series again and again: emit must not
	// keep a block (CheckRawCSV's counting pass).
	reuse bool
}

// rawCSVBuffer is the read buffer of a raw CSV: a few thousand rows.
const rawCSVBuffer = 256 << 10

func readRawCSV(r io.Reader, source string, blockSamples int, start time.Time, opt rawReadOptions, emit func(Block) error) error {
	if blockSamples <= 0 {
		blockSamples = DefaultRawCSVBlock
	}
	lineOff := 0 // lines before the header (the "# start" line)
	fail := func(line int, col, format string, args ...any) error {
		if line > 0 {
			line += lineOff
		}
		return rawCSVError(source, line, col, format, args...)
	}
	parseErr := func(err error) error {
		var ce *errCSV
		if !errors.As(err, &ce) {
			return rawCSVError(source, 0, "", "%v", err)
		}
		msg := ce.err.Error()
		if errors.Is(ce.err, csv.ErrFieldCount) {
			msg = "wrong number of fields (every row has one cell per header column; leave a cell blank for no sample)"
		}
		return fail(ce.line, "", "%s", msg)
	}
	br := bufio.NewReaderSize(r, rawCSVBuffer)
	if c, err := br.Peek(1); err == nil && c[0] == '#' {
		first, err := br.ReadString('\n')
		if err != nil && err != io.EOF {
			return rawCSVError(source, 1, "", "%v", err)
		}
		lineOff = 1
		t, err := parseStartLine(first)
		if err != nil {
			return rawCSVError(source, 1, "", "%v", err)
		}
		if start.IsZero() {
			start = t
		}
	}
	var firstUs int64 // device time of the first row
	rows := newCSVRows(br, opt.straight)
	headerB, _, err := rows.next()
	if err == io.EOF {
		return fail(0, "", "empty file: want a header t_s,<channel>,... and rows of readings")
	}
	if err != nil {
		return parseErr(err)
	}
	header := make([]string, len(headerB))
	for i, h := range headerB {
		header[i] = string(h)
	}
	if len(header) < 2 || strings.TrimSpace(strings.TrimPrefix(header[0], "\ufeff")) != "t_s" {
		return fail(1, "", "header %q: want t_s followed by channel names", strings.Join(header, ","))
	}
	names := make([]string, len(header)-1)
	seen := map[string]bool{}
	for i, h := range header[1:] {
		h = strings.TrimSpace(h)
		switch {
		case h == "":
			return fail(1, "", "header column %d has no channel name", i+2)
		case seen[h]:
			return fail(1, h, "channel named twice in the header")
		}
		seen[h] = true
		names[i] = h
	}

	var (
		seq    uint64
		cur    *Block // the block being filled (open), or nil
		open   Block
		spare  []Series // the last block's series, when opt.reuse
		lastDt int64    // spacing of the last block emitted
		prevT  int64
		prevLn int
		nrows  int
	)
	newBlock := func(t0 int64) {
		open = Block{Source: source, Seq: seq, T0Us: t0}
		cur = &open
		if spare != nil {
			cur.Series, spare = spare, nil
			for i := range cur.Series {
				cur.Series[i].Raw = cur.Series[i].Raw[:0]
			}
		} else {
			cur.Series = make([]Series, len(names))
			for i, n := range names {
				cur.Series[i] = Series{Channel: n, Raw: make([]float64, 0, blockSamples)}
			}
		}
		seq++
	}
	flush := func() error {
		if cur == nil || cur.Len() == 0 {
			return nil
		}
		if cur.DtUs <= 0 {
			cur.DtUs = lastDt
		}
		if cur.DtUs <= 0 {
			return fail(0, "", "one sample time only: the sample spacing cannot be told")
		}
		lastDt = cur.DtUs
		b := *cur
		cur = nil
		if !start.IsZero() {
			b.Received = start.Add(time.Duration(b.T0Us+int64(b.Len()-1)*b.DtUs-firstUs) * time.Microsecond).UTC()
		}
		if opt.reuse {
			spare = b.Series
		}
		return emit(b)
	}
	vals := make([]float64, len(names))
	for {
		rec, line, err := rows.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return parseErr(err)
		}
		ts := bytes.TrimSpace(rec[0])
		tUs, ok := parseSecondsUs(ts)
		if !ok {
			return fail(line, "t_s", "%q is not a time in seconds", rec[0])
		}
		if nrows > 0 && tUs <= prevT {
			return fail(line, "t_s", "%s s is not after %s s on line %d (rows must be in time order)",
				ts, formatUs(prevT), prevLn)
		}
		for i := range names {
			s := bytes.TrimSpace(rec[i+1])
			if len(s) == 0 {
				vals[i] = math.NaN()
				continue
			}
			v, err := parseFloat(s)
			if err != nil || math.IsInf(v, 0) {
				return fail(line, names[i], "%q is not a number", s)
			}
			vals[i] = v
		}
		// Does this row continue the current block?
		var nextDt int64 // spacing of a new block that continues the stream
		if cur != nil {
			dt := tUs - prevT
			switch {
			case cur.DtUs == 0 && cur.Len() < blockSamples:
				cur.DtUs = dt // the second sample sets the spacing
			case dt == cur.DtUs && cur.Len() < blockSamples:
			default:
				if cur.DtUs == 0 || dt == cur.DtUs {
					cur.DtUs, nextDt = dt, dt // full: the stream goes on
				}
				if err := flush(); err != nil {
					return err
				}
			}
		}
		if cur == nil {
			newBlock(tUs)
			cur.DtUs = nextDt
		}
		for i, v := range vals {
			cur.Series[i].Raw = append(cur.Series[i].Raw, v)
		}
		if nrows == 0 {
			firstUs = tUs
		}
		prevT, prevLn = tUs, line+lineOff
		nrows++
	}
	if nrows == 0 {
		return fail(0, "", "no rows after the header")
	}
	return flush()
}

// RawCSVInfo is what CheckRawCSV learns of a raw CSV.
type RawCSVInfo struct {
	Channels []string // the header's channel names, in order
	Rows     int      // sample times
	FirstUs  int64    // t_s of the first row, µs
	// Relative is true when the file gives no wall-clock start (no start
	// and no "# start" line) and its t_s is before RelativeBeforeUs: a
	// time from power-up, not Unix time.
	Relative bool
}

// CheckRawCSV reads a whole raw CSV as ReadRawCSVAt would, with the same
// errors, without keeping its readings: the check before an import.
func CheckRawCSV(r io.Reader, source string, start time.Time) (RawCSVInfo, error) {
	var info RawCSVInfo
	err := readRawCSV(r, source, 0, start, rawReadOptions{reuse: true}, func(b Block) error {
		if info.Channels == nil {
			info.Relative = b.Received.IsZero() && b.T0Us < RelativeBeforeUs
			info.FirstUs = b.T0Us
			info.Channels = make([]string, len(b.Series))
			for i, s := range b.Series {
				info.Channels[i] = s.Channel
			}
		}
		info.Rows += b.Len()
		return nil
	})
	return info, err
}

// parseSecondsUs reads a time in seconds as whole microseconds. Plain
// decimals ("1733061000.000125") are read exactly, digit by digit, and
// rounded to the microsecond past six decimals; other forms ("1.7e9") go
// through ParseFloat.
func parseSecondsUs(s []byte) (int64, bool) {
	if len(s) == 0 {
		return 0, false
	}
	neg := false
	body := s
	if body[0] == '-' || body[0] == '+' {
		neg = body[0] == '-'
		body = body[1:]
	}
	intPart, frac, hasDot := bytes.Cut(body, []byte{'.'})
	plain := len(intPart) > 0 || (hasDot && len(frac) > 0)
	for _, part := range [2][]byte{intPart, frac} {
		for _, c := range part {
			if c < '0' || c > '9' {
				plain = false
				break
			}
		}
	}
	if plain && len(intPart) <= 12 {
		var whole int64
		for _, c := range intPart {
			whole = whole*10 + int64(c-'0')
		}
		var us int64
		for i := range 6 {
			us *= 10
			if i < len(frac) {
				us += int64(frac[i] - '0')
			}
		}
		if len(frac) > 6 && frac[6] >= '5' {
			us++
		}
		t := whole*1_000_000 + us
		if neg {
			t = -t
		}
		return t, true
	}
	v, err := strconv.ParseFloat(string(s), 64)
	if err != nil || math.IsNaN(v) || math.Abs(v) > 9e12 {
		return 0, false
	}
	return int64(math.Round(v * 1e6)), true
}

// parseStartLine reads "# start 2026-03-14T09:00:00Z" (a colon or "=" after
// start is allowed too).
func parseStartLine(line string) (time.Time, error) {
	body := strings.TrimSpace(strings.TrimPrefix(strings.TrimSpace(strings.TrimPrefix(line, "\ufeff")), "#"))
	key, val, _ := strings.Cut(body, " ")
	key = strings.TrimRight(key, ":=")
	if k, v, ok := strings.Cut(body, "="); ok && strings.TrimSpace(k) == "start" {
		key, val = "start", v
	} else if k, v, ok := strings.Cut(body, ":"); ok && strings.TrimSpace(k) == "start" {
		key, val = "start", v
	}
	if key != "start" {
		return time.Time{}, fmt.Errorf("comment line %q: the only line allowed before the header is \"# start 2026-03-14T09:00:00Z\" (the UTC time of the first row)", rig.Excerpt(strings.TrimSpace(line)))
	}
	t, err := time.Parse(time.RFC3339Nano, strings.TrimSpace(val))
	if err != nil {
		return time.Time{}, fmt.Errorf("start %q is not an RFC 3339 time (write 2026-03-14T09:00:00Z)", rig.Excerpt(strings.TrimSpace(val)))
	}
	return t.UTC(), nil
}

// formatUs writes µs as seconds with six decimals.
func formatUs(tUs int64) string {
	sign := ""
	u := uint64(tUs)
	if tUs < 0 {
		sign = "-"
		u = -u
	}
	return fmt.Sprintf("%s%d.%06d", sign, u/1e6, u%1e6)
}
