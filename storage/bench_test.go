package storage

import (
	"os"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
)

// benchCommit commits one Writer batch per iteration: interval worth of
// blocks from one source at rateHz with channels channels, blockSamples
// samples per block, exactly as Writer.Run does at the default interval.
func benchCommit(b *testing.B, rateHz, channels, blockSamples int) {
	path := filepath.Join(b.TempDir(), "bench.db")
	s, err := Open(path, Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	id, err := s.CreateRun(Run{Rig: "bench", AreaM2: 1})
	if err != nil {
		b.Fatal(err)
	}
	w := s.NewWriter(id, WriterConfig{})
	perBatch := int(DefaultInterval.Seconds()*float64(rateHz)) / blockSamples // blocks per commit
	names := make([]string, channels)
	for c := range names {
		names[c] = "tap_" + string(rune('a'+c/26)) + string(rune('a'+c%26))
	}
	var seq uint64
	mk := func() *acquire.Block {
		blk := &acquire.Block{Source: "rig", Seq: seq, T0Us: int64(seq) * int64(blockSamples) * 1e6 / int64(rateHz),
			DtUs: 1e6 / int64(rateHz), Received: time.Unix(1_750_000_000, 0)}
		for _, n := range names {
			raw := make([]float64, blockSamples)
			for i := range raw {
				raw[i] = 800 + float64((int(seq)*blockSamples+i)%97)*0.013
			}
			blk.Series = append(blk.Series, acquire.Series{Channel: n, Raw: raw})
		}
		seq++
		return blk
	}
	b.ReportAllocs()
	var bt batch
	for b.Loop() {
		bt.reset()
		for range perBatch {
			bt.add(Item{Block: mk()})
		}
		if err := w.commit(&bt); err != nil {
			b.Fatal(err)
		}
	}
	_, samples := w.Committed()
	readings := float64(samples) * float64(channels)
	b.ReportMetric(float64(samples)/b.Elapsed().Seconds(), "samples/s")
	b.ReportMetric(readings/b.Elapsed().Seconds(), "readings/s")
	var leafBytes int
	s.db.View(func(tx *bolt.Tx) error {
		leafBytes = tx.Bucket(bucketRaw).Bucket(u64(id)).Bucket([]byte("rig")).Stats().LeafAlloc
		return nil
	})
	b.ReportMetric(float64(leafBytes)/readings, "leaf-B/reading")
	fi, _ := os.Stat(path)
	disk := fi.Sys().(*syscall.Stat_t).Blocks * 512
	b.ReportMetric(float64(disk)/readings, "disk-B/reading")
}

// BenchmarkCommit_1kHz8ch: a tow-rig balance, 1 kHz × 8 channels, blocks of
// 50 samples, one commit per 200 ms.
func BenchmarkCommit_1kHz8ch(b *testing.B) { benchCommit(b, 1000, 8, 50) }

// BenchmarkCommit_100Hz64taps: a roof mock-up, 100 Hz × 64 pressure taps,
// blocks of 10 samples, one commit per 200 ms.
func BenchmarkCommit_100Hz64taps(b *testing.B) { benchCommit(b, 100, 64, 10) }
