package storage

import (
	"bufio"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"time"

	"liftyard/acquire"
	"liftyard/estimate"
	"liftyard/rig"
)

// ExportSegments writes the result rows of run in format "json" (an array,
// one object per segment) or "csv" (a header row, then one row per
// segment). Both render the result schema, estimate.Columns (listed in
// docs/columns.md): a column that does not apply to a row's rig kind, or
// that the row has no value for (no design value, NaN), is absent from the
// JSON object and an empty CSV cell, never 0. Times are RFC 3339 in UTC
// (estimate.TimeLayout); alpha_deg is in degrees; *_u95 are expanded
// uncertainties at 95 %. The CSV header holds the columns that apply to the
// kinds of the rows (of the run's kind when there are none).
func ExportSegments(w io.Writer, run Run, segs []estimate.Segment, format string) error {
	rows := make([]estimate.Row, len(segs))
	for i := range segs {
		rows[i] = estimate.NewRow(run.ID, rig.Kind(run.Kind), &segs[i])
	}
	switch format {
	case "json":
		return exportSegmentsJSON(w, rows)
	case "csv":
		return exportSegmentsCSV(w, run, rows)
	}
	return fmt.Errorf("export segments as %q: %w (use json or csv)", format, ErrFormat)
}

func exportSegmentsJSON(w io.Writer, rows []estimate.Row) error {
	bw := bufio.NewWriter(w)
	if len(rows) == 0 {
		bw.WriteString("[]\n")
		return bw.Flush()
	}
	bw.WriteString("[\n")
	for i, r := range rows {
		bw.WriteString("  {")
		for j, f := range r.Fields() {
			if j > 0 {
				bw.WriteString(", ")
			}
			bw.WriteString(strconv.Quote(f.Column.Name))
			bw.WriteString(": ")
			bw.Write(f.JSON())
		}
		if i < len(rows)-1 {
			bw.WriteString("},\n")
		} else {
			bw.WriteString("}\n")
		}
	}
	bw.WriteString("]\n")
	return bw.Flush()
}

