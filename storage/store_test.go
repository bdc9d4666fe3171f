package storage_test

import (
	"bufio"
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
	"liftyard/storage"
)

// Ensure that a new store can be closed, reopened and still holds its runs.
func TestOpen_CreateAndReopen(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	s, err := storage.Open(path, storage.Options{Now: newTestClock().Now})
	if err != nil {
		t.Fatal(err)
	}
	id, err := s.CreateRun(storage.Run{Rig: "r", AreaM2: 1})
	if err != nil {
		t.Fatal(err)
	}
	if err := s.FinishRun(id, time.Now(), storage.StatusComplete, nil); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	s = MustOpenStoreAt(t, path, storage.Options{ReadOnly: true})
	r, err := s.Run(id)
	if err != nil {
		t.Fatal(err)
	}
	if r.Rig != "r" || r.Status != storage.StatusComplete {
		t.Errorf("reopened run = %+v", r)
	}
	if err := s.Check(); err != nil {
		t.Errorf("check: %v", err)
	}
}

// Ensure that Close may be called twice.
func TestClose_Twice(t *testing.T) {
	s, err := storage.Open(filepath.Join(t.TempDir(), "s.db"), storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
}

// diskBytes returns the bytes a file really occupies on disk (bbolt grows
// the file with ftruncate, which leaves it sparse).
func diskBytes(tb testing.TB, path string) int64 {
	tb.Helper()
	fi, err := os.Stat(path)
	if err != nil {
		tb.Fatal(err)
	}
	return fi.Sys().(*syscall.Stat_t).Blocks * 512
}

// Ensure that the 1 GiB initial map reserves address space only. On this
// machine (Linux, ext4) bbolt then extends the file by its 16 MiB AllocSize
// at the first growth, but sparsely: the disk holds only the written pages.
func TestOpen_InitialMmapKeepsFileSmall(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	s := MustOpenStoreAt(t, path, storage.Options{})
	mustCreateRun(t, s)
	if n := diskBytes(t, path); n > 1<<20 {
		t.Errorf("new store occupies %d bytes on disk; the 1 GiB map should not fill it", n)
	}
}

// Ensure that files that are not liftyard stores give clean errors, not
// panics.
func TestOpen_BadFiles(t *testing.T) {
	// A real store with some data, to truncate.
	good := filepath.Join(t.TempDir(), "good.db")
	{
		s := MustOpenStoreAt(t, good, storage.Options{})
		id := mustCreateRun(t, s)
		w := s.NewWriter(id, storage.WriterConfig{})
		in := make(chan storage.Item, 400)
		for i := range 400 {
			in <- storage.Item{Block: testBlock("bal", uint64(i), 100, "n_fore", "n_aft", "axial")}
		}
		close(in)
		if err := w.Run(context.Background(), in); err != nil {
			t.Fatal(err)
		}
		if err := s.Close(); err != nil {
			t.Fatal(err)
		}
	}
	goodBytes, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	if len(goodBytes) < 64<<10 {
		t.Fatalf("test store only %d bytes", len(goodBytes))
	}
	rng := rand.New(rand.NewPCG(1, 2))
	garbage := make([]byte, 64<<10)
	for i := range garbage {
		garbage[i] = byte(rng.Uint32())
	}
	foreign := filepath.Join(t.TempDir(), "foreign.db")
	{
		db, err := bolt.Open(foreign, 0o600, nil)
		if err != nil {
			t.Fatal(err)
		}
		if err := db.Update(func(tx *bolt.Tx) error {
			_, err := tx.CreateBucket([]byte("widgets"))
			return err
		}); err != nil {
			t.Fatal(err)
		}
		db.Close()
	}
	foreignBytes, _ := os.ReadFile(foreign)

	for _, tc := range []struct {
		name string
		data []byte
		want error
	}{
		{"garbage", garbage, storage.ErrCorrupt},
		{"text file", []byte("name = \"tow-fin-a\"\nkind = \"foil\"\n"), storage.ErrCorrupt},
		{"truncated to 100 bytes", goodBytes[:100], storage.ErrCorrupt},
		{"zeros", make([]byte, 16<<10), storage.ErrCorrupt},
		{"foreign bbolt file", foreignBytes, storage.ErrNotStore},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "bad.db")
			if err := os.WriteFile(path, tc.data, 0o600); err != nil {
				t.Fatal(err)
			}
			for _, ro := range []bool{false, true} {
				s, err := storage.Open(path, storage.Options{ReadOnly: ro})
				if err == nil {
					s.Close()
					t.Fatalf("ReadOnly=%v: Open succeeded", ro)
				}
				if !errors.Is(err, tc.want) {
					t.Errorf("ReadOnly=%v: err = %v, want %v", ro, err, tc.want)
				}
				if !strings.Contains(err.Error(), path) {
					t.Errorf("error %q does not name the file", err)
				}
			}
		})
	}
}

