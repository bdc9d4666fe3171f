package serial

import (
	"context"
	"fmt"
	"io"

	"liftyard/acquire"
)

// WriteFrames writes each block from in as frame lines (acquire.AppendFrame)
// to w: one line per sample time, values in the order of channels, t_us from
// the block clock (T0Us + i·DtUs) and a seq that starts at 0 and wraps at
// 2^32. One Write per block. It returns nil when in is closed or ctx is
// done, and an error when a block lacks a channel or a write fails.
//
// It is the device side of a dry run: simulator blocks into a serial port or
// a pseudo-terminal (OpenPTY), read back by a Source.
func WriteFrames(ctx context.Context, w io.Writer, channels []string, in <-chan acquire.Block) error {
	var seq uint32
	var buf []byte
	f := acquire.Frame{Values: make([]float64, len(channels))}
	cols := make([][]float64, len(channels))
	for {
		var b acquire.Block
		var ok bool
		select {
		case <-ctx.Done():
			return nil
		case b, ok = <-in:
			if !ok {
				return nil
			}
		}
		n := b.Len()
		for i, ch := range channels {
			cols[i] = b.Raw(ch)
			if cols[i] == nil {
				return fmt.Errorf("write frames: block %d from %q has no channel %q", b.Seq, b.Source, ch)
			}
			if len(cols[i]) != n {
				return fmt.Errorf("write frames: block %d from %q: channel %q has %d samples, want %d", b.Seq, b.Source, ch, len(cols[i]), n)
			}
		}
		buf = buf[:0]
		for k := range n {
			f.Seq, f.TUs = seq, b.T0Us+int64(k)*b.DtUs
			seq++
			for i := range cols {
				f.Values[i] = cols[i][k]
			}
			buf = acquire.AppendFrame(buf, &f)
		}
		if _, err := w.Write(buf); err != nil {
			return fmt.Errorf("write frames: %w", err)
		}
	}
}
