package storage

import (
	"bufio"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"

	"liftyard/calibrate"
	"liftyard/rig"
)

// valueUnitSuffix is the column suffix of each quantity's SI unit in a
// values export (STYLE §2: the unit ends the name).
var valueUnitSuffix = map[rig.Quantity]string{
	rig.QuantityForce:       "n",
	rig.QuantityMoment:      "n_m",
	rig.QuantityPressure:    "pa",
	rig.QuantitySpeed:       "m_s",
	rig.QuantityAngle:       "rad",
	rig.QuantityTemperature: "k",
	rig.QuantityRotation:    "rad_s",
	rig.QuantityHumidity:    "frac",
	rig.QuantityVoltage:     "v",
}

// ValueColumn returns the export column name of channel ch: its name and
// the SI unit of its quantity, e.g. n_fore_n, pitot_pa, alpha_rad.
func ValueColumn(ch rig.Channel) string {
	if s, ok := valueUnitSuffix[ch.Quantity]; ok {
		return ch.Name + "_" + s
	}
	return ch.Name
}

// ExportValues writes the calibrated values of run id as CSV: a header
// t_s,<channel>_<SI unit>,... (ValueColumn), then one row per sample time
// in device time order across all sources, like ExportRaw. Each raw block
// goes through cal (the calibrator built for r, with the stored
// calibrations the run used), so the values are exactly those the
// estimator saw. Columns are r's channels in the rig file's order, those
// that the run's blocks carry; a blank cell is no sample (another source's
// time, or NaN). Blocks are read in short chunks, as in ExportRaw.
func (s *Store) ExportValues(w io.Writer, id uint64, r *rig.Rig, cal *calibrate.Calibrator) error {
	if r == nil || cal == nil {
		return fmt.Errorf("export values run %d: a rig and a calibrator are needed", id)
	}
	sources, err := s.rawSources(id)
	if err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	carried := map[string]bool{}
	for _, src := range sources {
		it := s.newBlockIter(id, src)
		for {
			b, ok, err := it.next()
			if err != nil {
				return fmt.Errorf("export values run %d: %w", id, err)
			}
			if !ok {
				break
			}
			for _, sr := range b.Series {
				carried[sr.Channel] = true
			}
		}
	}
	col := map[string]int{}
	header := []string{"t_s"}
	for _, ch := range r.Channels {
		if carried[ch.Name] {
			col[ch.Name] = len(header)
			header = append(header, ValueColumn(ch))
		}
	}

	type cursor struct {
		it  *blockIter
		b   calibrate.Block
		i   int
		end bool
	}
	advance := func(c *cursor) error {
		for !c.end && c.i >= c.b.Len() {
			b, ok, err := c.it.next()
			if err != nil {
				return err
			}
			if !ok {
				c.end = true
				return nil
			}
			c.b, c.i = cal.Apply(&b), 0
		}
		return nil
	}
	curs := make([]*cursor, len(sources))
	for i, src := range sources {
		curs[i] = &cursor{it: s.newBlockIter(id, src)}
		if err := advance(curs[i]); err != nil {
			return fmt.Errorf("export values run %d: %w", id, err)
		}
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	cw := csv.NewWriter(bw)
	if err := cw.Write(header); err != nil {
		return err
	}
	row := make([]string, len(header))
	var buf []byte
	at := func(c *cursor) int64 { return c.b.T0Us + int64(c.i)*c.b.DtUs }
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
			for _, sr := range c.b.Series {
				j, ok := col[sr.Channel]
				if !ok || c.i >= len(sr.Values) {
					continue
				}
				if v := sr.Values[c.i]; !math.IsNaN(v) && !math.IsInf(v, 0) {
					buf = strconv.AppendFloat(buf[:0], v, 'g', -1, 64)
					row[j] = string(buf)
				}
			}
			c.i++
			if err := advance(c); err != nil {
				return fmt.Errorf("export values run %d: %w", id, err)
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
