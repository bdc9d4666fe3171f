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
// t_s,<channel>_<SI unit>,... (ValueColumn; source/<channel>_<SI unit>
// when the run has several sources, as in ExportRaw), then one row per
// sample time of the timeline source on the aligned UTC timeline, with the
// same rule for other sources' cells as ExportRaw (aligned.go). Each raw
// block goes through cal (the calibrator built for r, with the stored
// calibrations the run used), so the values are exactly those the
// estimator saw before its zero and drift corrections. Columns are r's
// channels in the rig file's order, those that the run's blocks carry; a
// blank cell is no sample (or NaN). Blocks are read in short chunks, as in
// ExportRaw.
func (s *Store) ExportValues(w io.Writer, id uint64, r *rig.Rig, cal *calibrate.Calibrator) error {
	if r == nil || cal == nil {
		return fmt.Errorf("export values run %d: a rig and a calibrator are needed", id)
	}
	p, err := s.planAligned(id, r, rigOrder(r))
	if err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	header := []string{"t_s"}
	for _, c := range p.cols {
		ch, _ := r.Channel(c.Channel)
		header = append(header, p.name(c, ValueColumn(ch)))
	}
	if err := s.writeAlignedCSV(w, id, p, header, calibratedSamples(cal)); err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	return nil
}

// rigOrder keeps the channels of r, in the rig file's order.
func rigOrder(r *rig.Rig) func([]string) []string {
	return func(names []string) []string {
		var out []string
		for _, ch := range r.Channels {
			if slices.Contains(names, ch.Name) {
				out = append(out, ch.Name)
			}
		}
		return out
	}
}

// calibratedSamples is a stored block's values through cal, SI units.
func calibratedSamples(cal *calibrate.Calibrator) func(acquire.Block) sampleBlock {
	return func(b acquire.Block) sampleBlock {
		cb := cal.Apply(&b)
		sb := sampleBlock{t0Us: cb.T0Us, dtUs: cb.DtUs, n: cb.Len()}
		for _, sr := range cb.Series {
			sb.series = append(sb.series, sampleSeries{sr.Channel, sr.Values})
		}
		return sb
	}
}