// Ensure that a store cut short anywhere before the end of its pages —
// inside its first meta page, between the two, just past them, one page
// short — is refused by Open, read-only or not, as truncated (ErrCorrupt,
// the file named, the sizes given) before bbolt maps it: bbolt itself faults
// on such a file (a nil dereference opening it for writing).
func TestOpen_TruncatedBeforeItsPages(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	s := MustOpenStoreAt(t, path, storage.Options{})
	mustCreateRun(t, s)
	s.Close()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	const page = 32 << 10 // a new store's pages
	used := int(diskBytes(t, path))
	for _, n := range []int{100, page / 2, page + 100, 2 * page, 2*page + 100, used - page} {
		cut := filepath.Join(t.TempDir(), "cut.db")
		if err := os.WriteFile(cut, data[:n], 0o600); err != nil {
			t.Fatal(err)
		}
		for _, ro := range []bool{false, true} {
			s, err := storage.Open(cut, storage.Options{ReadOnly: ro})
			if err == nil {
				s.Close()
				t.Fatalf("cut to %d bytes, ReadOnly=%v: Open succeeded", n, ro)
			}
			if !errors.Is(err, storage.ErrCorrupt) || !strings.Contains(err.Error(), "truncated") ||
				!strings.Contains(err.Error(), cut) || !strings.Contains(err.Error(), strconv.Itoa(n)+" bytes") {
				t.Errorf("cut to %d bytes, ReadOnly=%v: %v", n, ro, err)
			}
		}
	}
}

// Ensure that a store truncated in the middle (a copy cut short) gives an
// error and no crash, whether Open notices or a later read or Check does.
func TestOpen_TruncatedHalf(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	s := MustOpenStoreAt(t, path, storage.Options{})
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{MaxBlocks: 20})
	in := make(chan storage.Item, 400)
	for i := range 400 {
		in <- storage.Item{Block: testBlock("bal", uint64(i), 100, "n_fore", "n_aft", "axial")}
	}
	close(in)
	if err := w.Run(context.Background(), in); err != nil {
		t.Fatal(err)
	}
	s.Close()
	data, _ := os.ReadFile(path)
	used := diskBytes(t, path) // the written pages come first; the rest is a sparse tail
	cut := filepath.Join(t.TempDir(), "cut.db")
	if err := os.WriteFile(cut, data[:used/2], 0o600); err != nil {
		t.Fatal(err)
	}
	s2, err := storage.Open(cut, storage.Options{ReadOnly: true})
	if err != nil {
		if !errors.Is(err, storage.ErrCorrupt) {
			t.Fatalf("Open: %v, want ErrCorrupt", err)
		}
		t.Logf("Open: %v", err)
		return
	}
	defer s2.Close()
	n := 0
	err = s2.RawBlocks(id, func(acquire.Block) error { n++; return nil })
	cerr := s2.Check()
	t.Logf("RawBlocks: %v; Check: %v", err, cerr)
	if err == nil && cerr == nil {
		t.Fatalf("half a store read %d blocks with no error from RawBlocks or Check", n)
	}
}

// Ensure that a second Open of a file held in this same process fails with
// ErrLocked after the timeout (bbolt's flock is per open file, so it
// conflicts within one process too).
func TestOpen_ErrLocked_SameProcess(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	MustOpenStoreAt(t, path, storage.Options{})
	for _, ro := range []bool{false, true} {
		s, err := storage.Open(path, storage.Options{Timeout: 100 * time.Millisecond, ReadOnly: ro})
		if err == nil {
			s.Close()
			t.Fatalf("ReadOnly=%v: second Open succeeded", ro)
		}
		if !errors.Is(err, storage.ErrLocked) {
			t.Fatalf("ReadOnly=%v: err = %v, want ErrLocked", ro, err)
		}
		want := "database " + path + " is in use by another running liftyard (record, demo, serve, import, reprocess or marks --apply); stop it or use its dashboard"
		if !strings.Contains(err.Error(), want) {
			t.Errorf("message %q lacks %q", err, want)
		}
	}
}

// lockChildEnv names the store a child process holds open.
const lockChildEnv = "LIFTYARD_STORAGE_LOCK_CHILD"

