package main

import (
	"context"
	"sync"

	"liftyard/acquire"
)

// prefetchBytes bounds what an import parses ahead while its check pass
// runs: 64 MiB of readings (a fifth to a half of a million-row record of 16
// channels), well inside the import's memory target of 200 MB.
const prefetchBytes = 32 << 20

// prefetch replays src on a goroutine of its own as soon as it is made,
// keeping up to max bytes of readings until Replay takes them: an import
// parses its file on one core while its check pass reads the same file on
// the other, and nothing reaches the store before the check has passed
// (the run is made only then). Replay may be called once.
type prefetch struct {
	cancel context.CancelFunc
	mu     sync.Mutex
	cond   *sync.Cond
	q      []acquire.Block
	bytes  int64
	max    int64
	done   bool  // src.Replay has returned
	err    error // what it returned
	ctx    context.Context
}

// newPrefetch starts replaying src; stop (or ctx) ends it.
func newPrefetch(ctx context.Context, src acquire.Replayer, max int64) *prefetch {
	ctx, cancel := context.WithCancel(ctx)
	p := &prefetch{cancel: cancel, max: max, ctx: ctx}
	p.cond = sync.NewCond(&p.mu)
	context.AfterFunc(ctx, func() {
		p.mu.Lock()
		p.cond.Broadcast()
		p.mu.Unlock()
	})
	go func() {
		err := src.Replay(ctx, func(b acquire.Block) error {
			size := int64(8 * b.Len() * len(b.Series))
			p.mu.Lock()
			defer p.mu.Unlock()
			for p.bytes+size > p.max && len(p.q) > 0 && ctx.Err() == nil {
				p.cond.Wait()
			}
			if err := ctx.Err(); err != nil {
				return err
			}
			p.q = append(p.q, b)
			p.bytes += size
			p.cond.Broadcast()
			return nil
		})
		p.mu.Lock()
		p.done, p.err = true, err
		p.cond.Broadcast()
		p.mu.Unlock()
	}()
	return p
}

// stop ends the replay of a prefetch that will not be taken.
func (p *prefetch) stop() { p.cancel() }

// Replay implements acquire.Replayer: the blocks in src's order, then src's
// error. An error from fn stops src.
func (p *prefetch) Replay(ctx context.Context, fn func(acquire.Block) error) error {
	defer p.cancel()
	stop := context.AfterFunc(ctx, func() {
		p.mu.Lock()
		p.cond.Broadcast()
		p.mu.Unlock()
	})
	defer stop()
	for {
		p.mu.Lock()
		for len(p.q) == 0 && !p.done && ctx.Err() == nil && p.ctx.Err() == nil {
			p.cond.Wait()
		}
		if err := ctx.Err(); err != nil {
			p.mu.Unlock()
			return err
		}
		if len(p.q) == 0 {
			err := p.err
			if err == nil && !p.done {
				err = p.ctx.Err()
			}
			p.mu.Unlock()
			return err
		}
		b := p.q[0]
		p.q[0] = acquire.Block{}
		p.q = p.q[1:]
		p.bytes -= int64(8 * b.Len() * len(b.Series))
		p.cond.Broadcast()
		p.mu.Unlock()
		if err := fn(b); err != nil {
			return err
		}
	}
}