func exportSegmentsCSV(w io.Writer, run Run, rows []estimate.Row) error {
	var kinds []rig.Kind
	for _, r := range rows {
		if k := r.Kind(); !slices.Contains(kinds, k) {
			kinds = append(kinds, k)
		}
	}
	if len(kinds) == 0 && run.Kind != "" {
		kinds = append(kinds, rig.Kind(run.Kind))
	}
	cols := estimate.ColumnsFor(kinds...)
	cw := csv.NewWriter(w)
	if err := cw.Write(estimate.Header(cols)); err != nil {
		return err
	}
	for _, r := range rows {
		if err := cw.Write(r.CSV(cols)); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// ExportRaw writes the raw readings of run id as CSV (docs/design.md §3.3 "Raw CSV"):
// a header t_s,<channel>,..., then one row per sample time, in device time
// order across all sources; a blank cell means that channel has no sample at
// that time (another source's time, or a NaN reading). t_s is the device
// clock in seconds with microsecond digits, written exactly from t_us. When
// the device clock counts from power-up (t_s below acquire.RelativeBeforeUs)
// and the run maps it to UTC, a first line "# start <RFC 3339>" gives the
// wall time of the first row, which import reads back
// (acquire.ReadRawCSVAt), so the round trip keeps the run's wall times.
// Channels appear in the order of their sources' names, then as each source
// first sends them. Blocks are read in short chunks, so a long run streams
// with bounded memory; no read transaction is held while w is written.
func (s *Store) ExportRaw(w io.Writer, id uint64) error {
	sources, err := s.rawSources(id)
	if err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	// Pass 1: the channel set, from every block (cheap next to pass 2, and a
	// channel that appears late still gets its column).
	names, err := s.channelsOf(id, sources)
	if err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	col := map[string]int{}
	header := []string{"t_s"}
	for _, n := range names {
		col[n] = len(header)
		header = append(header, n)
	}
	raw := func(b acquire.Block) sampleBlock {
		sb := sampleBlock{t0Us: b.T0Us, dtUs: b.DtUs, n: b.Len()}
		for _, sr := range b.Series {
			sb.series = append(sb.series, sampleSeries{sr.Channel, sr.Raw})
		}
		return sb
	}
	off, err := s.wallOffsets(id, sources)
	if err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	if len(off) > 0 {
		first, ok, err := s.firstSampleUs(id, sources)
		if err != nil {
			return fmt.Errorf("export raw run %d: %w", id, err)
		}
		if o, has := off[first.source]; ok && has {
			if _, err := fmt.Fprintf(w, "# start %s\n", time.UnixMicro(first.tUs+o).UTC().Format(time.RFC3339Nano)); err != nil {
				return err
			}
		}
	}
	if err := s.writeSampleCSV(w, id, sources, header, col, raw); err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	return nil
}

// firstSampleUs returns the earliest first-block device time over sources,
// the first row ExportRaw writes.
func (s *Store) firstSampleUs(id uint64, sources []string) (first struct {
	source string
	tUs    int64
}, ok bool, err error) {
	for _, src := range sources {
		b, has, err := s.newBlockIter(id, src).next()
		if err != nil {
			return first, false, err
		}
		if has && b.Len() > 0 && (!ok || b.T0Us < first.tUs) {
			first.source, first.tUs, ok = src, b.T0Us, true
		}
	}
	return first, ok, nil
}

// sampleBlock is one block's series as the sample CSV exports write them.
type sampleBlock struct {
	t0Us, dtUs int64
	n          int
	series     []sampleSeries
}

type sampleSeries struct {
	channel string
	v       []float64
}

// channelsOf lists the channels of a run's blocks in the order they first
// appear, source by source.
func (s *Store) channelsOf(id uint64, sources []string) ([]string, error) {
	seen := map[string]bool{}
	var names []string
	for _, src := range sources {
		it := s.newBlockIter(id, src)
		for {
			b, ok, err := it.next()
			if err != nil {
				return nil, err
			}
			if !ok {
				break
			}
			for _, sr := range b.Series {
				if !seen[sr.Channel] {
					seen[sr.Channel] = true
					names = append(names, sr.Channel)
				}
			}
		}
	}
	return names, nil
}

// writeSampleCSV writes one CSV row per sample time, merging the sources'
// blocks by their device time (T0Us + i·DtUs). conv turns each stored block
// into the series to write (raw or calibrated); a series whose channel has
// no column is left out, and a non-finite value is a blank cell. Blocks are
// read in short chunks (blockIter), never in one long read transaction.
func (s *Store) writeSampleCSV(w io.Writer, id uint64, sources []string, header []string, col map[string]int, conv func(acquire.Block) sampleBlock) error {
	type cursor struct {
		it  *blockIter
		b   sampleBlock
		i   int // next sample in b
		end bool
	}
	advance := func(c *cursor) error {
		for !c.end && c.i >= c.b.n {
			b, ok, err := c.it.next()
			if err != nil {
				return err
			}
			if !ok {
				c.end = true
				return nil
			}
			c.b, c.i = conv(b), 0
		}
		return nil
	}
	curs := make([]*cursor, len(sources))
	for i, src := range sources {
		curs[i] = &cursor{it: s.newBlockIter(id, src)}
		if err := advance(curs[i]); err != nil {
			return err
		}
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	cw := csv.NewWriter(bw)
	if err := cw.Write(header); err != nil {
		return err
	}
	row := make([]string, len(header))
	var buf []byte
	at := func(c *cursor) int64 { return c.b.t0Us + int64(c.i)*c.b.dtUs }
	for {
		var tMin int64
		found := false
		for _, c := range curs {
			if !c.end && (!found || at(c) < tMin) {
				tMin, found = at(c), true
			}
		}
		if !found {
			break
		}
		clear(row)
		row[0] = formatMicros(tMin)
		for _, c := range curs {
			if c.end || at(c) != tMin {
				continue
			}
			for _, sr := range c.b.series {
				j, ok := col[sr.channel]
				if !ok || c.i >= len(sr.v) {
					continue
				}
				if v := sr.v[c.i]; !math.IsNaN(v) && !math.IsInf(v, 0) {
					buf = strconv.AppendFloat(buf[:0], v, 'g', -1, 64)
					row[j] = string(buf)
				}
			}
			c.i++
			if err := advance(c); err != nil {
				return err
			}
		}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	return bw.Flush()
}

// formatMicros writes t µs as seconds with six decimals, exactly.
func formatMicros(tUs int64) string {
	sign := ""
	u := uint64(tUs)
	if tUs < 0 {
		sign = "-"
		u = -u
	}
	return fmt.Sprintf("%s%d.%06d", sign, u/1e6, u%1e6)
}