// TestLockChild is not a test of its own: run by TestOpen_ErrLocked_
// ChildProcess in a child process, it holds the store open until its
// stdin closes.
func TestLockChild(t *testing.T) {
	path := os.Getenv(lockChildEnv)
	if path == "" {
		return // only meaningful as a child
	}
	s, err := storage.Open(path, storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	os.Stdout.WriteString("locked\n")
	bufio.NewReader(os.Stdin).ReadString('\n')
}

// Ensure that Open fails with ErrLocked while another process holds the
// file, and succeeds once it has let go.
func TestOpen_ErrLocked_ChildProcess(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	cmd := exec.Command(os.Args[0], "-test.run=^TestLockChild$")
	cmd.Env = append(os.Environ(), lockChildEnv+"="+path)
	stdin, err := cmd.StdinPipe()
	if err != nil {
		t.Fatal(err)
	}
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
	line, err := bufio.NewReader(stdout).ReadString('\n')
	if err != nil || line != "locked\n" {
		t.Fatalf("child said %q, %v", line, err)
	}
	s, err := storage.Open(path, storage.Options{Timeout: 200 * time.Millisecond})
	if err == nil {
		s.Close()
		t.Fatal("Open succeeded while the child holds the lock")
	}
	if !errors.Is(err, storage.ErrLocked) {
		t.Fatalf("err = %v, want ErrLocked", err)
	}
	stdin.Close()
	if err := cmd.Wait(); err != nil {
		t.Fatalf("child: %v", err)
	}
	MustOpenStoreAt(t, path, storage.Options{Timeout: 2 * time.Second})
}

// Ensure that a read-only open of a missing file says so and creates
// nothing.
func TestOpen_ReadOnlyMissing(t *testing.T) {
	path := filepath.Join(t.TempDir(), "none.db")
	_, err := storage.Open(path, storage.Options{ReadOnly: true})
	if !errors.Is(err, storage.ErrNotFound) {
		t.Fatalf("err = %v, want ErrNotFound", err)
	}
	if _, err := os.Stat(path); err == nil {
		t.Error("read-only Open created the file")
	}
}

// Ensure that MaxSizeBytes stops a commit with ErrFull instead of growing
// the file.
func TestWriter_ErrFull(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	s := MustOpenStoreAt(t, path, storage.Options{MaxSizeBytes: 256 << 10})
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{MaxBlocks: 10})
	in := make(chan storage.Item, 200)
	rng := rand.New(rand.NewPCG(5, 6))
	for i := range 200 { // 200 × 8 ch × 100 samples × 8 B ≈ 1.3 MB (random bits do not compress)
		b := testBlock("bal", uint64(i), 100, "a", "b", "c", "d", "e", "f", "g", "h")
		for _, sr := range b.Series {
			for j := range sr.Raw {
				sr.Raw[j] = math.Float64frombits(rng.Uint64())
			}
		}
		in <- storage.Item{Block: b}
	}
	close(in)
	err := w.Run(context.Background(), in)
	if !errors.Is(err, storage.ErrFull) {
		t.Fatalf("err = %v, want ErrFull", err)
	}
	blocks, _ := w.Committed()
	if st := w.State(); blocks+st.LostBlocks != 200 || st.FailedCommits == 0 {
		t.Errorf("committed %d + lost %d blocks, want 200 (every block stored or counted); state %+v", blocks, st.LostBlocks, st)
	}
	r, err := s.Run(id)
	if err != nil {
		t.Fatal(err)
	}
	if r.Samples != blocks*100 {
		t.Errorf("run says %d samples, writer committed %d blocks of 100", r.Samples, blocks)
	}
	if n := diskBytes(t, path); n > 256<<10 {
		t.Errorf("file occupies %d bytes on disk, past the 256 KiB limit", n)
	}
}

// Ensure that a file cut short under an open store (another program
// truncating it) gives ErrCorrupt on the next read instead of killing the
// process with SIGBUS.
func TestRead_FileTruncatedWhileOpen(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	s := MustOpenStoreAt(t, path, storage.Options{})
	id := mustCreateRun(t, s)
	w := s.NewWriter(id, storage.WriterConfig{MaxBlocks: 20})
	in := make(chan storage.Item, 400)
	for i := range 400 {
		in <- storage.Item{Block: testBlock("bal", uint64(i), 100, "n_fore", "n_aft", "axial")}
	}
	close(in)
	if err := w.Run(context.Background(), in); err != nil {
		t.Fatal(err)
	}
	if err := os.Truncate(path, 64<<10); err != nil { // past both meta pages (32 KiB pages), short of the data
		t.Fatal(err)
	}
	err := s.RawBlocks(id, func(acquire.Block) error { return nil })
	if !errors.Is(err, storage.ErrCorrupt) {
		t.Fatalf("RawBlocks after truncation: %v, want ErrCorrupt", err)
	}
	t.Logf("RawBlocks: %v", err)
}
