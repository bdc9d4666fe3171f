package process_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/sim"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// openCopy opens a copy of a checked-in store.
func openCopy(t *testing.T, fixture string) *storage.Store {
	t.Helper()
	data, err := os.ReadFile(fixture)
	require.NoError(t, err)
	path := filepath.Join(t.TempDir(), filepath.Base(fixture))
	require.NoError(t, os.WriteFile(path, data, 0o600))
	s, err := storage.Open(path, storage.Options{})
	require.NoError(t, err)
	t.Cleanup(func() { s.Close() })
	return s
}

// agree checks that the coarse timeline's q and C_L follow the fine one:
// at each coarse point, the mean of the fine points inside its bin.
func agree(t *testing.T, fine, coarse process.Timeline) {
	t.Helper()
	require.NotEmpty(t, coarse.T)
	compared := 0
	for i, tc := range coarse.T {
		var q, cl float64
		var nq, ncl int
		for j, tf := range fine.T {
			if tf.Sub(tc).Abs() <= coarse.Bin/2 {
				if !math.IsNaN(fine.QPa[j]) {
					q += fine.QPa[j]
					nq++
				}
				if !math.IsNaN(fine.CL[j]) {
					cl += fine.CL[j]
					ncl++
				}
			}
		}
		if nq < 3 || i == 0 || i == len(coarse.T)-1 {
			continue
		}
		q /= float64(nq)
		assert.InDelta(t, q, coarse.QPa[i], 0.06*math.Abs(q)+2, "q at point %d (%s)", i, tc)
		if ncl >= 3 && !math.IsNaN(coarse.CL[i]) {
			cl /= float64(ncl)
			// C_L moves within a point while α sweeps; the raw 2 s windows
			// and the rollup bins see different parts of the move, so the
			// band is wider than q's.
			assert.InDelta(t, cl, coarse.CL[i], 0.2*math.Abs(cl)+0.05, "C_L at point %d", i)
		}
		compared++
	}
	assert.Greater(t, compared, len(coarse.T)/2, "most coarse points compared")
}

// Ensure that a store written before rollups existed (checked in:
// testdata/store-v1-foil.db, v1 blocks, no rollup bucket) still gives a
// timeline, both from its raw blocks (fine points) and from rollups
// computed from them (points of a second or more), and that the two agree.
func TestRunTimeline_OldStoreWithoutRollups(t *testing.T) {
	store := openCopy(t, storeV1Foil)
	runs, err := store.Runs()
	require.NoError(t, err)
	require.Len(t, runs, 1)
	_, stored, err := store.RunRollups(runs[0].ID, 0)
	require.NoError(t, err)
	require.False(t, stored, "the old store has no rollups")

	fine, err := process.RunTimeline(t.Context(), store, runs[0], 200)
	require.NoError(t, err)
	assert.Less(t, fine.Bin, time.Second, "fine points replay the raw blocks")
	coarse, err := process.RunTimeline(t.Context(), store, runs[0], 8)
	require.NoError(t, err)
	assert.GreaterOrEqual(t, coarse.Bin, time.Second)
	assert.LessOrEqual(t, len(coarse.T), 8)
	assert.GreaterOrEqual(t, len(coarse.T), 6)
	assert.True(t, coarse.Start.Equal(fine.Start))
	agree(t, fine, coarse)
}

// Ensure that a run recorded now stores rollups and that its coarse
// timeline, read from them, agrees with the one from the raw blocks.
func TestRunTimeline_FromStoredRollups(t *testing.T) {
	r, text := loadRig(t, foilRig)
	store := openStore(t)
	id, _ := recordFile(t, store, r, text)
	run, err := store.Run(id)
	require.NoError(t, err)
	_, stored, err := store.RunRollups(id, 0)
	require.NoError(t, err)
	require.True(t, stored, "a run recorded now has stored rollups")
	fine, err := process.RunTimeline(t.Context(), store, run, 200)
	require.NoError(t, err)
	coarse, err := process.RunTimeline(t.Context(), store, run, 10)
	require.NoError(t, err)
	assert.Equal(t, time.Second, coarse.Bin.Truncate(time.Second)) // 14.5 s over 10 points: the 1 s rollup
	agree(t, fine, coarse)
}

