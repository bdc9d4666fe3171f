package serial

import (
	"context"
	"fmt"
	"io"
	"strconv"

	"go.bug.st/serial"

	"liftyard/acquire"
	"liftyard/rig"
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
		b, ok := receive(ctx, in)
		if !ok {
			return nil
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

// WriteDelimited writes each block from in as plain delimited lines in the
// layout f describes (acquire.DelimitedFormat): one line per sample time,
// a channel's raw reading in its column, 0 in a "_" column, and the device
// time (T0Us + i·DtUs) in a t_us, t_ms or t_s column. One Write per block.
// It returns nil when in is closed or ctx is done, and an error when a
// block lacks a channel or a write fails.
//
// It is the device side of a dry run of a third-party amplifier, as
// WriteFrames is of ours.
func WriteDelimited(ctx context.Context, w io.Writer, f acquire.DelimitedFormat, in <-chan acquire.Block) error {
	delim := f.Delimiter
	if delim == "" {
		delim = ","
	}
	var buf []byte
	cols := make([][]float64, len(f.Columns))
	for {
		b, ok := receive(ctx, in)
		if !ok {
			return nil
		}
		n := b.Len()
		for i, c := range f.Columns {
			cols[i] = nil
			if _, isTime := rig.TimeColumns[c]; isTime || c == "_" {
				continue
			}
			cols[i] = b.Raw(c)
			if len(cols[i]) != n {
				return fmt.Errorf("write delimited: block %d from %q: channel %q has %d samples, want %d", b.Seq, b.Source, c, len(cols[i]), n)
			}
		}
		buf = buf[:0]
		for k := range n {
			tUs := b.T0Us + int64(k)*b.DtUs
			for i, c := range f.Columns {
				if i > 0 {
					buf = append(buf, delim...)
				}
				switch c {
				case "_":
					buf = append(buf, '0')
				case "t_us":
					buf = strconv.AppendInt(buf, tUs, 10)
				case "t_ms":
					buf = strconv.AppendFloat(buf, float64(tUs)/1e3, 'f', 3, 64)
				case "t_s":
					buf = strconv.AppendFloat(buf, float64(tUs)/1e6, 'f', 6, 64)
				default:
					buf = strconv.AppendFloat(buf, cols[i][k], 'g', -1, 64)
				}
			}
			buf = append(buf, '\r', '\n')
		}
		if _, err := w.Write(buf); err != nil {
			return fmt.Errorf("write delimited: %w", err)
		}
	}
}

// OpenDevice opens the serial device at path as the device side of a dry
// run of rig source s, with s's line settings (baud, data bits, parity,
// stop bits): what WriteFrames or WriteDelimited then write into.
func OpenDevice(path string, s rig.Source) (io.WriteCloser, error) {
	src := &Source{Name: s.Name, BaudRate: s.Baud, DataBits: s.DataBits, Parity: s.Parity, StopBits: s.StopBits}
	m, err := src.mode()
	if err != nil {
		return nil, err
	}
	p, err := serial.Open(path, m)
	if err != nil {
		return nil, fmt.Errorf("open %s: %w", path, err)
	}
	return p, nil
}

// receive takes the next block from in; false when in is closed or ctx is
// done.
func receive(ctx context.Context, in <-chan acquire.Block) (acquire.Block, bool) {
	select {
	case <-ctx.Done():
		return acquire.Block{}, false
	case b, ok := <-in:
		return b, ok
	}
}
