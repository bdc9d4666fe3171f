// Package storage keeps liftyard's record on disk: runs, the raw blocks of
// every source, the result rows (segments), events and marks of each run,
// and the calibration records, in one bbolt file. Raw readings are kept
// raw, so any run can be processed again (for example after a corrected
// calibration).
//
// # Layout
//
// Top-level buckets, all created in the file's first transaction:
//
//	meta/format                      "1"
//	meta/marks/<run id u64 BE>       the run's hand-set segments (estimate.Mark), JSON
//	runs/<run id u64 BE>             Run as JSON (rig file included)
//	raw/<run id>/<source>/<key>      one acquire.Block per value, binary;
//	                                 key = t0_us (sign-flipped u64 BE) + seq (u64 BE)
//	results/<run id>/<index u32 BE>  estimate.Segment as JSON (NaN as null)
//	events/<run id>/<t ns><seq u32>  Event as JSON
//	cal/rec/<id>                     calibration record (calibrate.Record), JSON
//	cal/idx/<channel>/<created><seq> id: each channel's calibration history
//	cal/run/<run id u64 BE>          ids of the calibrations a run used
//
// Big-endian keys make byte order equal time order, so cursors walk in
// time. Samples are stored in blocks, never one sample per key: a block
// costs 39 bytes of header plus its channel names, then 8 bytes per reading.
//
// # Writing: one writer, batched commits
//
// bbolt allows one read-write transaction at a time, and every commit
// fsyncs twice. A recording therefore has one Writer (NewWriter), a single
// goroutine that collects blocks, segments and events from a bounded
// channel and commits them in one transaction per WriterConfig.Interval
// (200 ms) or MaxBlocks. Producers feed that channel with Offer, which never
// blocks: when the channel is full it drops the oldest item and counts it.
// db.Batch is not used (it only helps many concurrent writers).
//
// # Durability
//
// A commit returns after its pages and its meta page are on stable storage.
// A crash (kill -9, power cut) loses at most the batch not yet committed;
// the file opens at the last commit, whole batches only. Runs found still
// "recording" when the file is opened read-write are marked "interrupted",
// with an event saying so.
//
// # Reading
//
// Readers use short read transactions: RawBlocks, ReplayBlocks and
// ExportRaw read a few dozen blocks per transaction and call back, or
// write, outside it. A long read transaction would stall the writer
// whenever the file is re-mapped and keep freed pages from reuse.
// ReplayBlocks merges the sources of a run by receive time, so a run can be
// processed again as it was recorded; CorrectRun replaces its segments.
//
// # Caveats
//
//   - One process at a time. bbolt takes an exclusive file lock (a
//     read-only open takes a shared one, which still conflicts with a
//     writer). Open gives up after Options.Timeout (500 ms) with ErrLocked:
//     while "liftyard record" or "demo" runs, use its dashboard.
//   - The file never shrinks. Freed pages are reused, but deleting data
//     returns no disk space; compact offline to shrink it.
//   - Open reserves 1 GiB of address space (not disk). On Linux bbolt then
//     extends the file in 16 MiB steps with ftruncate, so its apparent size
//     starts at about 16 MiB while the disk holds only written pages;
//     Options.MaxSizeBytes is checked against the pages, and the apparent
//     size may pass it by up to those 16 MiB.
//   - A power cut during the very first transaction of a new file can
//     leave it unreadable; the first transaction is kept to the bucket
//     creation so that window is short. A new, empty store that fails to
//     open may simply be deleted and created again.
//   - ext4 "fast commit" on Linux 5.10 before 5.10.94 and 5.15 before
//     5.15.27 can corrupt bbolt files after a power cut
//     (etcd-io/bbolt#562); field computers on those kernels should run
//     without fast_commit or on a fixed kernel.
//   - A file damaged or cut short gives ErrCorrupt, never a crash: reads run
//     with debug.SetPanicOnFault so that a fault in the mapped file becomes
//     an error.
//   - Nothing is written to a damaged file: a read-write Open of an
//     existing file first walks every page (Survey) and runs bbolt's Check,
//     and refuses with ErrDamaged. Repair copies every readable record of
//     such a file into a new one, stepping over unreadable pages.
package storage