// benchRun records an hour of a foil rig at 1 kHz with 16 channels (the
// rig's 6 and 10 spare strain gauges) through the writer, in 100 ms blocks.
func benchRun(b *testing.B) (*storage.Store, storage.Run) {
	r, text := loadRig(&testing.T{}, foilRig)
	_ = r
	store, err := storage.Open(filepath.Join(b.TempDir(), "hour.db"), storage.Options{})
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { store.Close() })
	id, err := store.CreateRun(storage.Run{Rig: "foil-towtank", Kind: "foil", Fluid: "fresh_water", RigTOML: text, AreaM2: 0.09})
	if err != nil {
		b.Fatal(err)
	}
	w := store.NewWriter(id, storage.WriterConfig{})
	q := w.NewQueue()
	done := make(chan error)
	go func() { done <- w.Run(context.Background(), q) }()
	rng := rand.New(rand.NewPCG(1, 1))
	start := time.Date(2026, 12, 2, 9, 0, 0, 0, time.UTC)
	names := []string{"n_fore", "n_aft", "a_main", "pitot", "alpha", "t_water"}
	for i := range 10 {
		names = append(names, fmt.Sprintf("strain_%02d", i+1))
	}
	const n = 100
	for k := range 36_000 {
		t0 := start.UnixMicro() + int64(k)*n*1000
		blk := &acquire.Block{Source: "carriage", Seq: uint64(k), T0Us: t0, DtUs: 1000,
			Received: time.UnixMicro(t0 + (n-1)*1000 + 3000).UTC()}
		hold := float64((k / 600) % 12) // a new angle every minute
		for c, name := range names {
			raw := make([]float64, n)
			for i := range raw {
				var v float64
				switch name {
				case "n_fore", "n_aft":
					v = 5000 + 9000*hold + 200*rng.NormFloat64()
				case "a_main":
					v = 4100 + 300*hold + 50*rng.NormFloat64()
				case "pitot":
					v = 825_000 + 2000*rng.NormFloat64()
				case "alpha":
					v = 2048 + 11*hold
				case "t_water":
					v = 1500
				default:
					v = float64(c)*1000 + 30*rng.NormFloat64()
				}
				raw[i] = math.Round(v)
			}
			blk.Series = append(blk.Series, acquire.Series{Channel: name, Raw: raw})
		}
		q <- storage.Item{Block: blk}
	}
	close(q)
	if err := <-done; err != nil {
		b.Fatal(err)
	}
	run, err := store.Run(id)
	if err != nil {
		b.Fatal(err)
	}
	return store, run
}

// BenchmarkRunTimeline_Hour: the timeline of a 1-hour, 16-channel, 1 kHz
// run (57.6 M readings) at 2,000 points, from its stored rollups.
//
//	go test -run '^$' -bench RunTimeline_Hour -benchtime 20x ./process/
func BenchmarkRunTimeline_Hour(b *testing.B) {
	store, run := benchRun(b)
	for b.Loop() {
		tl, err := process.RunTimeline(context.Background(), store, run, 2000)
		if err != nil {
			b.Fatal(err)
		}
		if len(tl.T) < 1000 {
			b.Fatalf("%d points", len(tl.T))
		}
	}
}

// Ensure that a roof run's timeline (q only) from its stored rollups
// agrees with the one from its raw blocks.
func TestRunTimeline_RoofFromRollups(t *testing.T) {
	r, text := loadRig(t, roofRig)
	store := openStore(t)
	id, err := store.CreateRun(storage.Run{Rig: r.Name, Kind: "roof", Fluid: "air", RigTOML: text, AreaM2: 1})
	require.NoError(t, err)
	start := time.Date(2026, 12, 2, 10, 0, 0, 0, time.UTC)
	sim, err := simRoof(r, start)
	require.NoError(t, err)
	w := store.NewWriter(id, storage.WriterConfig{})
	q := w.NewQueue()
	done := make(chan error)
	go func() { done <- w.Run(context.Background(), q) }()
	for {
		b := sim.Next()
		if b.T0Us > start.Add(40*time.Second).UnixMicro() {
			break
		}
		b.Received = time.UnixMicro(b.T0Us + int64(b.Len())*b.DtUs + 2000).UTC()
		q <- storage.Item{Block: &b}
	}
	close(q)
	require.NoError(t, <-done)
	run, err := store.Run(id)
	require.NoError(t, err)
	fine, err := process.RunTimeline(t.Context(), store, run, 200)
	require.NoError(t, err)
	coarse, err := process.RunTimeline(t.Context(), store, run, 13)
	require.NoError(t, err)
	assert.GreaterOrEqual(t, coarse.Bin, time.Second)
	assert.GreaterOrEqual(t, len(coarse.T), 10)
	agree(t, fine, coarse)
}

func simRoof(r *rig.Rig, start time.Time) (*sim.Roof, error) {
	return sim.NewRoof(r, sim.RoofConfig{QPa: 250, Seed: 4, Start: start})
}
