package storage

import (
	"encoding/binary"
	"errors"
	"fmt"
	"hash/fnv"
	"io/fs"
	"os"
	"runtime/debug"
	"sync"
	"time"

	bolt "go.etcd.io/bbolt"
	berrors "go.etcd.io/bbolt/errors"
)

// DefaultTimeout is how long Open waits for the file lock before it gives up
// with ErrLocked. Half a second is long enough to ride out another command
// that is just closing the file, and short enough that a user who typed
// "liftyard runs" next to a running recorder gets an answer at once.
const DefaultTimeout = 500 * time.Millisecond

// initialMmapBytes is the address space reserved at open (1 GiB). On Linux it
// is address space only; the file still grows with the data. With it, a
// commit rarely has to re-map the file, so readers rarely stall the writer.
const initialMmapBytes = 1 << 30

// pageBytes is the bbolt page size of a store created now (a file keeps the
// page size it was created with; older stores have the system's 4 KiB).
// A compact raw block (docs/storage.md) is 1–4 KiB; in 4 KiB pages bbolt
// fits one or two of them per page and leaves the rest empty, while 32 KiB
// pages hold a dozen and waste at most about one block per page
// (docs/performance.md, "bytes on disk per reading").
const pageBytes = 32 << 10

// formatVersion is written to meta/format when a store is created.
const formatVersion = "1"

// Top-level bucket names. All of them are created in the first transaction
// after the file is created.
var (
	bucketMeta    = []byte("meta")
	bucketRuns    = []byte("runs")
	bucketRaw     = []byte("raw")
	bucketResults = []byte("results")
	bucketEvents  = []byte("events")
	bucketCal     = []byte("cal")

	topBuckets = [][]byte{bucketMeta, bucketRuns, bucketRaw, bucketResults, bucketEvents, bucketCal}

	keyFormat  = []byte("format")
	keyCreated = []byte("created")
)

// appendFill is the FillPercent set on every append-only bucket in every
// write transaction (bbolt does not persist it). Keys in those buckets only
// ever grow, so nearly full pages waste nothing; bbolt's default 0.5 doubles
// the leaf pages.
const appendFill = 1.0

// Options configure Open. A zero Options opens read-write with the default
// timeout and the system clock.
type Options struct {
	// Timeout is how long Open waits for the file lock held by another
	// process before it returns ErrLocked. Zero means DefaultTimeout (500 ms).
	// A negative Timeout waits forever, which hangs a command started next
	// to a running recorder: do not use it in the CLI.
	Timeout time.Duration

	// ReadOnly opens the file with a shared lock and refuses writes. It
	// still conflicts with a read-write holder (bbolt's flock), and it does
	// not mark interrupted runs.
	ReadOnly bool

	// Now is the clock for run start times and store events. Nil means
	// time.Now.
	Now func() time.Time

	// MaxSizeBytes, when above zero, is the largest the file may grow;
	// a commit that would pass it fails with ErrFull instead of filling the
	// disk of a field computer. Zero means no limit.
	MaxSizeBytes int64
}

// Store is a liftyard store: one bbolt file holding runs, raw blocks,
// results and events. Its methods may be called from several goroutines.
// Writes are serialised by bbolt; for recording, use one Writer per run
// (see NewWriter) rather than many small writes.
type Store struct {
	db        *bolt.DB
	path      string
	now       func() time.Time
	readOnly  bool
	closeOnce sync.Once
	closeErr  error
}

