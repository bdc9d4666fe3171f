package acquire

import (
	"context"
	"strings"
)

// SourceSep separates the source from the channel in a column of a
// multi-source sample export: "amp/n_fore" is channel n_fore of source
// amp (docs/export.md). Rig names cannot hold '/', so the split is never
// ambiguous.
const SourceSep = "/"

// SplitColumn reads a column name written as source/channel. ok is false
// for a plain channel name.
func SplitColumn(name string) (source, channel string, ok bool) {
	source, channel, ok = strings.Cut(name, SourceSep)
	if !ok || source == "" || channel == "" || strings.Contains(channel, SourceSep) {
		return "", name, false
	}
	return source, channel, true
}

// SplitSources splits a block read from a multi-source file, whose series
// are named source/channel (SplitColumn), into one block per source with
// the same timebase, receive time and seq; a plainly named series stays
// with b.Source. The blocks come in the order of their sources' first
// series, except that the source of b's first series (the file's timeline
// source) comes last, so that a pipeline has every other source's samples
// for an instant when the timeline reaches it. A block whose series are all
// plain is returned as it is.
func SplitSources(b Block) []Block {
	split := false
	for _, s := range b.Series {
		if _, _, ok := SplitColumn(s.Channel); ok {
			split = true
			break
		}
	}
	if !split {
		return []Block{b}
	}
	var out []Block
	idx := map[string]int{}
	for _, s := range b.Series {
		src, ch, ok := SplitColumn(s.Channel)
		if !ok {
			src = b.Source
		}
		k, has := idx[src]
		if !has {
			k = len(out)
			idx[src] = k
			nb := b
			nb.Source, nb.Series = src, nil
			out = append(out, nb)
		}
		out[k].Series = append(out[k].Series, Series{Channel: ch, Raw: s.Raw})
	}
	if len(out) > 1 {
		out = append(out[1:], out[0])
	}
	return out
}

// SplitReplayer replays R with every block split by source (SplitSources):
// the way import reads back a multi-source raw export.
type SplitReplayer struct {
	R Replayer
}

// Replay implements Replayer.
func (s SplitReplayer) Replay(ctx context.Context, fn func(Block) error) error {
	return s.R.Replay(ctx, func(b Block) error {
		for _, p := range SplitSources(b) {
			if err := fn(p); err != nil {
				return err
			}
		}
		return nil
	})
}
