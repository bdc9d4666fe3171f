package calibrate

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"liftyard/rig"
)

// ErrPointsFile is returned (wrapped in a *rig.Error) when a calibration
// points file cannot be read: a missing or unknown column, a value that is
// not a finite number, an unknown direction, a row with too many or too few
// fields, or a file with no points.
var ErrPointsFile = errors.New("bad calibration points file")

// pointsError is a problem in a calibration points file, positioned like
// encoding/csv's ParseError: line and col count from 1; col is 0 when the
// problem concerns a whole line (or the whole file, with line 0). The
// message names the field, so it prints as "line 7: reading ..." (or
// "points.csv:7: ..." once the caller sets File) and col stays in Col.
func pointsError(line, col int, format string, args ...any) error {
	return &rig.Error{Line: line, Col: col, LineOnly: true, Err: rig.Problem(ErrPointsFile, format, args...)}
}

// Column names of a points file.
const (
	colApplied   = "applied"
	colReading   = "reading"
	colDirection = "direction"
)

// ReadPoints reads calibration points from a CSV file (docs/design.md §3.1):
//
//	# dead weights on the fore cell, 2026-12-01
//	applied,reading,direction
//	0,1520,up
//	50,412310,up
//	100,823090,up
//	50,412650,down
//	0,1710,down
//
// The header names the columns: applied (the reference value, in the unit
// of the calibration), reading (the mean raw reading under it) and, when
// loading and unloading points are told apart, direction ("up" while
// loading, "down" while unloading, in any case; blank when not stated).
// Columns may come in any order. Numbers take any Go float syntax
// (strconv.ParseFloat: 1e6, 0x1p20, ...) but must be finite. Blank lines and
// lines starting with '#' are skipped; fields may be quoted as in
// encoding/csv. Errors are *rig.Error values naming the line and column.
func ReadPoints(r io.Reader) ([]Point, error) {
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.FieldsPerRecord = -1 // checked here, with a better message
	cr.TrimLeadingSpace = true
	cr.ReuseRecord = true

	var (
		iApplied, iReading, iDirection = -1, -1, -1
		ncols                          int
		header                         = true
		pts                            []Point
	)
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				return nil, pointsError(pe.Line, pe.Column, "%v", pe.Err)
			}
			return nil, fmt.Errorf("read points: %w", err)
		}
		line, _ := cr.FieldPos(0)
		if blankRecord(rec) {
			continue
		}
		if header {
			header = false
			ncols = len(rec)
			for i, f := range rec {
				// A byte-order mark from a spreadsheet export is not part of
				// the first name (issue 16; the raw CSV reader takes one too).
				name := strings.ToLower(strings.TrimSpace(strings.TrimPrefix(f, "\ufeff")))
				var idx *int
				switch name {
				case colApplied:
					idx = &iApplied
				case colReading:
					idx = &iReading
				case colDirection:
					idx = &iDirection
				default:
					col, _ := fieldColumn(cr, i)
					return nil, pointsError(line, col, "unknown column %q (the header is applied,reading[,direction])", strings.TrimSpace(f))
				}
				if *idx >= 0 {
					col, _ := fieldColumn(cr, i)
					return nil, pointsError(line, col, "column %q appears twice", name)
				}
				*idx = i
			}
			if iApplied < 0 || iReading < 0 {
				missing := colApplied
				if iApplied >= 0 {
					missing = colReading
				}
				return nil, pointsError(line, 0, "header has no %q column (the first line that is not blank or a # comment must be applied,reading[,direction])", missing)
			}
			continue
		}
		if len(rec) != ncols {
			return nil, pointsError(line, 0, "%d fields, the header has %d", len(rec), ncols)
		}
		var p Point
		if p.Applied, err = pointNumber(rec[iApplied]); err != nil {
			col, _ := fieldColumn(cr, iApplied)
			return nil, pointsError(line, col, "applied %q %v", strings.TrimSpace(rec[iApplied]), err)
		}
		if p.Reading, err = pointNumber(rec[iReading]); err != nil {
			col, _ := fieldColumn(cr, iReading)
			return nil, pointsError(line, col, "reading %q %v", strings.TrimSpace(rec[iReading]), err)
		}
		if iDirection >= 0 {
			d := strings.ToLower(strings.TrimSpace(rec[iDirection]))
			switch Direction(d) {
			case "", Up, Down:
				p.Direction = Direction(d)
			default:
				col, _ := fieldColumn(cr, iDirection)
				return nil, pointsError(line, col, "direction %q is not up, down or blank (up while loading, down while unloading)", strings.TrimSpace(rec[iDirection]))
			}
		}
		pts = append(pts, p)
	}
	if header {
		return nil, pointsError(0, 0, "no header: the file is empty (write applied,reading[,direction] and one line per point)")
	}
	if len(pts) == 0 {
		return nil, pointsError(0, 0, "no points after the header")
	}
	return pts, nil
}

// fieldColumn returns the column (from 1) where field i of the last record
// starts.
func fieldColumn(cr *csv.Reader, i int) (int, int) {
	_, col := cr.FieldPos(i)
	return col, 0
}

// blankRecord reports whether a record holds nothing: only blank fields, or
// a comment whose '#' is indented (csv only knows comments at column 1).
func blankRecord(rec []string) bool {
	if len(rec) > 0 && strings.HasPrefix(strings.TrimSpace(rec[0]), "#") {
		return true
	}
	for _, f := range rec {
		if strings.TrimSpace(f) != "" {
			return false
		}
	}
	return true
}

// pointNumber parses one number; the error completes a sentence that starts
// with the field's name and value.
func pointNumber(s string) (float64, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, errors.New("is empty: every point needs a number here")
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && errors.Is(ne.Err, strconv.ErrRange) {
			return 0, errors.New("is out of the float64 range")
		}
		return 0, errors.New("is not a number")
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, errors.New("is not a finite number")
	}
	return v, nil
}

// WritePoints writes pts as a points file that ReadPoints reads back to the
// same values: the header applied,reading,direction and one line per point,
// numbers in the shortest form that round-trips (strconv 'g', -1).
func WritePoints(w io.Writer, pts []Point) error {
	cw := csv.NewWriter(w)
	if err := cw.Write([]string{colApplied, colReading, colDirection}); err != nil {
		return fmt.Errorf("write points: %w", err)
	}
	for i, p := range pts {
		if math.IsNaN(p.Applied) || math.IsInf(p.Applied, 0) || math.IsNaN(p.Reading) || math.IsInf(p.Reading, 0) {
			return fmt.Errorf("write points: point %d is not finite (applied %v, reading %v)", i+1, p.Applied, p.Reading)
		}
		rec := []string{
			strconv.FormatFloat(p.Applied, 'g', -1, 64),
			strconv.FormatFloat(p.Reading, 'g', -1, 64),
			string(p.Direction),
		}
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("write points: %w", err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("write points: %w", err)
	}
	return nil
}
