package main

import (
	"context"
	"errors"
	"sync/atomic"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
)

// countingReplayer hands over n blocks of 100 readings (800 bytes) and
// counts how many it has handed over.
type countingReplayer struct {
	n      int
	handed atomic.Int64
}

func (c *countingReplayer) Replay(ctx context.Context, fn func(acquire.Block) error) error {
	for i := range c.n {
		if err := ctx.Err(); err != nil {
			return err
		}
		b := acquire.Block{Source: "amp", Seq: uint64(i), T0Us: int64(i) * 100_000, DtUs: 1000,
			Series: []acquire.Series{{Channel: "n", Raw: make([]float64, 100)}}}
		if err := fn(b); err != nil {
			return err
		}
		c.handed.Add(1)
	}
	return nil
}

// Ensure that an import's prefetch parses ahead only up to its bound while
// nothing takes its blocks (the check pass is still running), then hands
// every block over in order; that stop ends the source; and that an error
// from the consumer stops the source too.
func TestPrefetch(t *testing.T) {
	src := &countingReplayer{n: 500}
	p := newPrefetch(t.Context(), src, 10*800) // ten blocks
	time.Sleep(50 * time.Millisecond)
	assert.LessOrEqual(t, src.handed.Load(), int64(11), "parsed ahead past the bound")
	var seqs []uint64
	require.NoError(t, p.Replay(t.Context(), func(b acquire.Block) error {
		seqs = append(seqs, b.Seq)
		return nil
	}))
	require.Len(t, seqs, 500)
	for i, s := range seqs {
		require.Equal(t, uint64(i), s, "order")
	}

	src = &countingReplayer{n: 1_000_000}
	p = newPrefetch(t.Context(), src, 10*800)
	p.stop()
	err := p.Replay(t.Context(), func(acquire.Block) error { return nil })
	assert.ErrorIs(t, err, context.Canceled, "a stopped prefetch ends")
	assert.Less(t, src.handed.Load(), int64(1_000_000))

	src = &countingReplayer{n: 1_000_000}
	p = newPrefetch(t.Context(), src, 10*800)
	boom := errors.New("store failed")
	err = p.Replay(t.Context(), func(b acquire.Block) error {
		if b.Seq == 20 {
			return boom
		}
		return nil
	})
	assert.ErrorIs(t, err, boom)
	assert.Eventually(t, func() bool { n := src.handed.Load(); time.Sleep(20 * time.Millisecond); return src.handed.Load() == n },
		2*time.Second, 50*time.Millisecond, "the source stops after the consumer's error")
	assert.Less(t, src.handed.Load(), int64(1_000_000))
}