// Open opens the store at path, creating it (and its buckets) when it does
// not exist. When the file is held by another process, Open returns an error
// wrapping ErrLocked after opts.Timeout. A file that is not a liftyard store
// gives ErrCorrupt or ErrNotStore, never a panic.
//
// Opened read-write, an existing file is checked first (Survey, then
// bbolt's Check): a damaged one gives an error wrapping ErrDamaged, which
// names `liftyard repair`. Read-only opens check nothing.
//
// Opened read-write, Open marks every run still in StatusRecording as
// StatusInterrupted: such a run was being recorded when a process died.
func Open(path string, opts Options) (*Store, error) {
	timeout := opts.Timeout
	switch {
	case timeout == 0:
		timeout = DefaultTimeout
	case timeout < 0:
		timeout = 0 // bbolt: wait forever
	}
	now := opts.Now
	if now == nil {
		now = time.Now
	}

	fresh := false
	info, err := os.Stat(path)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		if opts.ReadOnly {
			return nil, fmt.Errorf("open store %q: %w (no such file)", path, ErrNotFound)
		}
		fresh = true
	case err != nil:
		return nil, fmt.Errorf("open store %q: %w", path, err)
	case info.IsDir():
		return nil, fmt.Errorf("open store %q: is a directory: %w", path, ErrNotStore)
	case info.Size() == 0:
		// An empty file: created by a process that died before the first
		// commit. Treat it as new.
		fresh = !opts.ReadOnly
	}

	bopts := &bolt.Options{
		Timeout:         timeout,
		ReadOnly:        opts.ReadOnly,
		InitialMmapSize: initialMmapBytes,
	}
	if fresh {
		bopts.PageSize = pageBytes // an existing file keeps its own
	}
	if opts.MaxSizeBytes > 0 {
		bopts.MaxSize = int(opts.MaxSizeBytes)
	}
	if !fresh {
		// Before bbolt maps it: bbolt faults on a file cut short.
		if err := checkLength(path, info.Size()); err != nil {
			return nil, err
		}
	}
	db, err := openBolt(path, bopts)
	if err != nil {
		return nil, openError(path, err)
	}
	s := &Store{db: db, path: path, now: now, readOnly: opts.ReadOnly}

	if fresh {
		err = s.initialise()
	} else {
		err = s.checkFormat()
	}
	if err == nil && !opts.ReadOnly && !fresh {
		err = s.checkBeforeWrite() // nothing is written to a damaged file
	}
	if err == nil && !opts.ReadOnly {
		err = s.recover()
	}
	if err != nil {
		db.Close()
		return nil, err
	}
	return s, nil
}

// openBolt calls bolt.Open and turns a panic or fault inside it (bbolt
// trusts the meta page of the file it reads) into an ErrCorrupt error.
func openBolt(path string, opts *bolt.Options) (db *bolt.DB, err error) {
	defer guard(&err, "bbolt open")()
	return bolt.Open(path, 0o600, opts)
}

// checkLength reads the two meta pages of a bbolt file directly and returns
// an error wrapping ErrCorrupt when the file is shorter than the pages the
// newest valid one says it holds (a copy cut short, a disk that filled
// while it was copied). A file whose meta pages are not bbolt's is left to
// bbolt's own checks.
//
// A meta page (bbolt 1.4, little-endian): a 16-byte page header, then
// magic u32, version u32, page size u32, flags u32, root bucket (16 bytes),
// freelist page u64, page count u64 (the high-water mark), txid u64, and an
// FNV-64a checksum of the fields before it.
func checkLength(path string, size int64) error {
	f, err := os.Open(path)
	if err != nil {
		return nil // bbolt says why
	}
	defer f.Close()
	var (
		m        [80]byte
		pageSize int64
		need     int64
		bestTx   uint64
		found    bool
	)
	for i := range 2 {
		if i == 1 && pageSize == 0 {
			break
		}
		if _, err := f.ReadAt(m[:], int64(i)*pageSize); err != nil {
			break
		}
		le := binary.LittleEndian
		if le.Uint32(m[16:]) != boltMagic {
			continue
		}
		h := fnv.New64a()
		h.Write(m[16:72])
		if h.Sum64() != le.Uint64(m[72:]) {
			continue
		}
		ps := int64(le.Uint32(m[24:]))
		if i == 0 {
			pageSize = ps
		}
		if tx := le.Uint64(m[64:]); !found || tx > bestTx {
			bestTx, need, found = tx, int64(le.Uint64(m[56:]))*ps, true
		}
	}
	if found && size < need {
		return fmt.Errorf("open store %q: the file is truncated (a copy cut short?): %d bytes, its pages need %d; use the original or a backup: %w",
			path, size, need, ErrCorrupt)
	}
	return nil
}

// boltMagic is the magic number of a bbolt meta page.
const boltMagic = 0xED0CDAED

// openError explains why bolt.Open failed and wraps the matching sentinel.
func openError(path string, err error) error {
	switch {
	case errors.Is(err, berrors.ErrTimeout):
		return fmt.Errorf("database %s is in use by another running liftyard (record, demo, serve, import, reprocess or marks --apply); stop it or use its dashboard: %w", path, ErrLocked)
	case errors.Is(err, berrors.ErrInvalid), errors.Is(err, berrors.ErrChecksum),
		errors.Is(err, berrors.ErrVersionMismatch), errors.Is(err, berrors.ErrInvalidMapping):
		return fmt.Errorf("open store %q: not a readable store file (damaged, truncated or foreign): %w: %w", path, ErrCorrupt, err)
	case errors.Is(err, ErrCorrupt):
		return fmt.Errorf("open store %q: %w", path, err)
	}
	return fmt.Errorf("open store %q: %w", path, err)
}

