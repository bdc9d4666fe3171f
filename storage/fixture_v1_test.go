package storage_test

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
	"liftyard/storage"
)

// genStoreV1 rewrites testdata/store-v1.db and its values file. The file was
// written by the v1 block format (float64 bits per reading) before the
// compact v2 format existed; regenerating it with today's code writes v2
// blocks, which the migration test then no longer covers. Only regenerate
// on purpose:
//
//	go test ./storage -run '^TestGenerateStoreV1$' -gen-store-v1
var genStoreV1 = flag.Bool("gen-store-v1", false, "rewrite testdata/store-v1.db (the old-format migration fixture)")

// genStoreV2 writes testdata/store-v2.db: the same blocks as the v1 fixture,
// written by the version 2 block format, so that a later format keeps
// reading version 2 files. Regenerate only while version 2 is what the
// writer writes:
//
//	go test ./storage -run '^TestGenerateStoreV2$' -gen-store-v2
var genStoreV2 = flag.Bool("gen-store-v2", false, "rewrite testdata/store-v2.db (the version 2 fixture)")

// genStoreV3 writes testdata/store-v3.db: the same blocks again, written by
// the writer with group records (version 3) for the small ones.
//
//	go test ./storage -run '^TestGenerateStoreV3$' -gen-store-v3
var genStoreV3 = flag.Bool("gen-store-v3", false, "rewrite testdata/store-v3.db (the group-record fixture)")

const (
	storeV1Path   = "testdata/store-v1.db"
	storeV2Path   = "testdata/store-v2.db"
	storeV3Path   = "testdata/store-v3.db"
	storeV1Values = "testdata/store-v1.values.json" // the blocks of both fixtures
)

// v1Fixture is what the generator wrote: per run (in creation order), per
// source, the blocks in stored order, each reading as its float64 bits in
// hex so that NaN payloads and negative zero are kept.
type v1Fixture struct {
	Runs []v1FixtureRun `json:"runs"`
}

type v1FixtureRun struct {
	ID     uint64           `json:"id"`
	Kind   string           `json:"kind"`
	Blocks []v1FixtureBlock `json:"blocks"`
}

type v1FixtureBlock struct {
	Source   string     `json:"source"`
	Seq      uint64     `json:"seq"`
	T0Us     int64      `json:"t0_us"`
	DtUs     int64      `json:"dt_us"`
	Received time.Time  `json:"received"`
	Channels []string   `json:"channels"`
	Bits     [][]string `json:"bits"` // per channel, per sample: %016x of the float64
}

// v1FixtureBlocks builds the fixture's blocks deterministically: a foil run
// (one balance source at 1 kHz: 24-bit ADC counts with negative values, a
// long run of equal values, a channel with NaN gaps and ±Inf, two-decimal
// pressures parsed from text as a CSV would give them) and a roof run (a
// pressure scanner of 8 taps at 100 Hz, Pa with two decimals, one tap
// stuck at a constant, one block with NaN payloads and negative zero).
func v1FixtureBlocks() (foil, roof []*acquire.Block) {
	rng := rand.New(rand.NewPCG(14, 2026))
	recv0 := time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)
	parse := func(s string) float64 {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			panic(err)
		}
		return v
	}
	for seq := range uint64(12) {
		n := 50
		b := &acquire.Block{Source: "balance", Seq: seq, T0Us: int64(seq) * 50_000, DtUs: 1000,
			Received: recv0.Add(time.Duration(seq) * 50 * time.Millisecond)}
		counts := make([]float64, n)
		flat := make([]float64, n)
		gaps := make([]float64, n)
		pitot := make([]float64, n)
		for i := range n {
			k := int(seq)*n + i
			counts[i] = math.Round(-812_345 + 3000*math.Sin(float64(k)/70) + rng.NormFloat64()*120)
			flat[i] = 4720 // a long run of equal values (a channel at rest)
			if k > 400 {
				flat[i] = -4721
			}
			gaps[i] = parse(fmt.Sprintf("%.3f", -1.5+float64(k)*0.001+rng.Float64()*0.01))
			if k%37 == 0 {
				gaps[i] = math.NaN()
			}
			pitot[i] = parse(fmt.Sprintf("%.2f", 812.34+25*math.Sin(float64(k)/40)+rng.NormFloat64()*3))
		}
		if seq == 5 {
			gaps[3], gaps[4] = math.Inf(1), math.Inf(-1)
		}
		b.Series = []acquire.Series{{Channel: "n_fore", Raw: counts}, {Channel: "a_main", Raw: flat},
			{Channel: "alpha", Raw: gaps}, {Channel: "pitot", Raw: pitot}}
		foil = append(foil, b)
	}
	// One single-sample block and one block of random float64 bits.
	foil = append(foil, &acquire.Block{Source: "balance", Seq: 12, T0Us: 600_000, DtUs: 1000, Received: recv0.Add(600 * time.Millisecond),
		Series: []acquire.Series{{Channel: "n_fore", Raw: []float64{-8_388_608}}, {Channel: "a_main", Raw: []float64{8_388_607}},
			{Channel: "alpha", Raw: []float64{1e-300}}, {Channel: "pitot", Raw: []float64{-0.01}}}})
	rnd := make([]float64, 20)
	for i := range rnd {
		rnd[i] = math.Float64frombits(rng.Uint64())
	}
	foil = append(foil, &acquire.Block{Source: "aux", Seq: 0, T0Us: 0, DtUs: 5000, Received: recv0,
		Series: []acquire.Series{{Channel: "t_water", Raw: rnd}}})

	for seq := range uint64(10) {
		n := 10
		b := &acquire.Block{Source: "scanner", Seq: seq, T0Us: 1_000_000 + int64(seq)*100_000, DtUs: 10_000,
			Received: recv0.Add(time.Hour + time.Duration(seq)*100*time.Millisecond)}
		for tap := range 8 {
			raw := make([]float64, n)
			for i := range raw {
				switch tap {
				case 7:
					raw[i] = 0.5 // stuck tap
				default:
					raw[i] = parse(fmt.Sprintf("%.2f", -120+float64(tap)*31.7+rng.NormFloat64()*15))
				}
			}
			if seq == 3 && tap == 2 {
				raw[0] = math.Float64frombits(0x7ff8_0000_dead_beef)
				raw[1] = math.Copysign(0, -1)
				raw[2] = math.NaN()
			}
			b.Series = append(b.Series, acquire.Series{Channel: fmt.Sprintf("tap_%02d", tap+1), Raw: raw})
		}
		roof = append(roof, b)
	}
	return foil, roof
}

