package storage_test

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"liftyard/acquire"
	"liftyard/storage"
)

// openFixtureCopy opens a copy of a checked-in store (a test must not
// change the fixture: opening read-write marks runs and may write).
func openFixtureCopy(t *testing.T, fixture string) *storage.Store {
	t.Helper()
	data, err := os.ReadFile(fixture)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), filepath.Base(fixture))
	if err := os.WriteFile(path, data, 0o600); err != nil {
		t.Fatal(err)
	}
	return MustOpenStoreAt(t, path, storage.Options{})
}

func loadV1Fixture(t *testing.T) v1Fixture {
	t.Helper()
	data, err := os.ReadFile(storeV1Values)
	if err != nil {
		t.Fatal(err)
	}
	var fx v1Fixture
	if err := json.Unmarshal(data, &fx); err != nil {
		t.Fatal(err)
	}
	return fx
}

func fixtureBits(t *testing.T, s string) uint64 {
	t.Helper()
	u, err := strconv.ParseUint(s, 16, 64)
	if err != nil {
		t.Fatal(err)
	}
	return u
}

// Ensure that a store written by the version 1 block format (checked in,
// testdata/store-v1.db) reads back every block bit for bit with today's
// code: the same headers, channels and float64 bits the generator wrote
// (NaN payloads, ±Inf, −0, 24-bit counts, two-decimal pressures, random
// bits); and that blocks appended to it now (version 2) read back beside
// the old ones.
// The version 2 fixture (testdata/store-v2.db) holds the same blocks in
// the version 2 format and is read the same way, so that a later format
// keeps reading today's files.
func TestMigration_FixturesReadBitForBit(t *testing.T) {
	for _, path := range []string{storeV1Path, storeV2Path, storeV3Path} {
		t.Run(filepath.Base(path), func(t *testing.T) { testFixtureReadsBitForBit(t, path) })
	}
}

