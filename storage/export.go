package storage

import (
	"bufio"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"

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

// ExportRaw writes the raw readings of run id as CSV (docs/design.md §3.3
// "Raw CSV", docs/export.md): a header t_s,<column>,..., then one row per
// sample time of the run's timeline source on the aligned UTC timeline
// (aligned.go): t_s is Unix time in seconds with microsecond digits,
// written exactly; a cell of another source is that source as the
// estimator joins it (fillFromLane: interpolated linearly between its
// readings either side of the row), blank before its first reading and a
// period after its last; a blank cell is also a NaN reading. Every
// reading is written with the fewest digits that give its float64 back
// bit for bit.
//
// A run with one source names its columns by channel, as files written
// before the aligned export did; a run with several names each column
// source/channel (SourceColumn), the timeline source's first, so import
// gives each channel back to its source without being told. Blocks are
// read in short chunks, so a long run streams with bounded memory; no read
// transaction is held while w is written.
func (s *Store) ExportRaw(w io.Writer, id uint64) error {
	_, _, p, err := s.runPlan(id)
	if err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	header := []string{"t_s"}
	for _, c := range p.cols {
		header = append(header, p.name(c, c.Channel))
	}
	if err := s.writeAlignedCSV(w, id, p, header, rawSamples); err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	return nil
}

// rawSamples is a stored block's raw readings as the sample exports take
// them.
func rawSamples(b acquire.Block) sampleBlock {
	sb := sampleBlock{t0Us: b.T0Us, dtUs: b.DtUs, n: b.Len()}
	for _, sr := range b.Series {
		sb.series = append(sb.series, sampleSeries{sr.Channel, sr.Raw})
	}
	return sb
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
		err := s.sourceBlocks(id, src, func(b *acquire.Block) error {
			for _, sr := range b.Series {
				if !seen[sr.Channel] {
					seen[sr.Channel] = true
					names = append(names, sr.Channel)
				}
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	return names, nil
}

// writeAlignedCSV writes the header, then one CSV row per row of the
// aligned timeline (alignedRows); a non-finite value is a blank cell.
func (s *Store) writeAlignedCSV(w io.Writer, id uint64, p alignedPlan, header []string, conv func(acquire.Block) sampleBlock) error {
	bw := bufio.NewWriterSize(w, 64<<10)
	cw := csv.NewWriter(bw)
	if err := cw.Write(header); err != nil {
		return err
	}
	row := make([]string, len(header))
	var buf []byte
	err := s.alignedRows(id, p, conv, func(tUs int64, cells []float64) error {
		row[0] = formatMicros(tUs)
		for j, v := range cells {
			row[j+1] = ""
			if !math.IsNaN(v) && !math.IsInf(v, 0) {
				buf = strconv.AppendFloat(buf[:0], v, 'g', -1, 64)
				row[j+1] = string(buf)
			}
		}
		return cw.Write(row)
	})
	if err != nil {
		return err
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
