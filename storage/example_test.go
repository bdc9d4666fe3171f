package storage_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"liftyard/acquire"
	"liftyard/storage"
)

// Record two blocks of an invented tow-rig run through the Writer, finish
// the run and read it back.
func Example() {
	dir, err := os.MkdirTemp("", "liftyard-example")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)

	clock := time.Date(2025, 6, 14, 9, 30, 0, 0, time.UTC)
	s, err := storage.Open(filepath.Join(dir, "yard.db"), storage.Options{Now: func() time.Time { return clock }})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer s.Close()

	id, _ := s.CreateRun(storage.Run{Rig: "tow-fin-a", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.12, AreaKind: "planform"})
	w := s.NewWriter(id, storage.WriterConfig{})
	in := w.NewQueue()
	done := make(chan error)
	go func() { done <- w.Run(context.Background(), in) }()
	for seq := range uint64(2) {
		storage.Offer(in, storage.Item{Block: &acquire.Block{
			Source: "balance", Seq: seq, T0Us: int64(seq) * 3000, DtUs: 1000,
			Series: []acquire.Series{{Channel: "n_fore", Raw: []float64{812.1, 813.0, 812.7}}},
		}}, nil)
	}
	close(in)
	if err := <-done; err != nil {
		fmt.Println(err)
		return
	}
	s.FinishRun(id, clock.Add(time.Minute), storage.StatusComplete, nil)

	r, _ := s.Run(id)
	fmt.Printf("run %d %s: %s, %d samples\n", r.ID, r.Rig, r.Status, r.Samples)
	s.RawBlocks(id, func(b acquire.Block) error {
		fmt.Printf("%s seq %d t0 %d µs: n_fore %v\n", b.Source, b.Seq, b.T0Us, b.Raw("n_fore"))
		return nil
	})
	// Output:
	// run 1 tow-fin-a: complete, 6 samples
	// balance seq 0 t0 0 µs: n_fore [812.1 813 812.7]
	// balance seq 1 t0 3000 µs: n_fore [812.1 813 812.7]
}
