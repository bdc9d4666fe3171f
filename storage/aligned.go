package storage

import (
	"fmt"
	"math"
	"slices"
	"time"

	"liftyard/acquire"
	"liftyard/rig"
)

// # The aligned timeline of an export
//
// The sample exports (ExportRaw, ExportValues, the Parquet files) write one
// row per sample time of the run's timeline source, on the UTC timeline the
// pipeline uses (docs/export.md "The aligned timeline"):
//
//   - The timeline source is the one the rig's estimation stage follows:
//     the source that carries the first normal-force channel (foil, body,
//     rotor), or the reference q channel of a roof (timelineSource).
//   - Every stored block goes through its source's acquire.Clock in the
//     source's stored order, as in the live pipeline, which gives each
//     block its device time mapped onto the host clock (AlignedT0Us).
//   - A row's time is the timeline sample's device time plus a fixed offset:
//     AlignedT0Us − T0Us of the source's first block, taken again after a
//     gap, a change of rate or a clock step, exactly as estimate.Estimator
//     dates its samples, so exported times and segment times agree.
//   - A channel of another source takes, at each row, that source as the
//     estimator joins it (estimate's history.at): its two readings either
//     side of the row's instant, interpolated linearly (a row on one of
//     its samples gets that reading bit for bit; a gap is bridged, as the
//     estimator bridges it); before its first reading the cell is blank,
//     and after its last it holds that reading for less than one sample
//     period, then is blank (fillFromLane). So a re-import computes from
//     what the live run computed from. Taking the nearest reading instead
//     kept every cell a reading as received, but gave a re-import a
//     noisier q than the live run had (interpolation averages two
//     readings): in dry runs with a noisy pitot one import in three lost
//     a steady segment.

// gapUs is the gap in a timeline source's device time after which its
// wall-clock offset is taken again (the estimator's tick).
const gapUs = int64(100 * time.Millisecond / time.Microsecond)

// alignedColumn is one channel column of an aligned export.
type alignedColumn struct {
	Source, Channel string
}

// alignedPlan says what an aligned export writes: the timeline source and
// the columns, timeline source first.
type alignedPlan struct {
	primary string
	cols    []alignedColumn
	multi   bool // more than one source has columns
}

// SourceColumn is the column name of channel in a multi-source sample
// export: "source/channel". '/' is not allowed in rig names, so the split
// is never ambiguous (acquire.SplitColumn reads it back).
func SourceColumn(source, channel string) string {
	return source + acquire.SourceSep + channel
}

// timelineSource picks the source whose samples set the rows of run id's
// export: the stored source that carries the rig's timeline channel (the
// first normal-force channel; on a roof the first tap, whose scanner the
// roof's blocks follow, else the reference q), else the rig's first
// [[source]] that stored blocks; without a rig file, the fastest source
// (the smallest sample period of its first block: the one the rows would
// thin most if it were not the timeline), then the first in name order.
func (s *Store) timelineSource(id uint64, r *rig.Rig, sources []string, chans map[string][]string) (string, error) {
	if len(sources) == 0 {
		return "", nil
	}
	if r != nil {
		var want []string
		switch {
		case r.Kind == rig.KindRoof:
			for _, t := range r.Taps {
				want = append(want, t.Channel)
			}
			want = append(want, r.Lift.DynamicPressure, r.Lift.Speed)
		case len(r.Lift.Normal) > 0:
			want = []string{r.Lift.Normal[0]}
		}
		for _, w := range want {
			for _, src := range sources {
				if w != "" && slices.Contains(chans[src], w) {
					return src, nil
				}
			}
		}
		for _, rs := range r.Sources {
			if slices.Contains(sources, rs.Name) {
				return rs.Name, nil
			}
		}
	}
	best, bestDt := sources[0], int64(math.MaxInt64)
	for _, src := range sources {
		b, ok, err := s.newBlockIter(id, src).next()
		if err != nil {
			return "", err
		}
		if ok && b.DtUs > 0 && b.DtUs < bestDt {
			best, bestDt = src, b.DtUs
		}
	}
	return best, nil
}

// planAligned lists run id's sources and channels and picks the timeline
// source. keep, when not nil, filters and orders the channels of each
// source (the values export keeps the rig's channels in the rig's order).
func (s *Store) planAligned(id uint64, r *rig.Rig, keep func([]string) []string) (alignedPlan, error) {
	sources, err := s.rawSources(id)
	if err != nil {
		return alignedPlan{}, err
	}
	chans := map[string][]string{}
	for _, src := range sources {
		names, err := s.channelsOf(id, []string{src})
		if err != nil {
			return alignedPlan{}, err
		}
		if keep != nil {
			names = keep(names)
		}
		chans[src] = names
	}
	primary, err := s.timelineSource(id, r, sources, chans)
	if err != nil {
		return alignedPlan{}, err
	}
	p := alignedPlan{primary: primary}
	order := []string{p.primary}
	if r != nil {
		for _, rs := range r.Sources {
			if slices.Contains(sources, rs.Name) && !slices.Contains(order, rs.Name) {
				order = append(order, rs.Name)
			}
		}
	}
	for _, src := range sources {
		if !slices.Contains(order, src) {
			order = append(order, src)
		}
	}
	with := 0
	for _, src := range order {
		for _, c := range chans[src] {
			p.cols = append(p.cols, alignedColumn{src, c})
		}
		if len(chans[src]) > 0 {
			with++
		}
	}
	p.multi = with > 1
	return p, nil
}

