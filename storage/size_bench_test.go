package storage

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"syscall"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
)

// signal makes one channel's readings, sample by sample.
type signal func(rng *rand.Rand, i int) float64

// loadCell is a 24-bit load-cell amplifier's counts (full scale ±8 388 608):
// an offset, a load that ramps through holds over minutes (a sweep of a
// tow rig), and white noise of standard deviation sigma counts, rounded to
// whole counts.
func loadCell(offset, sigma float64) signal {
	return func(rng *rand.Rand, i int) float64 {
		t := float64(i) / 1000
		load := 1_500_000 * math.Sin(2*math.Pi*t/240) * (0.6 + 0.4*math.Sin(2*math.Pi*t/37))
		return math.Round(offset + load + sigma*rng.NormFloat64())
	}
}

// pressure is a pressure tap in Pa with two decimals, as a scanner prints
// them (the text parsed as the CSV or JSON reader parses it): a mean, a
// slow swell of the wind, and turbulence of standard deviation sigma Pa,
// either white or low-pass (first-order, correlation time tau samples).
func pressure(mean, sigma, tau float64) signal {
	var state float64
	a := 0.0
	if tau > 0 {
		a = math.Exp(-1 / tau)
	}
	return func(rng *rand.Rand, i int) float64 {
		state = a*state + math.Sqrt(1-a*a)*sigma*rng.NormFloat64()
		v := mean*(1+0.2*math.Sin(float64(i)/3000)) + state
		f, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'f', 2, 64), 64)
		return f
	}
}

// recording makes seconds of blocks of one source: channels channels at
// rateHz, blocks of blockSamples, each channel from mk(channel).
func recording(seconds, rateHz, channels, blockSamples int, mk func(c int) signal) []*acquire.Block {
	rng := rand.New(rand.NewPCG(2026, 12))
	sigs := make([]signal, channels)
	names := make([]string, channels)
	for c := range sigs {
		sigs[c] = mk(c)
		names[c] = fmt.Sprintf("ch_%02d", c+1)
	}
	n := seconds * rateHz / blockSamples
	dtUs := int64(1e6 / rateHz)
	t0 := time.Date(2026, 12, 2, 9, 0, 0, 0, time.UTC)
	blocks := make([]*acquire.Block, n)
	for k := range blocks {
		b := &acquire.Block{Source: "rig", Seq: uint64(k), T0Us: t0.UnixMicro() + int64(k*blockSamples)*dtUs, DtUs: dtUs,
			Received: t0.Add(time.Duration(int64((k+1)*blockSamples)*dtUs) * time.Microsecond)}
		for c := range channels {
			raw := make([]float64, blockSamples)
			for i := range raw {
				raw[i] = sigs[c](rng, k*blockSamples+i)
			}
			b.Series = append(b.Series, acquire.Series{Channel: names[c], Raw: raw})
		}
		blocks[k] = b
	}
	return blocks
}

// storeRecording writes blocks through the writer's commit, one commit per
// DefaultInterval of device time (as Writer.Run does in a live run), and
// returns the store's size in bytes (bbolt's high-water mark: every page
// the file uses, free pages included) and the bytes the file occupies on
// disk, over the readings.
func storeRecording(tb testing.TB, blocks []*acquire.Block) (fileB, diskB float64) {
	path := filepath.Join(tb.TempDir(), "size.db")
	s, err := Open(path, Options{})
	if err != nil {
		tb.Fatal(err)
	}
	id, err := s.CreateRun(Run{Rig: "bench", AreaM2: 1})
	if err != nil {
		tb.Fatal(err)
	}
	w := s.NewWriter(id, WriterConfig{})
	var bt batch
	per := int(DefaultInterval.Microseconds() / (blocks[0].DtUs * int64(blocks[0].Len())))
	readings := 0
	for i, b := range blocks {
		bt.add(Item{Block: b})
		readings += b.Len() * len(b.Series)
		if (i+1)%max(per, 1) == 0 || i == len(blocks)-1 {
			if err := w.commit(&bt); err != nil {
				tb.Fatal(err)
			}
			bt.reset()
		}
	}
	var size int64
	s.db.View(func(tx *bolt.Tx) error { size = tx.Size(); return nil })
	if err := s.Close(); err != nil {
		tb.Fatal(err)
	}
	fi, err := os.Stat(path)
	if err != nil {
		tb.Fatal(err)
	}
	disk := fi.Sys().(*syscall.Stat_t).Blocks * 512
	return float64(size) / float64(readings), float64(disk) / float64(readings)
}

