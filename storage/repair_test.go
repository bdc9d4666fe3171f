package storage_test

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
	"liftyard/estimate"
	"liftyard/storage"
)

// damagedFixture writes a store with two runs through the Writer (blocks,
// segments, events), marks and calibration links, closes it, keeps a
// pristine copy, and writes random bytes over one leaf page holding
// several records. It returns the damaged path, the pristine copy, and how
// many records the damaged page held. With firstPage the page is the one
// that holds the first raw block of the first run (nothing readable before
// it in its bucket), else the leaf in the middle of the pages of raw blocks.
func damagedFixture(t *testing.T, firstPage bool) (bad, pristine string, onPage int) {
	t.Helper()
	dir := t.TempDir()
	bad = filepath.Join(dir, "field.db")
	s := MustOpenStoreAt(t, bad, storage.Options{})
	for run, nBlocks := range []int{1500, 200} {
		id := mustCreateRun(t, s)
		w := s.NewWriter(id, storage.WriterConfig{})
		in := w.NewQueue()
		errc := make(chan error, 1)
		go func() { errc <- w.Run(context.Background(), in) }()
		for i := range nBlocks {
			// Each run's blocks have keys of their own (the first-page
			// case finds its page by the first key).
			// 600 readings a block: two would not fit one group record
			// (storage.StoredPartReadings), so every block is a record.
			in <- storage.Item{Block: testBlock("bal", uint64(run*100_000+i), 300, "n", "a")}
			if i%250 == 0 {
				in <- storage.Item{Segment: &estimate.Segment{Index: i / 250, N: 100}}
				in <- storage.Item{Event: &storage.Event{Kind: "gap", Message: "test gap"}}
			}
		}
		close(in)
		if err := <-errc; err != nil {
			t.Fatal(err)
		}
		t0 := time.Date(2025, 6, 14, 9, 30, run, 0, time.UTC)
		if err := s.PutMarks(id, []estimate.Mark{{Start: t0, End: t0.Add(time.Second), Label: "hold"}}); err != nil {
			t.Fatal(err)
		}
		if err := s.SetRunCalibrations(id, []string{"n-20250614-1"}); err != nil {
			t.Fatal(err)
		}
		if err := s.FinishRun(id, t0.Add(time.Minute), storage.StatusComplete, nil); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	pristine = filepath.Join(dir, "pristine.db")
	copyFile(t, bad, pristine)

	db, err := bolt.Open(bad, 0o600, nil) // the freelist is loaded only read-write
	if err != nil {
		t.Fatal(err)
	}
	var leaves []int
	counts := map[int]int{}
	pageSize := db.Info().PageSize
	var firstKey []byte
	err = db.View(func(tx *bolt.Tx) error {
		rb := tx.Bucket([]byte("raw")).Bucket(binary.BigEndian.AppendUint64(nil, 1)).Bucket([]byte("bal"))
		k, _ := rb.Cursor().First()
		firstKey = bytes.Clone(k)
		for id := 2; ; id++ {
			p, err := tx.Page(id)
			if err != nil || p == nil {
				return nil
			}
			if p.Type == "leaf" && p.Count >= 10 {
				leaves = append(leaves, id)
				counts[id] = p.Count
			}
		}
	})
	db.Close()
	if err != nil || len(leaves) < 5 {
		t.Fatalf("%d leaf pages found: %v", len(leaves), err)
	}
	// Each leaf's first element (page header: id u64, flags u16, count u16,
	// overflow u32; then the element: flags, pos, ksize, vsize, u32 each,
	// pos counted from the element): a page of raw blocks starts with a
	// 16-byte block key and a value of a block format version (1 to 3); a
	// run, rollup or result page does not, and the rollups are not copied
	// by repair (they are made again), so damage there would be unseen.
	data, err := os.ReadFile(bad)
	if err != nil {
		t.Fatal(err)
	}
	var blockLeaves []int
	victim := -1
	for _, id := range leaves {
		p := data[id*pageSize : (id+1)*pageSize]
		const hdr = 16
		pos := int(binary.LittleEndian.Uint32(p[hdr+4:]))
		ksize := int(binary.LittleEndian.Uint32(p[hdr+8:]))
		if ksize != 16 || hdr+pos+ksize >= pageSize {
			continue
		}
		if v := p[hdr+pos+ksize]; v >= 1 && v <= 3 {
			blockLeaves = append(blockLeaves, id)
		}
		if bytes.Equal(p[hdr+pos:hdr+pos+ksize], firstKey) {
			victim = id
		}
	}
	if !firstPage {
		if len(blockLeaves) < 3 {
			t.Fatalf("%d leaf pages of raw blocks", len(blockLeaves))
		}
		victim = blockLeaves[len(blockLeaves)/2]
	}
	if victim < 0 {
		t.Fatalf("no leaf starts with the first block key %x", firstKey)
	}
	garbage := make([]byte, pageSize)
	rng := rand.New(rand.NewPCG(16, 2026))
	for i := range garbage {
		garbage[i] = byte(rng.UintN(256))
	}
	f, err := os.OpenFile(bad, os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := f.WriteAt(garbage, int64(victim)*int64(pageSize)); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	return bad, pristine, counts[victim]
}

func copyFile(t *testing.T, from, to string) {
	t.Helper()
	src, err := os.Open(from)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	dst, err := os.Create(to)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := io.Copy(dst, src); err != nil {
		t.Fatal(err)
	}
	if err := dst.Close(); err != nil {
		t.Fatal(err)
	}
}

// Ensure that a file with a page of garbage (issue 16) is refused for
// writing with a way out, still opens read-only, and that Repair copies
// every readable record into a new file — every block except exactly those
// of the damaged page, each bit for bit — and says what it lost.
func TestRepair_DamagedPage(t *testing.T) {
	for _, tc := range []struct {
		name      string
		firstPage bool
	}{
		{"a page in the middle", false},
		// Nothing readable before it: the search for the next page starts
		// from no key (it once probed with 8-byte keys, which skipped the
		// blocks whose 16-byte keys share their first 8 bytes).
		{"the first page of a bucket", true},
	} {
		t.Run(tc.name, func(t *testing.T) { testRepairDamagedPage(t, tc.firstPage) })
	}
}

func testRepairDamagedPage(t *testing.T, firstPage bool) {
	bad, pristine, onPage := damagedFixture(t, firstPage)

	_, err := storage.Open(bad, storage.Options{})
	if !errors.Is(err, storage.ErrDamaged) || !errors.Is(err, storage.ErrCorrupt) {
		t.Fatalf("read-write open of a damaged file: %v", err)
	}
	if !strings.Contains(err.Error(), "liftyard repair --db "+bad) {
		t.Errorf("the refusal names no way out: %v", err)
	}
	ro := MustOpenStoreAt(t, bad, storage.Options{ReadOnly: true})
	runs, err := ro.Runs()
	if err != nil || len(runs) != 2 {
		t.Fatalf("read-only open lists %d runs: %v", len(runs), err)
	}
	damage, err := ro.Survey()
	if err != nil || len(damage) == 0 {
		t.Fatalf("survey of the damaged file: %v, %v", damage, err)
	}
	ro.Close()

	out := filepath.Join(t.TempDir(), "saved.db")
	rep, err := storage.Repair(bad, out, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !rep.Lost() || len(rep.Runs) != 2 {
		t.Fatalf("report: %+v", rep)
	}
	orig := MustOpenStoreAt(t, pristine, storage.Options{ReadOnly: true})
	saved := MustOpenStoreAt(t, out, storage.Options{})
	if err := saved.Check(); err != nil {
		t.Fatalf("the repaired file fails bbolt's check: %v", err)
	}
	lostBlocks, lostOther := 0, 0
	for _, rr := range rep.Runs {
		want := readBlocks(t, orig, rr.ID)
		got := readBlocks(t, saved, rr.ID)
		if len(got) != rr.Blocks {
			t.Errorf("run %d: report says %d blocks, the file holds %d", rr.ID, rr.Blocks, len(got))
		}
		byKey := map[[2]int64]acquire.Block{}
		for _, b := range want {
			byKey[[2]int64{b.T0Us, int64(b.Seq)}] = b
		}
		for _, b := range got {
			if o, ok := byKey[[2]int64{b.T0Us, int64(b.Seq)}]; !ok || !sameBlock(o, b) {
				t.Fatalf("run %d: block seq %d differs from the original", rr.ID, b.Seq)
			}
		}
		lostBlocks += len(want) - len(got)
		r, err := saved.Run(rr.ID)
		if err != nil {
			t.Fatal(err)
		}
		evs, err := saved.Events(rr.ID)
		if err != nil {
			t.Fatal(err)
		}
		oevs, _ := orig.Events(rr.ID)
		segs, _ := saved.Segments(rr.ID)
		osegs, _ := orig.Segments(rr.ID)
		marks, _ := saved.Marks(rr.ID)
		lostOther += len(osegs) - len(segs)
		if len(rr.Damage) == 0 {
			if len(evs) != len(oevs) || len(segs) != len(osegs) || len(marks) != 1 {
				t.Errorf("undamaged run %d: %d/%d events, %d/%d segments, %d marks", rr.ID, len(evs), len(oevs), len(segs), len(osegs), len(marks))
			}
			continue
		}
		var samples uint64
		for _, b := range got {
			samples += uint64(b.Len())
		}
		if r.Samples != samples {
			t.Errorf("run %d: samples %d, the copied blocks hold %d", rr.ID, r.Samples, samples)
		}
		last := evs[len(evs)-1]
		if last.Kind != storage.EventRepaired || !strings.Contains(last.Message, "unreadable") {
			t.Errorf("run %d lost data without a repaired event: %+v", rr.ID, last)
		}
		t.Logf("run %d: %s", rr.ID, rr.Damage[0])
	}
	if lostBlocks+lostOther != onPage {
		t.Errorf("%d blocks and %d other records lost, the damaged page held %d records", lostBlocks, lostOther, onPage)
	}
	if lostBlocks == 0 {
		t.Errorf("the damaged page held no block (test setup)")
	}
	if _, err := storage.Repair(bad, out, nil); err == nil {
		t.Error("Repair overwrote an existing file")
	}
}

// Ensure that an intact file opens for writing after the checks, and that
// Repair of it loses nothing.
func TestRepair_IntactFile(t *testing.T) {
	_, pristine, _ := damagedFixture(t, false)
	s := MustOpenStoreAt(t, pristine, storage.Options{})
	s.Close()
	out := filepath.Join(t.TempDir(), "copy.db")
	rep, err := storage.Repair(pristine, out, nil)
	if err != nil || rep.Lost() {
		t.Fatalf("repair of an intact file: %+v, %v", rep, err)
	}
	orig := MustOpenStoreAt(t, pristine, storage.Options{ReadOnly: true})
	saved := MustOpenStoreAt(t, out, storage.Options{ReadOnly: true})
	for _, rr := range rep.Runs {
		a, b := readBlocks(t, orig, rr.ID), readBlocks(t, saved, rr.ID)
		if len(a) != len(b) || rr.Blocks != len(a) {
			t.Errorf("run %d: %d blocks copied of %d", rr.ID, len(b), len(a))
		}
		ra, _ := orig.Run(rr.ID)
		rb, _ := saved.Run(rr.ID)
		if ra.Samples != rb.Samples || ra.Status != rb.Status || ra.Segments != rb.Segments {
			t.Errorf("run %d record changed: %+v → %+v", rr.ID, ra, rb)
		}
	}
}

// Ensure that a run left "recording" by a crash reads as interrupted from a
// read-only store (issue 16: runs showed it as recording, though no writer
// can hold the file while a reader has it), without the file changing.
func TestReadOnly_CrashedRunShowsInterrupted(t *testing.T) {
	path := filepath.Join(t.TempDir(), "crash.db")
	s := MustOpenStoreAt(t, path, storage.Options{})
	id := mustCreateRun(t, s) // recording, never finished: the process "died"
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	before, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	ro := MustOpenStoreAt(t, path, storage.Options{ReadOnly: true})
	r, err := ro.Run(id)
	if err != nil || r.Status != storage.StatusInterrupted {
		t.Errorf("Run: %v, %v", r.Status, err)
	}
	runs, err := ro.Runs()
	if err != nil || len(runs) != 1 || runs[0].Status != storage.StatusInterrupted {
		t.Errorf("Runs: %+v, %v", runs, err)
	}
	if r, err := ro.LatestRun(); err != nil || r.Status != storage.StatusInterrupted {
		t.Errorf("LatestRun: %v, %v", r.Status, err)
	}
	ro.Close()
	after, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if string(before) != string(after) {
		t.Error("a read-only open changed the file")
	}
}
