package storage

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
)

// exportTimeLayout is RFC 3339 in UTC with microseconds always written
// (the device clock counts µs).
const exportTimeLayout = "2006-01-02T15:04:05.000000Z07:00"

// segmentColumns are the fields of one exported segment, in order
// (DESIGN §3.4). Field names carry units; "_u95" is the expanded (95 %)
// uncertainty U = k·u with k from Student t (calibrate.Value.U95).
var segmentColumns = []string{
	"run", "segment", "t_start", "t_end", "n", "n_eff", "alpha_deg",
	"q_pa", "q_u95_pa", "speed_m_s", "rho_kg_m3", "re",
	"cl", "cl_u95", "cd", "cd_u95", "spin_ratio", "design_cl", "en",
}

// roofColumns follow segmentColumns for roof rows (DESIGN §3.4 "roof
// fields where they apply"): one row is one zone in one block. cp_mean is
// the zone's area-weighted net Cp (negative = uplift), cp_rms its standard
// deviation over the block, cp_peak the expected extreme from the Gumbel
// fit, uplift_n the mean net force on the zone (negative = upward) and
// design_cp the zone's design net Cp; en compares cp_mean with design_cp.
var roofColumns = []string{
	"zone", "cp_mean", "cp_u95", "cp_rms", "cp_peak", "uplift_n", "uplift_u95_n", "design_cp",
}

// cell is one exported value: a JSON literal, or null (empty in CSV).
type cell struct {
	json string // JSON literal; "" means null
	csv  string
}

var nullCell = cell{}

func intCell(v int64) cell {
	s := strconv.FormatInt(v, 10)
	return cell{s, s}
}

// floatCell formats v as encoding/json does; NaN and ±Inf become null,
// since JSON cannot hold them.
func floatCell(v float64) cell {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nullCell
	}
	b, _ := json.Marshal(v) // cannot fail for a finite float
	return cell{string(b), string(b)}
}

func timeCell(t time.Time) cell {
	if t.IsZero() {
		return nullCell
	}
	s := t.UTC().Format(exportTimeLayout)
	return cell{strconv.Quote(s), s}
}

// isZeroValue reports a calibrate.Value that means "not measured".
func isZeroValue(v calibrate.Value) bool { return v.X == 0 && v.U == 0 && v.Dof == 0 }

// radToDeg converts an angle for display and export only (STYLE §2).
func radToDeg(rad float64) float64 { return rad * 180 / math.Pi }

// segmentCells gives the segmentColumns of one row. On a roof row (Zone
// set) the balance fields that do not apply — alpha_deg, cl, cd, their
// U95, spin_ratio, design_cl — are null, and en compares with design_cp.
func segmentCells(run Run, sg *estimate.Segment) []cell {
	roof := sg.Zone != ""
	design := nullCell
	if !roof && !isZeroValue(sg.DesignCL) {
		design = floatCell(sg.DesignCL.X)
	}
	en := nullCell
	if (!roof && !isZeroValue(sg.DesignCL)) || (roof && !isZeroValue(sg.DesignCp)) {
		en = floatCell(sg.En) // NaN (no comparison made) is null as well
	}
	balance := func(v float64) cell {
		if roof {
			return nullCell
		}
		return floatCell(v)
	}
	return []cell{
		intCell(int64(run.ID)), intCell(int64(sg.Index)), timeCell(sg.TStart), timeCell(sg.TEnd),
		intCell(int64(sg.N)), floatCell(sg.NEff), balance(radToDeg(sg.AlphaRad.X)),
		floatCell(sg.QPa.X), floatCell(sg.QPa.U95()), floatCell(sg.SpeedMPerS.X),
		floatCell(sg.RhoKgPerM3), floatCell(sg.Re),
		balance(sg.CL.X), balance(sg.CL.U95()), balance(sg.CD.X), balance(sg.CD.U95()),
		balance(sg.SpinRatio), design, en,
	}
}