// storeCases are the recordings of BenchmarkStoreSize: docs/performance.md
// has the table.
var storeCases = []struct {
	name                              string
	seconds, rateHz, ch, blockSamples int
	mk                                func(c int) signal
}{
	{"loadcell_1kHz16ch_noise50", 600, 1000, 16, 100, func(c int) signal { return loadCell(float64(c)*90_000-700_000, 50) }},
	{"loadcell_1kHz16ch_noise100", 600, 1000, 16, 100, func(c int) signal { return loadCell(float64(c)*90_000-700_000, 100) }},
	{"loadcell_1kHz16ch_noise200", 600, 1000, 16, 100, func(c int) signal { return loadCell(float64(c)*90_000-700_000, 200) }},
	{"loadcell_1kHz16ch_noise1000", 600, 1000, 16, 100, func(c int) signal { return loadCell(float64(c)*90_000-700_000, 1000) }},
	{"pressure_1kHz16ch_white2Pa", 600, 1000, 16, 100, func(c int) signal { return pressure(123.45+float64(c)*10, 2, 0) }},
	{"pressure_1kHz16ch_white20Pa", 600, 1000, 16, 100, func(c int) signal { return pressure(123.45+float64(c)*10, 20, 0) }},
	{"pressure_1kHz16ch_turb20Pa_tau20", 600, 1000, 16, 100, func(c int) signal { return pressure(123.45+float64(c)*10, 20, 20) }},
	{"pressure_100Hz64taps_turb5Pa_tau3", 1200, 100, 64, 10, func(c int) signal { return pressure(-300+float64(c)*7.5, 5, 3) }},
	{"pressure_100Hz64taps_turb15Pa_tau3", 1200, 100, 64, 10, func(c int) signal { return pressure(-300+float64(c)*7.5, 15, 3) }},
	{"pressure_100Hz64taps_turb15Pa_tau3_blocks100", 1200, 100, 64, 100, func(c int) signal { return pressure(-300+float64(c)*7.5, 15, 3) }},
	{"pressure_100Hz64taps_white40Pa", 1200, 100, 64, 10, func(c int) signal { return pressure(-300+float64(c)*7.5, 40, 0) }},
	// Harsher than a field record, to show where 3 bytes stops holding.
	{"loadcell_1kHz16ch_noise10000", 600, 1000, 16, 100, func(c int) signal { return loadCell(float64(c)*90_000-700_000, 10_000) }},
	{"pressure_1kHz16ch_white100Pa", 600, 1000, 16, 100, func(c int) signal { return pressure(123.45+float64(c)*10, 100, 0) }},
	{"pressure_100Hz64taps_white100Pa_blocks100", 1200, 100, 64, 100, func(c int) signal { return pressure(-300+float64(c)*7.5, 100, 0) }},
	// A node that sends one, two or five samples at a time (group records).
	{"pressure_100Hz16ch_white20Pa_blocks1", 1200, 100, 16, 1, func(c int) signal { return pressure(123.45+float64(c)*10, 20, 0) }},
	{"pressure_100Hz16ch_white20Pa_blocks2", 1200, 100, 16, 2, func(c int) signal { return pressure(123.45+float64(c)*10, 20, 0) }},
	{"pressure_100Hz16ch_white20Pa_blocks5", 1200, 100, 16, 5, func(c int) signal { return pressure(123.45+float64(c)*10, 20, 0) }},
	{"pressure_100Hz16ch_white20Pa_blocks10", 1200, 100, 16, 10, func(c int) signal { return pressure(123.45+float64(c)*10, 20, 0) }},
}

// BenchmarkStoreSize records each case through the writer and reports the
// bytes per raw reading: file-B/reading is bbolt's size of the file in use
// (pages up to the high-water mark), disk-B/reading what the file occupies
// on disk.
//
//	go test -run '^$' -bench StoreSize -benchtime 1x ./storage/
func BenchmarkStoreSize(b *testing.B) {
	for _, tc := range storeCases {
		b.Run(tc.name, func(b *testing.B) {
			blocks := recording(tc.seconds, tc.rateHz, tc.ch, tc.blockSamples, tc.mk)
			var file, disk float64
			for b.Loop() {
				file, disk = storeRecording(b, blocks)
			}
			b.ReportMetric(file, "file-B/reading")
			b.ReportMetric(disk, "disk-B/reading")
		})
	}
}

// BenchmarkBlockCodec encodes and decodes 100 ms blocks of 16 channels at
// 1 kHz (1600 readings) on one goroutine and reports readings per second.
//
//	go test -run '^$' -bench BlockCodec -cpu 1 ./storage/
func BenchmarkBlockCodec(b *testing.B) {
	for _, tc := range []struct {
		name string
		mk   func(c int) signal
	}{
		{"loadcell_noise100", func(c int) signal { return loadCell(float64(c)*90_000, 100) }},
		{"pressure_2dec", func(c int) signal { return pressure(123.45+float64(c), 20, 20) }},
		{"random_float64", func(int) signal { return func(r *rand.Rand, _ int) float64 { return r.NormFloat64() } }},
	} {
		blocks := recording(1, 1000, 16, 100, tc.mk)
		readings := float64(len(blocks) * 1600)
		b.Run("encode_"+tc.name, func(b *testing.B) {
			var buf []byte
			for b.Loop() {
				for _, blk := range blocks {
					buf, _ = encodeBlock(buf[:0], blk)
				}
			}
			b.ReportMetric(readings*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
		})
		enc := make([][]byte, len(blocks))
		for i, blk := range blocks {
			enc[i], _ = encodeBlock(nil, blk)
		}
		b.Run("decode_"+tc.name, func(b *testing.B) {
			var out acquire.Block
			for b.Loop() {
				for _, e := range enc {
					if err := decodeBlock(e, &out); err != nil {
						b.Fatal(err)
					}
				}
			}
			b.ReportMetric(readings*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
		})
	}
}