// Generate the v1 migration fixture with the real writer (see genStoreV1).
func TestGenerateStoreV1(t *testing.T) {
	if !*genStoreV1 {
		t.Skip("fixture generator: run with -gen-store-v1")
	}
	writeFixtureStore(t, storeV1Path, storeV1Values)
}

// Generate the version 2 fixture (see genStoreV2); its blocks must be those
// the v1 fixture's values file lists.
func TestGenerateStoreV2(t *testing.T) {
	if !*genStoreV2 {
		t.Skip("fixture generator: run with -gen-store-v2")
	}
	generateLikeV1(t, storeV2Path)
}

// Generate the group-record fixture (see genStoreV3).
func TestGenerateStoreV3(t *testing.T) {
	if !*genStoreV3 {
		t.Skip("fixture generator: run with -gen-store-v3")
	}
	generateLikeV1(t, storeV3Path)
}

// generateLikeV1 writes the fixture blocks into dbPath and checks that they
// are the blocks the v1 fixture's values file lists.
func generateLikeV1(t *testing.T, dbPath string) {
	values := filepath.Join(t.TempDir(), "values.json")
	writeFixtureStore(t, dbPath, values)
	got, err := os.ReadFile(values)
	if err != nil {
		t.Fatal(err)
	}
	want, err := os.ReadFile(storeV1Values)
	if err != nil {
		t.Fatal(err)
	}
	if string(got) != string(want) {
		t.Fatalf("the fixture blocks are no longer those of %s", storeV1Values)
	}
}

// writeFixtureStore writes the fixture blocks (v1FixtureBlocks) through the
// writer into a compact file at dbPath, and what it wrote to valuesPath.
func writeFixtureStore(t *testing.T, dbPath, valuesPath string) {
	path := filepath.Join(t.TempDir(), "store.db")
	s, err := storage.Open(path, storage.Options{Now: newTestClock().Now})
	if err != nil {
		t.Fatal(err)
	}
	foil, roof := v1FixtureBlocks()
	var fx v1Fixture
	for _, run := range []struct {
		run    storage.Run
		blocks []*acquire.Block
	}{
		{storage.Run{Rig: "tow-fin-a", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.12, AreaKind: "planform"}, foil},
		{storage.Run{Rig: "yard-roof", Kind: "roof", Fluid: "air", AreaM2: 1, AreaKind: "tributary"}, roof},
	} {
		id, err := s.CreateRun(run.run)
		if err != nil {
			t.Fatal(err)
		}
		w := s.NewWriter(id, storage.WriterConfig{MaxBlocks: 4})
		q := w.NewQueue()
		fr := v1FixtureRun{ID: id, Kind: run.run.Kind}
		for _, b := range run.blocks {
			fb := v1FixtureBlock{Source: b.Source, Seq: b.Seq, T0Us: b.T0Us, DtUs: b.DtUs, Received: b.Received}
			for _, sr := range b.Series {
				fb.Channels = append(fb.Channels, sr.Channel)
				bits := make([]string, len(sr.Raw))
				for i, v := range sr.Raw {
					bits[i] = fmt.Sprintf("%016x", math.Float64bits(v))
				}
				fb.Bits = append(fb.Bits, bits)
			}
			fr.Blocks = append(fr.Blocks, fb)
			q <- storage.Item{Block: b}
		}
		close(q)
		if err := w.Run(context.Background(), q); err != nil {
			t.Fatal(err)
		}
		if err := s.FinishRun(id, time.Date(2026, 3, 14, 12, 0, 0, 0, time.UTC), storage.StatusComplete, nil); err != nil {
			t.Fatal(err)
		}
		fx.Runs = append(fx.Runs, fr)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	// Copy into a compact file (the store reserves address space and
	// grows its file in large steps; the fixture should be small).
	os.Remove(dbPath)
	src, err := bolt.Open(path, 0o600, &bolt.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	dst, err := bolt.Open(dbPath, 0o644, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := bolt.Compact(dst, src, 0); err != nil {
		t.Fatal(err)
	}
	src.Close()
	if err := dst.Close(); err != nil {
		t.Fatal(err)
	}
	data, err := json.MarshalIndent(fx, "", " ")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(valuesPath, append(data, '\n'), 0o644); err != nil {
		t.Fatal(err)
	}
}
