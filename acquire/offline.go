package acquire

import (
	"context"
	"errors"
	"fmt"
	"os"
	"time"
)

// Replayer is a source that is not live: a file recorded elsewhere or a run
// already stored. Nothing is lost by waiting for it, so it hands blocks to a
// callback at the caller's pace instead of racing a channel.
//
// Replay calls fn with every block in order, on the caller's goroutine, and
// returns nil at the end of the data, fn's error unchanged, or ctx.Err()
// once ctx is done (checked between blocks). fn owns the block it is given.
// A Replayer may be replayed more than once; each Replay starts from the
// beginning.
type Replayer interface {
	Replay(ctx context.Context, fn func(Block) error) error
}

// CSVFile replays a raw CSV file (the format ReadRawCSV reads) as one
// source of a rig.
type CSVFile struct {
	Path   string // file to read
	Source string // rig source the file's blocks are attributed to
	// BlockN is the number of sample times per block; 0 means
	// DefaultRawCSVBlock.
	BlockN int
	// Start is the UTC time of the file's first row (ReadRawCSVAt); zero
	// takes the file's own "# start" line, or none.
	Start time.Time
	// Straight reads the file with encoding/csv on the caller's goroutine,
	// one block after the other: the plain path that the fast one (its
	// own CSV splitter, parsing on a goroutine of its own, CSVAhead blocks
	// ahead) is tested against. Both give the same blocks and errors.
	Straight bool
	// Health counts the blocks (Frames) and sample times (Samples) handed
	// to fn; it only grows, over every Replay.
	Health Health
}

// CSVAhead is how many blocks CSVFile parses ahead of the pipeline that
// takes them: enough to keep the parse going while a block's segment
// closes, few enough to keep memory small (100 blocks of 16 channels × 100
// samples are 1.3 MB).
const CSVAhead = 100

// Replay implements Replayer. A malformed file gives a *rig.Error naming
// its line, after the blocks before that line were handed to fn. The file
// is parsed on a goroutine of its own; fn is called on the caller's.
func (f *CSVFile) Replay(ctx context.Context, fn func(Block) error) error {
	file, err := os.Open(f.Path)
	if err != nil {
		return fmt.Errorf("raw CSV: %w", err)
	}
	defer file.Close()
	n := f.BlockN
	if n <= 0 {
		n = DefaultRawCSVBlock
	}
	take := func(b Block) error {
		if err := ctx.Err(); err != nil {
			return err
		}
		f.Health.Frames.Add(1)
		f.Health.Samples.Add(uint64(b.Len()))
		return fn(b)
	}
	if f.Straight {
		return readRawCSV(file, f.Source, n, f.Start, rawReadOptions{straight: true}, take)
	}
	blocks := make(chan Block, CSVAhead)
	stop := make(chan struct{})
	parsed := make(chan error, 1)
	go func() {
		defer close(blocks)
		parsed <- readRawCSV(file, f.Source, n, f.Start, rawReadOptions{}, func(b Block) error {
			select {
			case blocks <- b:
				return nil
			case <-stop:
				return errStopped
			}
		})
	}()
	for b := range blocks {
		if err := take(b); err != nil {
			close(stop)
			for range blocks { // let the parser see stop and end
			}
			<-parsed
			return err
		}
	}
	return <-parsed
}

// errStopped ends a parse whose reader stopped taking blocks.
var errStopped = errors.New("stopped")

// BlockStore gives back the raw blocks of a stored run in the order they
// arrived (all sources merged by receive time). *storage.Store implements it.
// ReplayBlocks returns fn's error unchanged.
type BlockStore interface {
	ReplayBlocks(runID uint64, fn func(Block) error) error
}

// StoredRun replays the raw blocks of a stored run, with their receive
// times, so that a pipeline sees them as the live run did.
type StoredRun struct {
	Store BlockStore
	RunID uint64
	// Health counts the blocks (Frames) and sample times (Samples) handed
	// to fn; it only grows, over every Replay.
	Health Health
}

// Replay implements Replayer.
func (s *StoredRun) Replay(ctx context.Context, fn func(Block) error) error {
	return s.Store.ReplayBlocks(s.RunID, func(b Block) error {
		if err := ctx.Err(); err != nil {
			return err
		}
		s.Health.Frames.Add(1)
		s.Health.Samples.Add(uint64(b.Len()))
		return fn(b)
	})
}

// Blocks is a record held in memory, replayed in order. Each Replay hands
// fn copies of the blocks (their series and readings cloned), so a
// pipeline that aligns or corrects a block in place leaves the record as it
// was for the next Replay.
type Blocks []Block

// Replay implements Replayer.
func (bs Blocks) Replay(ctx context.Context, fn func(Block) error) error {
	for _, b := range bs {
		if err := ctx.Err(); err != nil {
			return err
		}
		ss := make([]Series, len(b.Series))
		for i, s := range b.Series {
			ss[i] = s
			ss[i].Raw = append([]float64(nil), s.Raw...)
		}
		b.Series = ss
		if err := fn(b); err != nil {
			return err
		}
	}
	return nil
}
