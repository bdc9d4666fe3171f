package storage

import (
	"fmt"
	"path/filepath"
	"strings"
	"time"

	"liftyard/acquire"
)

// CampaignPath is where a campaign directory keeps dataset what (raw,
// values or segments) of run: what/rig=<rig>/date=<YYYY-MM-DD>/run-<id>.parquet,
// relative to the directory. The rig=…/date=… folders are Hive-style
// partitions, which Parquet engines read as columns; date is the UTC day
// of day (DataStart: the day the data was taken, also for a run imported
// later). Characters other than letters, digits, '_', '.' and '-'
// in a rig name (rig files allow no others; older stores might) become '_'.
func CampaignPath(run Run, day time.Time, what string) string {
	rigName := strings.Map(func(r rune) rune {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '_', r == '.', r == '-':
			return r
		}
		return '_'
	}, run.Rig)
	if rigName == "" || strings.Trim(rigName, ".") == "" {
		rigName = "_"
	}
	return filepath.Join(what, "rig="+rigName, "date="+day.UTC().Format("2006-01-02"),
		fmt.Sprintf("run-%d.parquet", run.ID))
}

// DataStart returns the UTC time of the first row of run id's sample
// exports: the first block of the timeline source (aligned.go) mapped onto
// UTC as the pipeline maps it. A run without samples gives its Started
// time.
func (s *Store) DataStart(id uint64) (time.Time, error) {
	run, _, p, err := s.runPlan(id)
	if err != nil {
		return time.Time{}, err
	}
	it := s.newBlockIter(id, p.primary)
	for {
		b, ok, err := it.next()
		if err != nil {
			return time.Time{}, err
		}
		if !ok {
			return run.Started, nil
		}
		if b.Len() > 0 && b.DtUs > 0 {
			var a acquire.Aligner // a source's first block is its clock's first observation
			a.Align(&b)
			return time.UnixMicro(b.AlignedT0Us).UTC(), nil
		}
	}
}