// initialise creates every top-level bucket and the format marker in one
// transaction, right after the file was created (a power cut during a
// file's very first initialisation is bbolt's known weak spot; keeping it to
// one commit keeps the window small).
func (s *Store) initialise() error {
	err := s.db.Update(func(tx *bolt.Tx) error {
		for _, name := range topBuckets {
			if _, err := tx.CreateBucketIfNotExists(name); err != nil {
				return err
			}
		}
		meta := tx.Bucket(bucketMeta)
		if err := meta.Put(keyFormat, []byte(formatVersion)); err != nil {
			return err
		}
		return meta.Put(keyCreated, []byte(s.now().UTC().Format(time.RFC3339Nano)))
	})
	if err != nil {
		return fmt.Errorf("create store %q: %w", s.path, err)
	}
	return nil
}

// checkFormat refuses a file cut short and a bbolt file that liftyard did
// not write.
func (s *Store) checkFormat() (err error) {
	defer guard(&err, "read store "+s.path)()
	var format string
	err = s.db.View(func(tx *bolt.Tx) error {
		// The meta page says how many pages the file holds; a copy cut
		// short has fewer, and reading them would fault.
		fi, err := os.Stat(s.path)
		if err != nil {
			return err
		}
		if need := tx.Size(); fi.Size() < need {
			return fmt.Errorf("file is truncated: %d bytes, its pages need %d: %w", fi.Size(), need, ErrCorrupt)
		}
		meta := tx.Bucket(bucketMeta)
		if meta == nil {
			return nil
		}
		format = string(meta.Get(keyFormat))
		return nil
	})
	if err != nil {
		return fmt.Errorf("read store %q: %w", s.path, err)
	}
	switch format {
	case formatVersion:
		return nil
	case "":
		return fmt.Errorf("open store %q: a bbolt file without liftyard's buckets: %w", s.path, ErrNotStore)
	}
	return fmt.Errorf("open store %q: store format %q is not %q (written by a newer liftyard?): %w",
		s.path, format, formatVersion, ErrNotStore)
}

// guard protects a read of the mapped file: use it as
//
//	defer guard(&err, "what")()
//
// bbolt trusts the pages it reads. On a damaged file it panics on a bad
// page type, and on a file cut short a read past the end of the file raises
// SIGBUS, which is fatal unless the goroutine asked the runtime to turn
// faults into panics (debug.SetPanicOnFault, meant for memory-mapped
// files). guard asks for that for the duration of the call and turns any
// such panic into an error wrapping ErrCorrupt.
func guard(err *error, what string) func() {
	old := debug.SetPanicOnFault(true)
	return func() {
		debug.SetPanicOnFault(old)
		if r := recover(); r != nil {
			*err = fmt.Errorf("%s: %w: bbolt: %v", what, ErrCorrupt, r)
		}
	}
}

// Path returns the file the store was opened from.
func (s *Store) Path() string { return s.path }

// Close closes the file and releases its lock. It waits for open read
// transactions to end. Close may be called more than once; later calls
// return the first call's result.
func (s *Store) Close() error {
	s.closeOnce.Do(func() {
		if err := s.db.Close(); err != nil {
			s.closeErr = fmt.Errorf("close store %q: %w", s.path, err)
		}
	})
	return s.closeErr
}

// Check walks every page of the file (bbolt's consistency check) and returns
// the problems found, joined, or nil. It holds one read transaction for the
// whole walk: use it offline, not next to a live recorder.
func (s *Store) Check() (err error) {
	defer guard(&err, "check store "+s.path)()
	var errs []error
	err = s.db.View(func(tx *bolt.Tx) error {
		for e := range tx.Check() {
			errs = append(errs, e)
		}
		return nil
	})
	if err != nil {
		return err
	}
	if len(errs) > 0 {
		return fmt.Errorf("check store %q: %w: %w", s.path, ErrCorrupt, errors.Join(errs...))
	}
	return nil
}

// u64 returns v as 8 big-endian bytes, so byte order is numeric order.
func u64(v uint64) []byte {
	return binary.BigEndian.AppendUint64(nil, v)
}

// i64key returns v as 8 bytes whose byte order is v's numeric order (the
// sign bit flipped, big-endian).
func appendI64Key(b []byte, v int64) []byte {
	return binary.BigEndian.AppendUint64(b, uint64(v)^(1<<63))
}

// i64FromKey inverts appendI64Key.
func i64FromKey(b []byte) int64 {
	return int64(binary.BigEndian.Uint64(b) ^ (1 << 63))
}

// writeError wraps bbolt's size-limit error in ErrFull.
func writeError(what string, err error) error {
	if errors.Is(err, berrors.ErrMaxSizeReached) {
		return fmt.Errorf("%s: %w: %w", what, ErrFull, err)
	}
	return fmt.Errorf("%s: %w", what, err)
}
