package calibrate

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"liftyard/rig"
)

// ErrBalanceFile is returned (wrapped in a *rig.Error) when a balance
// loadings file cannot be read: a missing column, a value that is not a
// finite number, a row with too many or too few fields, or no loadings.
var ErrBalanceFile = errors.New("bad balance loadings file")

// AppliedPrefix starts the column of a known applied component in a
// balance loadings file; a column named after an output channel holds that
// output's reading.
const AppliedPrefix = "applied_"

// ReadBalanceLoads reads the combined loadings of a balance calibration
// from a CSV file:
//
//	# bench loadings of the three-cell balance, 2026-11-30 (N)
//	applied_normal,applied_axial,n_fore,n_aft,axial
//	0,0,0.012,-0.004,0.003
//	100,0,52.8,48.1,2.9
//	0,40,1.1,-0.7,39.2
//	100,40,54.0,47.5,42.0
//
// One column per component, named AppliedPrefix + the component's name,
// holds the known applied load; one column per output, named after the
// output channel, holds its reading. Columns may come in any order; other
// columns are refused. Values are in the units the matrix will map (the
// component and output channels' units in the rig file). Blank lines and
// '#' lines are skipped. When rows with every applied load 0 are present,
// the mean of their outputs is the no-load reading and is subtracted from
// every row (the fit has no constant term); zeroed reports it. Errors are
// *rig.Error values naming the line.
func ReadBalanceLoads(r io.Reader, outputs, components []string) (loads []BalanceLoad, zero []float64, err error) {
	if len(outputs) == 0 || len(components) == 0 {
		return nil, nil, &rig.Error{Err: rig.Problem(ErrBalanceFile, "name the outputs and the components")}
	}
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.FieldsPerRecord = -1
	cr.TrimLeadingSpace = true
	fail := func(line int, format string, args ...any) error {
		return &rig.Error{Line: line, Err: rig.Problem(ErrBalanceFile, format, args...)}
	}
	var (
		iOut  = make([]int, len(outputs))
		iApp  = make([]int, len(components))
		ncols int
		head  = true
	)
	for {
		rec, rerr := cr.Read()
		if rerr == io.EOF {
			break
		}
		if rerr != nil {
			var pe *csv.ParseError
			if errors.As(rerr, &pe) {
				return nil, nil, fail(pe.Line, "%v", pe.Err)
			}
			return nil, nil, fmt.Errorf("read balance loadings: %w", rerr)
		}
		line, _ := cr.FieldPos(0)
		if head {
			head, ncols = false, len(rec)
			for i := range iOut {
				iOut[i] = -1
			}
			for i := range iApp {
				iApp[i] = -1
			}
			for c, name := range rec {
				name = strings.TrimSpace(strings.TrimPrefix(name, "\ufeff")) // a spreadsheet's byte-order mark
				if n, ok := strings.CutPrefix(name, AppliedPrefix); ok {
					if k := slices.Index(components, n); k >= 0 && iApp[k] < 0 {
						iApp[k] = c
						continue
					}
				} else if k := slices.Index(outputs, name); k >= 0 && iOut[k] < 0 {
					iOut[k] = c
					continue
				}
				return nil, nil, fail(line, "column %d %q is neither %s<component> of %s nor an output of %s (or it repeats)",
					c+1, name, AppliedPrefix, strings.Join(components, ", "), strings.Join(outputs, ", "))
			}
			for k, c := range iApp {
				if c < 0 {
					return nil, nil, fail(line, "no column %s%s for the applied %s", AppliedPrefix, components[k], components[k])
				}
			}
			for k, c := range iOut {
				if c < 0 {
					return nil, nil, fail(line, "no column %s for the output's reading", outputs[k])
				}
			}
			continue
		}
		if len(rec) != ncols {
			return nil, nil, fail(line, "%d fields, the header has %d", len(rec), ncols)
		}
		num := func(c int) (float64, error) {
			v, perr := strconv.ParseFloat(strings.TrimSpace(rec[c]), 64)
			if perr != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				return 0, fail(line, "field %d %q is not a finite number", c+1, rec[c])
			}
			return v, nil
		}
		l := BalanceLoad{Applied: make([]float64, len(components)), Outputs: make([]float64, len(outputs))}
		for k, c := range iApp {
			if l.Applied[k], err = num(c); err != nil {
				return nil, nil, err
			}
		}
		for k, c := range iOut {
			if l.Outputs[k], err = num(c); err != nil {
				return nil, nil, err
			}
		}
		loads = append(loads, l)
	}
	if len(loads) == 0 {
		return nil, nil, fail(0, "no loadings (a header, then one row per loading)")
	}
	var sum []float64
	n := 0
	for _, l := range loads {
		if slices.ContainsFunc(l.Applied, func(v float64) bool { return v != 0 }) {
			continue
		}
		if sum == nil {
			sum = make([]float64, len(outputs))
		}
		for j, o := range l.Outputs {
			sum[j] += o
		}
		n++
	}
	if n > 0 {
		zero = make([]float64, len(outputs))
		for j := range zero {
			zero[j] = sum[j] / float64(n)
		}
		for i := range loads {
			for j := range loads[i].Outputs {
				loads[i].Outputs[j] -= zero[j]
			}
		}
	}
	return loads, zero, nil
}
