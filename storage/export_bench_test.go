package storage_test

import (
	"fmt"
	"io"
	"runtime"
	"strconv"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/storage"
)

// benchRun stores minutes of a 16-channel balance at 1 kHz (blocks of 100)
// on one device clock and a pitot node at 100 Hz on another, both with
// receive times, through the store's writer.
func benchRun(b *testing.B, minutes int) (*storage.Store, uint64) {
	b.Helper()
	s := MustOpenStore(b)
	start := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	id, err := s.CreateRun(storage.Run{Rig: "bench", Kind: "foil", Started: start})
	if err != nil {
		b.Fatal(err)
	}
	w := s.NewWriter(id, storage.WriterConfig{})
	in := make(chan storage.Item, 64)
	done := make(chan error, 1)
	go func() { done <- w.Run(b.Context(), in) }()
	blocks := minutes * 60 * 10
	for k := range blocks {
		el := int64(k) * 100_000
		bal := &acquire.Block{Source: "balance", Seq: uint64(k), T0Us: 3_600_000_000 + el, DtUs: 1000,
			Received: start.Add(time.Duration(el+99_000+700) * time.Microsecond)}
		for c := range 16 {
			v := make([]float64, 100)
			for i := range v {
				v[i] = float64((k*100+i)*(c+7)%8_388_607 - 4_000_000)
			}
			bal.Series = append(bal.Series, acquire.Series{Channel: "ch" + strconv.Itoa(c), Raw: v})
		}
		pit := &acquire.Block{Source: "pitot", Seq: uint64(k), T0Us: 777_000_000 + el, DtUs: 10_000,
			Received: start.Add(time.Duration(el+90_000+6_000) * time.Microsecond)}
		v := make([]float64, 10)
		for i := range v {
			v[i] = 201.25 + 0.01*float64(i)
		}
		pit.Series = []acquire.Series{{Channel: "dp", Raw: v}}
		in <- storage.Item{Block: bal}
		in <- storage.Item{Block: pit}
	}
	close(in)
	if err := <-done; err != nil {
		b.Fatal(err)
	}
	return s, id
}

// peakHeap samples the heap in use while fn runs and returns the largest
// rise over what was in use before.
func peakHeap(fn func() error) (uint64, error) {
	runtime.GC()
	var m runtime.MemStats
	runtime.ReadMemStats(&m)
	base := m.HeapInuse
	var peak atomic.Uint64
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Go(func() {
		var ms runtime.MemStats
		tick := time.NewTicker(20 * time.Millisecond)
		defer tick.Stop()
		for {
			runtime.ReadMemStats(&ms)
			if ms.HeapInuse > base && ms.HeapInuse-base > peak.Load() {
				peak.Store(ms.HeapInuse - base)
			}
			select {
			case <-stop:
				return
			case <-tick.C:
			}
		}
	})
	err := fn()
	close(stop)
	wg.Wait()
	return peak.Load(), err
}

// countWriter counts bytes.
type countWriter struct{ n int64 }

func (c *countWriter) Write(p []byte) (int, error) { c.n += int64(len(p)); return len(p), nil }

// benchExport exports a stored run of minutes of 16 channels at 1 kHz plus
// a 100 Hz pitot: readings/s, output bytes per reading and the peak heap
// the export adds. The peak heap is the streaming check: it must not grow
// with the run's length.
func benchExport(b *testing.B, minutes int, export func(*storage.Store, io.Writer, uint64) error) {
	s, id := benchRun(b, minutes)
	readings := float64(minutes*60*1000) * 17 // one row per balance sample, 17 columns
	b.ResetTimer()
	var peak uint64
	var out countWriter
	for b.Loop() {
		out = countWriter{}
		p, err := peakHeap(func() error { return export(s, &out, id) })
		if err != nil {
			b.Fatal(err)
		}
		peak = max(peak, p)
	}
	b.ReportMetric(readings*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
	b.ReportMetric(float64(out.n)/readings, "B/reading")
	b.ReportMetric(float64(peak)/(1<<20), "peak-heap-MB")
}

func parquetRaw(s *storage.Store, w io.Writer, id uint64) error { return s.ExportRawParquet(w, id) }
func csvRaw(s *storage.Store, w io.Writer, id uint64) error     { return s.ExportRaw(w, id) }

// BenchmarkExportRaw: 16 channels at 1 kHz and a 100 Hz pitot from another
// source, 5 and 20 minutes, as Parquet and as CSV (docs/performance.md).
func BenchmarkExportRaw(b *testing.B) {
	for _, minutes := range []int{5, 20} {
		b.Run(fmt.Sprintf("parquet_%dmin", minutes), func(b *testing.B) { benchExport(b, minutes, parquetRaw) })
		b.Run(fmt.Sprintf("csv_%dmin", minutes), func(b *testing.B) { benchExport(b, minutes, csvRaw) })
	}
}
