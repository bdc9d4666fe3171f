package process_test

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// quirkyRecord rewrites the test record with the quirks field files have:
// a byte-order mark, CRLF line ends, blank lines, quoted cells from some
// row on (where the fast splitter hands over to encoding/csv), cells with
// spaces, and two gaps (rows left out, so new blocks start). bad, when
// not 0, puts an unreadable value on that data row, whose line in the file
// is returned.
func quirkyRecord(t *testing.T, bad int) (path string, badLine int) {
	t.Helper()
	data, err := os.ReadFile(rawCSV)
	require.NoError(t, err)
	lines := strings.Split(strings.TrimRight(string(data), "\n"), "\n")
	var b strings.Builder
	b.WriteString("\ufeff" + lines[0] + "\r\n")
	line := 1
	for i, l := range lines[1:] {
		row := i + 1
		switch {
		case row >= 400 && row < 412, row >= 900 && row < 903:
			continue // gaps
		case row%97 == 0:
			b.WriteString("\r\n") // a blank line
			line++
		case row%131 == 0:
			b.WriteString("\n")
			line++
		}
		line++
		cells := strings.Split(l, ",")
		if row%50 == 0 {
			cells[1] = " " + cells[1] + " "
		}
		if row >= 1200 {
			cells[2] = `"` + cells[2] + `"`
		}
		if row == bad {
			cells[3] = "12.3.4"
			badLine = line
		}
		b.WriteString(strings.Join(cells, ",") + "\r\n")
	}
	path = filepath.Join(t.TempDir(), "quirky.csv")
	require.NoError(t, os.WriteFile(path, []byte(b.String()), 0o644))
	return path, badLine
}

// importWith records the file at path in store through replay and src.
func importWith(t *testing.T, store *storage.Store, r *rig.Rig, text string, src *acquire.CSVFile,
	replay func(*process.Recorder) error) (uint64, error) {
	t.Helper()
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: r, RigTOML: text, Offline: true,
		Now: func() time.Time { return time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC) }})
	require.NoError(t, err)
	rerr := replay(rec)
	_, err = rec.Finish(t.Context(), rerr, []acquire.HealthSnapshot{src.Health.Snapshot("file")})
	require.NoError(t, err)
	return rec.RunID(), rerr
}

// storedBlocks returns a run's stored raw blocks, written out in full.
func storedBlocks(t *testing.T, store *storage.Store, id uint64) string {
	t.Helper()
	var b bytes.Buffer
	require.NoError(t, store.ReplayBlocks(id, func(blk acquire.Block) error {
		fmt.Fprintf(&b, "%s %d %d %d %d %s\n", blk.Source, blk.Seq, blk.T0Us, blk.DtUs, blk.AlignedT0Us, blk.Received.Format(time.RFC3339Nano))
		for _, s := range blk.Series {
			fmt.Fprintf(&b, " %s", s.Channel)
			for _, v := range s.Raw {
				fmt.Fprintf(&b, " %x", math.Float64bits(v))
			}
			b.WriteString("\n")
		}
		return nil
	}))
	return b.String()
}

// Ensure that the fast import path (the splitter, the parse on its own
// goroutine, the estimation stage on another: CSVFile and ReplayStaged)
// stores the same raw blocks, bit for bit, and the same segments as the
// straightforward one (encoding/csv and every stage on one goroutine:
// CSVFile.Straight and Replay), on a record with a BOM, CRLF, blank lines,
// quoted cells and gaps; and that with a bad line both stop at it with the
// same error, having stored the same blocks before it.
func TestImport_FastPathEqualsStraightPath(t *testing.T) {
	r, text := loadRig(t, foilRig)
	for _, bad := range []int{0, 700, 1300} { // none, in the fast splitter, after the quotes
		t.Run(fmt.Sprintf("bad line %d", bad), func(t *testing.T) {
			path, badLine := quirkyRecord(t, bad)
			store := openStore(t)
			var fastSegs, plainSegs []estimate.Segment
			fast := &acquire.CSVFile{Path: path, Source: r.Sources[0].Name, BlockN: 10}
			fastID, fastErr := importWith(t, store, r, text, fast, func(rec *process.Recorder) error {
				var err error
				fastSegs, err = process.ReplayStaged(t.Context(), fast, rec.Pipeline(), rec.Keep)
				return err
			})
			plain := &acquire.CSVFile{Path: path, Source: r.Sources[0].Name, BlockN: 10, Straight: true}
			plainID, plainErr := importWith(t, store, r, text, plain, func(rec *process.Recorder) error {
				var err error
				plainSegs, err = process.Replay(t.Context(), plain, rec.Pipeline(), rec.Keep)
				return err
			})
			if bad == 0 {
				require.NoError(t, fastErr)
				require.NoError(t, plainErr)
				require.GreaterOrEqual(t, len(fastSegs), 4, "the holds of the record give segments")
			} else {
				require.Error(t, fastErr)
				require.Equal(t, plainErr.Error(), fastErr.Error())
				require.Contains(t, fastErr.Error(), fmt.Sprintf(":%d: column \"a_main\": \"12.3.4\" is not a number", badLine))
			}
			assert.Equal(t, plain.Health.Samples.Load(), fast.Health.Samples.Load())
			blocks := storedBlocks(t, store, fastID)
			require.NotEmpty(t, blocks)
			require.Equal(t, storedBlocks(t, store, plainID), blocks, "the same raw blocks stored")
			a, err := store.Segments(fastID)
			require.NoError(t, err)
			b, err := store.Segments(plainID)
			require.NoError(t, err)
			// %v writes every field, NaN included, to the shortest text that
			// reads back to the same float64.
			require.Equal(t, fmt.Sprintf("%v", b), fmt.Sprintf("%v", a), "the same segments stored")
			require.Equal(t, fmt.Sprintf("%v", plainSegs), fmt.Sprintf("%v", fastSegs), "the same segments returned")
		})
	}
}

// Ensure that a staged replay stops on a cancel and on an error from each:
// no block after it, the error unchanged.
func TestReplayStaged_Stops(t *testing.T) {
	r, _ := loadRig(t, foilRig)
	cal, err := calibrate.NewCalibrator(r)
	require.NoError(t, err)
	for _, cancelIt := range []bool{true, false} {
		p, err := process.New(r, cal, process.Options{})
		require.NoError(t, err)
		ctx, cancel := context.WithCancel(t.Context())
		stop := errors.New("stop")
		n, last := 0, false
		_, err = process.ReplayStaged(ctx, &acquire.CSVFile{Path: rawCSV, Source: "carriage", BlockN: 10}, p, func(b *acquire.Block, _ process.Step) error {
			if b == nil {
				last = true
				return nil
			}
			if n++; n == 3 {
				if cancelIt {
					cancel()
				} else {
					return stop
				}
			}
			return nil
		})
		cancel()
		if cancelIt {
			assert.ErrorIs(t, err, context.Canceled)
		} else {
			assert.Equal(t, stop, err)
			assert.False(t, last, "no last call after each failed")
		}
		assert.Equal(t, 3, n, "no block after the stop")
	}
}
