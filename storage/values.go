package storage

import (
	"fmt"
	"io"
	"slices"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
)

// valueUnitSuffix is the column suffix of each quantity's SI unit in a
// values export (DEVELOPERS.md "Units in names": the unit ends the name).
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
// in time order across all sources, like ExportRaw. t_s is Unix time: the
// device clock, or for a device counting from power-up its clock mapped to
// UTC wall time (wallOffsets), so no value is dated 1970. Each raw block
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
	names, err := s.channelsOf(id, sources)
	if err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	col := map[string]int{}
	header := []string{"t_s"}
	for _, ch := range r.Channels {
		if slices.Contains(names, ch.Name) {
			col[ch.Name] = len(header)
			header = append(header, ValueColumn(ch))
		}
	}
	off, err := s.wallOffsets(id, sources)
	if err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	values := func(b acquire.Block) sampleBlock {
		cb := cal.Apply(&b)
		sb := sampleBlock{t0Us: cb.T0Us + off[b.Source], dtUs: cb.DtUs, n: cb.Len()}
		for _, sr := range cb.Series {
			sb.series = append(sb.series, sampleSeries{sr.Channel, sr.Values})
		}
		return sb
	}
	if err := s.writeSampleCSV(w, id, sources, header, col, values); err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	return nil
}