// runPlan reads run id, its stored rig file (nil when none) and the plan
// of its sample exports with every channel of every source.
func (s *Store) runPlan(id uint64) (Run, *rig.Rig, alignedPlan, error) {
	run, err := s.Run(id)
	if err != nil {
		return Run{}, nil, alignedPlan{}, err
	}
	r, err := rigOf(run)
	if err != nil {
		return Run{}, nil, alignedPlan{}, err
	}
	p, err := s.planAligned(id, r, nil)
	return run, r, p, err
}

// name is the column name of c in an export: base (the channel, or its
// values column), prefixed with the source when the run has several.
func (p alignedPlan) name(c alignedColumn, base string) string {
	if p.multi {
		return SourceColumn(c.Source, base)
	}
	return base
}

// alignedBlock is one converted block placed on the host timeline.
type alignedBlock struct {
	sampleBlock
	alignedT0Us int64
	seriesCol   []int // column of each series, -1 when it has none
}

func (b *alignedBlock) at(i int) int64 { return b.alignedT0Us + int64(i)*b.dtUs }

// alignedRows streams the rows of plan p over run id: fn gets each row's
// UTC time (µs) and its cells, one per column of p (NaN: blank). cells is
// reused for the next row. conv turns a stored block into the series to
// write (raw readings or calibrated values).
//
// Each source is read in its stored order through its own clock (an
// acquire.Clock depends on its own source's blocks only, so this maps each
// block as the live pipeline did). Before a timeline block is written,
// every other source is read until it has reached the block's last
// instant or has ended, and blocks no later row can read are dropped: the
// memory held is a few blocks per source, whatever the run's length.
func (s *Store) alignedRows(id uint64, p alignedPlan, conv func(acquire.Block) sampleBlock, fn func(tUs int64, cells []float64) error) error {
	colOf := map[alignedColumn]int{}
	for i, c := range p.cols {
		colOf[c] = i
	}
	open := func(src string) *srcCursor {
		return &srcCursor{it: s.newBlockIter(id, src), source: src, conv: conv, colOf: colOf}
	}
	prim := open(p.primary)
	var lanes []*lane
	for _, c := range p.cols {
		if c.Source != p.primary && !slices.ContainsFunc(lanes, func(l *lane) bool { return l.cur.source == c.Source }) {
			lanes = append(lanes, &lane{cur: open(c.Source)})
		}
	}
	var (
		cells = make([]float64, len(p.cols))
		// the timeline source's wall clock (as estimate.Estimator keeps it)
		started bool
		offUs   int64
		nextDev int64
		dtUs    int64
		lastT   int64
	)
	for {
		b, ok, err := prim.next()
		if err != nil || !ok {
			return err
		}
		end := b.at(b.n - 1)
		for _, ln := range lanes {
			if err := ln.fill(end, b.at(0)); err != nil {
				return err
			}
		}
		if started && (b.dtUs != dtUs || b.t0Us < nextDev || b.t0Us-nextDev > gapUs) {
			offUs = b.alignedT0Us - b.t0Us
		}
		if !started {
			offUs = b.alignedT0Us - b.t0Us
		}
		started, dtUs, nextDev = true, b.dtUs, b.t0Us+int64(b.n)*b.dtUs
		for i := range b.n {
			tUs := b.t0Us + int64(i)*b.dtUs + offUs
			if started && lastT != 0 && tUs <= lastT {
				// A clock step the offset did not undo: keep rows in time
				// order (import needs it) without dropping the sample.
				offUs += lastT + 1 - tUs
				tUs = lastT + 1
			}
			lastT = tUs
			for j := range cells {
				cells[j] = math.NaN()
			}
			for k, sr := range b.series {
				if c := b.seriesCol[k]; c >= 0 && i < len(sr.v) {
					cells[c] = sr.v[i]
				}
			}
			at := b.at(i)
			for _, ln := range lanes {
				fillFromLane(ln, at, cells)
			}
			if err := fn(tUs, cells); err != nil {
				return err
			}
		}
	}
}

// srcCursor reads one source's stored blocks in order and places them on
// the host timeline.
type srcCursor struct {
	it     *blockIter
	source string
	al     acquire.Aligner
	conv   func(acquire.Block) sampleBlock
	colOf  map[alignedColumn]int
}