func testFixtureReadsBitForBit(t *testing.T, path string) {
	fx := loadV1Fixture(t)
	s := openFixtureCopy(t, path)
	if len(fx.Runs) != 2 {
		t.Fatalf("fixture has %d runs, want 2", len(fx.Runs))
	}
	readings := 0
	for _, fr := range fx.Runs {
		// The stored order: source by source in name order, each in t0 order.
		want := map[string][]v1FixtureBlock{}
		for _, b := range fr.Blocks {
			want[b.Source] = append(want[b.Source], b)
		}
		got := map[string]int{}
		err := s.RawBlocks(fr.ID, func(b acquire.Block) error {
			i := got[b.Source]
			got[b.Source]++
			if i >= len(want[b.Source]) {
				t.Fatalf("run %d source %s: block %d not written by the generator", fr.ID, b.Source, i)
			}
			w := want[b.Source][i]
			if b.Seq != w.Seq || b.T0Us != w.T0Us || b.DtUs != w.DtUs || !b.Received.Equal(w.Received) ||
				len(b.Series) != len(w.Channels) {
				t.Fatalf("run %d source %s block %d: header %+v, want %+v", fr.ID, b.Source, i, b, w)
			}
			for c, sr := range b.Series {
				if sr.Channel != w.Channels[c] || len(sr.Raw) != len(w.Bits[c]) {
					t.Fatalf("run %d block %d channel %d: %q × %d", fr.ID, i, c, sr.Channel, len(sr.Raw))
				}
				for j, v := range sr.Raw {
					if math.Float64bits(v) != fixtureBits(t, w.Bits[c][j]) {
						t.Errorf("run %d block %d %s[%d]: %016x, want %s", fr.ID, i, sr.Channel, j, math.Float64bits(v), w.Bits[c][j])
					}
					readings++
				}
			}
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		for src, bs := range want {
			if got[src] != len(bs) {
				t.Errorf("run %d source %s: %d blocks read, generator wrote %d", fr.ID, src, got[src], len(bs))
			}
		}
	}
	if readings < 2000 {
		t.Errorf("only %d readings compared", readings)
	}

	// Append to the old foil run with today's writer: old and new records
	// side by side in one source bucket.
	foil, _ := v1FixtureBlocks()
	extra := *foil[0]
	extra.Seq, extra.T0Us = 100, 10_000_000
	w := s.NewWriter(fx.Runs[0].ID, storage.WriterConfig{})
	q := w.NewQueue()
	q <- storage.Item{Block: &extra}
	close(q)
	if err := w.Run(context.Background(), q); err != nil {
		t.Fatal(err)
	}
	var last acquire.Block
	if err := s.RawBlocks(fx.Runs[0].ID, func(b acquire.Block) error {
		if b.Source == "balance" {
			last = b
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if last.Seq != 100 || math.Float64bits(last.Series[0].Raw[7]) != math.Float64bits(extra.Series[0].Raw[7]) {
		t.Errorf("block appended to an old run reads %+v", last.Seq)
	}
}

// Ensure that the raw readings of the old-format store survive export →
// import → store (now version 2 blocks) → export bit for bit: every finite
// reading comes back as the same float64 and the two exports are the same
// bytes. (A raw CSV has no NaN payloads or ±Inf: a reading that is not
// finite is a blank cell, read back as NaN; the store keeps them, the CSV
// cannot.)
func TestMigration_V1ExportImportBitExact(t *testing.T) {
	fx := loadV1Fixture(t)
	s := openFixtureCopy(t, storeV1Path)
	for _, fr := range fx.Runs {
		var csv1 bytes.Buffer
		if err := s.ExportRaw(&csv1, fr.ID); err != nil {
			t.Fatal(err)
		}
		// Import the export into a new run of a new store.
		dst := MustOpenStore(t)
		id := mustCreateRun(t, dst)
		w := dst.NewWriter(id, storage.WriterConfig{})
		q := make(chan storage.Item, 1<<16)
		if err := acquire.ReadRawCSV(bytes.NewReader(csv1.Bytes()), "file", 37, func(b acquire.Block) error {
			q <- storage.Item{Block: &b}
			return nil
		}); err != nil {
			t.Fatalf("run %d: import of its export: %v", fr.ID, err)
		}
		close(q)
		if err := w.Run(context.Background(), q); err != nil {
			t.Fatal(err)
		}

		// The export is on the run's aligned UTC timeline (docs/export.md),
		// so times move by the run's clock offset; each channel's readings
		// must come back in order, bit for bit. A two-source export names
		// its columns source/channel.
		got := map[string][]float64{}
		if err := dst.RawBlocks(id, func(b acquire.Block) error {
			for _, sr := range b.Series {
				name := sr.Channel
				if _, ch, ok := strings.Cut(name, "/"); ok {
					name = ch
				}
				got[name] = append(got[name], sr.Raw...)
			}
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		want := map[string][]string{}
		for _, b := range fr.Blocks {
			for c, ch := range b.Channels {
				want[ch] = append(want[ch], b.Bits[c]...)
			}
		}
		// The timeline source (the fastest here: the run has no rig file)
		// comes back reading for reading. A slower source is resampled onto
		// its rows as the estimator joins it: each cell lies between two
		// consecutive stored readings (interpolated linearly; the reading
		// itself on a sample, or next to a NaN), in order.
		longest := 0
		for _, bits := range want {
			longest = max(longest, len(bits))
		}
		n := 0
		for ch, bits := range want {
			if len(bits) < longest {
				stored := make([]float64, len(bits))
				for i, hex := range bits {
					stored[i] = math.Float64frombits(fixtureBits(t, hex))
				}
				k, cells := 0, 0
				for _, v := range got[ch] {
					if math.IsNaN(v) {
						continue // a blank cell: no reading near that row
					}
					for k < len(stored) && !betweenReadings(v, stored, k) {
						k++
					}
					if k == len(stored) {
						t.Fatalf("run %d %s: cell %v (after %d cells) is not between consecutive stored readings, in order", fr.ID, ch, v, cells)
					}
					cells++
				}
				t.Logf("run %d %s (slower source): %d cells, each between consecutive readings of the %d stored", fr.ID, ch, cells, len(stored))
				if cells == 0 {
					t.Errorf("run %d %s: no cell filled", fr.ID, ch)
				}
				continue
			}
			if len(got[ch]) != len(bits) {
				t.Errorf("run %d %s: %d readings after the round trip, want %d", fr.ID, ch, len(got[ch]), len(bits))
				continue
			}
			for i, hex := range bits {
				want := math.Float64frombits(fixtureBits(t, hex))
				v := got[ch][i]
				switch {
				case math.IsNaN(want) || math.IsInf(want, 0):
					if !math.IsNaN(v) {
						t.Errorf("run %d %s: %v came back as %v", fr.ID, ch, want, v)
					}
				case math.Float64bits(v) != math.Float64bits(want):
					t.Errorf("run %d %s reading %d: %016x, want %s", fr.ID, ch, i, math.Float64bits(v), hex)
				default:
					n++
				}
			}
		}
		if n < 500 {
			t.Errorf("run %d: only %d finite readings compared", fr.ID, n)
		}
		var csv2 bytes.Buffer
		if err := dst.ExportRaw(&csv2, id); err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(csv1.Bytes(), csv2.Bytes()) {
			t.Errorf("run %d: the export of the re-imported run differs from the first export", fr.ID)
		}
	}
}

// betweenReadings reports whether v is stored[k] or lies between stored[k]
// and stored[k+1] (within a few units in the last place, the rounding of
// v0 + f·(v1 − v0)).
func betweenReadings(v float64, stored []float64, k int) bool {
	if math.Float64bits(v) == math.Float64bits(stored[k]) {
		return true
	}
	if k+1 >= len(stored) {
		return false
	}
	lo, hi := min(stored[k], stored[k+1]), max(stored[k], stored[k+1])
	slack := 4 * (math.Nextafter(math.Abs(lo)+math.Abs(hi), math.Inf(1)) - (math.Abs(lo) + math.Abs(hi)))
	return v >= lo-slack && v <= hi+slack
}