// roofCells gives the roofColumns of one row; all null on a row without a
// zone (a force-balance segment in a CSV that also holds roof rows).
func roofCells(sg *estimate.Segment) []cell {
	out := make([]cell, len(roofColumns))
	if sg.Zone == "" {
		return out
	}
	s := strconv.Quote(sg.Zone)
	out[0] = cell{s, sg.Zone}
	out[1], out[2] = floatCell(sg.CpMean.X), floatCell(sg.CpMean.U95())
	out[3], out[4] = floatCell(sg.CpRMS), floatCell(sg.CpPeak)
	out[5], out[6] = floatCell(sg.UpliftN.X), floatCell(sg.UpliftN.U95())
	if !isZeroValue(sg.DesignCp) {
		out[7] = floatCell(sg.DesignCp.X)
	}
	return out
}

// hasRoof reports whether any segment is a roof row.
func hasRoof(segs []estimate.Segment) bool {
	for i := range segs {
		if segs[i].Zone != "" {
			return true
		}
	}
	return false
}

// ExportSegments writes the result rows of run in format "json" (an array,
// one object per segment, fields as in DESIGN §3.4, null where a value does
// not apply or is not a number) or "csv" (a header row, then the same fields,
// an empty cell for null). design_cl and en are null when the segment has
// no design value; t_start and t_end are RFC 3339 in UTC with microseconds;
// alpha_deg is in degrees; *_u95 are expanded uncertainties at 95 %.
//
// Roof rows (Segment.Zone set) carry roofColumns after the common ones: in
// JSON only on roof rows, in CSV as extra columns whenever the export
// holds a roof row (empty cells on any other row). A force-balance export
// is therefore unchanged by the roof fields.
func ExportSegments(w io.Writer, run Run, segs []estimate.Segment, format string) error {
	switch format {
	case "json":
		return exportSegmentsJSON(w, run, segs)
	case "csv":
		return exportSegmentsCSV(w, run, segs)
	}
	return fmt.Errorf("export segments as %q: %w (use json or csv)", format, ErrFormat)
}

func exportSegmentsJSON(w io.Writer, run Run, segs []estimate.Segment) error {
	bw := bufio.NewWriter(w)
	if len(segs) == 0 {
		bw.WriteString("[]\n")
		return bw.Flush()
	}
	bw.WriteString("[\n")
	for i := range segs {
		bw.WriteString("  {")
		names, cells := segmentColumns, segmentCells(run, &segs[i])
		if segs[i].Zone != "" {
			names = append(append([]string(nil), segmentColumns...), roofColumns...)
			cells = append(cells, roofCells(&segs[i])...)
		}
		for j, c := range cells {
			if j > 0 {
				bw.WriteString(", ")
			}
			bw.WriteString(strconv.Quote(names[j]))
			bw.WriteString(": ")
			if c.json == "" {
				bw.WriteString("null")
			} else {
				bw.WriteString(c.json)
			}
		}
		if i < len(segs)-1 {
			bw.WriteString("},\n")
		} else {
			bw.WriteString("}\n")
		}
	}
	bw.WriteString("]\n")
	return bw.Flush()
}

func exportSegmentsCSV(w io.Writer, run Run, segs []estimate.Segment) error {
	cw := csv.NewWriter(w)
	header, roof := segmentColumns, hasRoof(segs)
	if roof {
		header = append(append([]string(nil), segmentColumns...), roofColumns...)
	}
	if err := cw.Write(header); err != nil {
		return err
	}
	row := make([]string, len(header))
	for i := range segs {
		cells := segmentCells(run, &segs[i])
		if roof {
			cells = append(cells, roofCells(&segs[i])...)
		}
		for j, c := range cells {
			row[j] = c.csv
		}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// ExportRaw writes the raw readings of run id as CSV (DESIGN §3.3 "Raw CSV"):
// a header t_s,<channel>,..., then one row per sample time, in device time
// order across all sources; a blank cell means that channel has no sample at
// that time (another source's time, or a NaN reading). t_s is the device
// clock in seconds with microsecond digits, written exactly from t_us.
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
	if err := s.writeSampleCSV(w, id, sources, header, col, raw); err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	return nil
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