// next returns the source's next non-empty block, aligned and converted.
func (c *srcCursor) next() (*alignedBlock, bool, error) {
	for {
		raw, ok, err := c.it.next()
		if err != nil || !ok {
			return nil, false, err
		}
		if raw.Len() == 0 || raw.DtUs <= 0 {
			continue
		}
		c.al.Align(&raw)
		ab := &alignedBlock{sampleBlock: c.conv(raw), alignedT0Us: raw.AlignedT0Us}
		if ab.n == 0 {
			continue
		}
		ab.seriesCol = make([]int, len(ab.series))
		for k, sr := range ab.series {
			ab.seriesCol[k] = -1
			if col, ok := c.colOf[alignedColumn{c.source, sr.channel}]; ok {
				ab.seriesCol[k] = col
			}
		}
		return ab, true, nil
	}
}

// lane is one other source's recent blocks, oldest first.
type lane struct {
	cur    *srcCursor
	blocks []*alignedBlock
	markUs int64 // host-timeline instant of its newest sample read
	seen   bool
	done   bool
}

// fill reads ln's source until it holds a sample after untilUs or has ended,
// dropping the blocks no row at or after floorUs can read.
func (ln *lane) fill(untilUs, floorUs int64) error {
	for !ln.done && (!ln.seen || ln.markUs <= untilUs) {
		b, ok, err := ln.cur.next()
		if err != nil {
			return err
		}
		if !ok {
			ln.done = true
			break
		}
		ln.blocks = append(ln.blocks, b)
		if end := b.at(b.n - 1); !ln.seen || end > ln.markUs {
			ln.markUs, ln.seen = end, true
		}
		trimLane(ln, floorUs)
	}
	return nil
}

// fillFromLane writes, into cells, ln's channels at instant at as the
// estimator joins them (estimate's history.at): a channel's readings either
// side of at, when both are finite, interpolated linearly (a reading at at
// exactly is that reading, bit for bit; a gap in the source is bridged, as
// the estimator bridges it); otherwise its reading nearest to at (the
// earlier on a tie) when less than one sample period away; otherwise
// blank (before the source's first reading, more than a period after its
// last). It drops the blocks no later row can need (rows come in time
// order). The lane holds a sample after at (lane.fill), so both
// neighbours of at are at hand.
func fillFromLane(ln *lane, at int64, cells []float64) {
	trimLane(ln, at)
	if len(ln.blocks) == 0 {
		return
	}
	type pick struct {
		b *alignedBlock
		i int
	}
	var before, after *pick
	b := ln.blocks[0]
	if b.at(0) > at {
		after = &pick{b, 0}
	} else {
		i := min(int((at-b.alignedT0Us)/b.dtUs), b.n-1)
		before = &pick{b, i}
		switch {
		case i+1 < b.n:
			after = &pick{b, i + 1}
		case len(ln.blocks) > 1:
			after = &pick{ln.blocks[1], 0}
		}
	}
	nearest := before
	if nearest == nil || (after != nil && after.b.at(after.i)-at < at-nearest.b.at(nearest.i)) {
		nearest = after
	}
	if nearest != nil && abs64(nearest.b.at(nearest.i)-at) >= nearest.b.dtUs {
		nearest = nil // a gap, or the source has not started or has ended
	}
	// Interpolation needs a reading on each side, in blocks with the same
	// series in the same order (else the nearest rule applies). Like the
	// estimator, it bridges a gap in the source.
	var f float64
	interp := before != nil && after != nil && before.b.at(before.i) < at && sameChannels(before.b, after.b)
	if interp {
		t0 := before.b.at(before.i)
		f = float64(at-t0) / float64(after.b.at(after.i)-t0)
	}
	src := nearest // whose series say the columns (both neighbours' when interp)
	if src == nil {
		if !interp {
			return
		}
		src = before
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	for k, sr := range src.b.series {
		c := src.b.seriesCol[k]
		if c < 0 {
			continue
		}
		if interp {
			v0, v1 := before.b.series[k].v[before.i], after.b.series[k].v[after.i]
			if r := v0 + f*(v1-v0); finite(v0) && finite(v1) && finite(r) {
				cells[c] = r
				continue
			}
		}
		if nearest != nil && nearest.i < len(sr.v) {
			cells[c] = sr.v[nearest.i]
		}
	}
}

// sameChannels reports whether a and b hold the same channels in the same
// order (so that series k of one is series k of the other).
func sameChannels(a, b *alignedBlock) bool {
	return a == b || slices.EqualFunc(a.series, b.series, func(x, y sampleSeries) bool { return x.channel == y.channel })
}

func abs64(x int64) int64 {
	if x < 0 {
		return -x
	}
	return x
}

// trimLane drops the blocks of ln that no row at or after floor can
// read: those followed by a block that starts at or before floor.
func trimLane(ln *lane, floor int64) {
	k := 0
	for k+1 < len(ln.blocks) && ln.blocks[k+1].at(0) <= floor {
		ln.blocks[k] = nil
		k++
	}
	ln.blocks = ln.blocks[k:]
}

// rigOf parses the rig file stored with run, or nil when there is none.
func rigOf(run Run) (*rig.Rig, error) {
	if run.RigTOML == "" {
		return nil, nil
	}
	r, err := rig.Parse("", []byte(run.RigTOML))
	if err != nil {
		return nil, fmt.Errorf("rig file stored with run %d: %w", run.ID, err)
	}
	return r, nil
}
