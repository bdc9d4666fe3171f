package storage

import "errors"

// These errors can be returned by Open and by every Store method. Test for
// them with errors.Is; the returned errors wrap them with the path, run id or
// key that went wrong.
var (
	// ErrNotFound is returned when a run, or the store file opened read-only,
	// does not exist, and by LatestRun when the store holds no run yet.
	ErrNotFound = errors.New("not found")

	// ErrLocked is returned by Open when another process (a running
	// "liftyard record" or "liftyard demo") holds the store file and the lock
	// could not be taken within Options.Timeout.
	ErrLocked = errors.New("store is locked by another process")

	// ErrCorrupt is returned when the store file, or a record in it, cannot be
	// decoded: a file that is not a bbolt database, a damaged or truncated
	// file, or a stored block, run or segment that fails to decode. The error
	// also wraps bbolt's own error (ErrInvalid, ErrChecksum, ...) when there
	// is one.
	ErrCorrupt = errors.New("store is corrupt")

	// ErrNotStore is returned by Open when the file is a valid bbolt database
	// that liftyard did not create, or one written by a newer liftyard.
	ErrNotStore = errors.New("not a liftyard store")

	// ErrBadRef is returned by ResolveRun when a run reference is neither a
	// decimal run id nor "latest".
	ErrBadRef = errors.New("bad run reference")

	// ErrBadRecord is returned when a value handed to the store cannot be
	// stored: a block whose series differ in length, a run with a non-finite
	// area, a segment with a negative index, an unknown status.
	ErrBadRecord = errors.New("record cannot be stored")

	// ErrFull is returned when a commit would grow the file past
	// Options.MaxSizeBytes (the disk-full guard). It wraps bbolt's
	// ErrMaxSizeReached.
	ErrFull = errors.New("store reached its size limit")

	// ErrFormat is returned by ExportSegments when the format is neither
	// "json" nor "csv".
	ErrFormat = errors.New("unknown export format")
)
