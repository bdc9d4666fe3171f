package estimate

import (
	"cmp"
	"math"
	"slices"
)

// SectorResult gathers one zone's blocks in one direction sector of a roof
// run: the sector the blocks were assigned to (their circular mean
// direction), how many blocks stayed in it, the range of their mean net
// Cp, and the most negative and most positive block peak. Blocks whose
// direction wandered out of their sector (Segment.SectorLeft) are counted
// in Left and kept out of the values. A range is given rather than a
// combined uncertainty: the blocks share their calibration errors, so
// their U95 do not shrink by averaging.
type SectorResult struct {
	SectorRad        float64 // sector centre, rad from north; NaN for blocks without a vane
	Zone             string
	Blocks, Left     int
	CpMeanLo, CpMean float64 // lowest block mean and the mean of the block means
	CpMeanHi         float64 // highest block mean
	CpPeak           float64 // most negative block peak suction (NaN when none)
	CpPeakMax        float64 // most positive block peak (NaN when none)
}

// RoofSectors sums the zone rows of a roof run (per-tap rows and rows of
// other kinds are skipped) by direction sector and zone, in sector order
// then in the order the zones first appear. Rows without a vane form one
// group with a NaN sector.
func RoofSectors(segs []Segment) []SectorResult {
	type key struct {
		sector int64 // sector centre in µrad; math.MinInt64 without a vane
		zone   string
	}
	index := map[key]int{}
	zoneOrder := map[string]int{}
	var out []SectorResult
	for i := range segs {
		s := &segs[i]
		if s.Zone == "" || s.Tap != "" {
			continue
		}
		k := key{sector: math.MinInt64, zone: s.Zone}
		if finite(s.SectorRad) {
			k.sector = int64(math.Round(s.SectorRad * 1e6))
		}
		if _, ok := zoneOrder[s.Zone]; !ok {
			zoneOrder[s.Zone] = len(zoneOrder)
		}
		j, ok := index[k]
		if !ok {
			j = len(out)
			index[k] = j
			out = append(out, SectorResult{SectorRad: s.SectorRad, Zone: s.Zone,
				CpMeanLo: math.NaN(), CpMean: math.NaN(), CpMeanHi: math.NaN(),
				CpPeak: math.NaN(), CpPeakMax: math.NaN()})
			if !finite(s.SectorRad) {
				out[j].SectorRad = math.NaN()
			}
		}
		r := &out[j]
		if s.SectorLeft() {
			r.Left++
			continue
		}
		if !finite(s.CpMean.X) {
			continue
		}
		if r.Blocks == 0 {
			r.CpMeanLo, r.CpMean, r.CpMeanHi = s.CpMean.X, 0, s.CpMean.X
		}
		r.Blocks++
		r.CpMean += s.CpMean.X
		r.CpMeanLo, r.CpMeanHi = math.Min(r.CpMeanLo, s.CpMean.X), math.Max(r.CpMeanHi, s.CpMean.X)
		if finite(s.CpPeak) && !(s.CpPeak >= r.CpPeak) {
			r.CpPeak = s.CpPeak
		}
		if finite(s.CpPeakMax) && !(s.CpPeakMax <= r.CpPeakMax) {
			r.CpPeakMax = s.CpPeakMax
		}
	}
	for i := range out {
		if out[i].Blocks > 0 {
			out[i].CpMean /= float64(out[i].Blocks)
		}
	}
	slices.SortStableFunc(out, func(a, b SectorResult) int {
		sa, sb := a.SectorRad, b.SectorRad
		switch {
		case math.IsNaN(sa) && !math.IsNaN(sb):
			return 1
		case !math.IsNaN(sa) && math.IsNaN(sb):
			return -1
		case sa != sb && !math.IsNaN(sa):
			return cmp.Compare(sa, sb)
		}
		return cmp.Compare(zoneOrder[a.Zone], zoneOrder[b.Zone])
	})
	return out
}
