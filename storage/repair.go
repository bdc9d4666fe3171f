package storage

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"strings"
	"time"

	bolt "go.etcd.io/bbolt"
)

// ErrDamaged is returned by Open, opened for writing, when the structural
// check finds pages it cannot read: nothing more is written to such a file.
// Read it with a read-only Open, or copy what is readable into a new file
// with Repair. Errors wrapping ErrDamaged wrap ErrCorrupt too.
var ErrDamaged = errors.New("store has damaged pages")

// EventRepaired is stored with a run that Repair copied with losses.
const EventRepaired = "repaired"

// checkBeforeWrite is the check Open makes before it lets anyone write to
// an existing file: Survey (every branch and leaf page readable, keys in
// order), then bbolt's own Check (the free-page list, pages reachable twice
// or never: a page both free and in use would be overwritten by the next
// commit). Each reads every page once: about 12 ms and 9–13 ms for a 135 MB
// file in the page cache (BenchmarkOpenSurvey, docs/performance.md); a cold
// file costs one read of it from disk.
func (s *Store) checkBeforeWrite() error {
	damage, err := s.Survey()
	if err == nil && len(damage) == 0 {
		// bbolt's walk runs in a goroutine of its own, where a fault is
		// fatal: only after Survey found every page readable.
		err = s.Check()
	}
	switch {
	case len(damage) > 0:
		return fmt.Errorf("store %s: %w (%w): %d unreadable place(s), first %s; liftyard writes nothing to it. "+
			"Read it with runs, report or export, or copy every readable run to a new file: liftyard repair --db %s --out NEW.db",
			s.path, ErrDamaged, ErrCorrupt, len(damage), damage[0], s.path)
	case err != nil:
		return fmt.Errorf("%w; liftyard writes nothing to it: copy every readable run to a new file with liftyard repair --db %s --out NEW.db (%w)",
			err, s.path, ErrDamaged)
	}
	return nil
}

// RunRepair says what Repair copied of one run.
type RunRepair struct {
	ID       uint64
	Rig      string
	Blocks   int // raw blocks copied
	Samples  uint64
	Segments int
	Events   int
	Marks    bool
	Damage   []Damage // what could not be read in the run's buckets
}

// RepairReport says what Repair copied and what it could not read.
type RepairReport struct {
	Runs         []RunRepair
	Calibrations int
	// Damage lists what could not be read outside any run's buckets, and
	// the runs whose record is unreadable (their data cannot be copied
	// without it).
	Damage []Damage
}

// Lost tells whether anything could not be read.
func (r RepairReport) Lost() bool {
	if len(r.Damage) > 0 {
		return true
	}
	for _, run := range r.Runs {
		if len(run.Damage) > 0 {
			return true
		}
	}
	return false
}

// repairBatch is how many bytes Repair writes per transaction.
const repairBatch = 8 << 20

// Repair copies every readable run of the store at src — its record, raw
// blocks, results, events, marks and calibration links — and the stored
// calibrations into a new store at dst, which must not exist, and reports
// what it could not read. src is opened read-only (a damaged file is never
// written to). Each value is decoded before it is copied, so the new file
// holds only records liftyard can read; a run that lost blocks gets its
// sample count corrected and an EventRepaired event saying what is missing.
// A run still marked recording becomes interrupted, as at any Open.
func Repair(src, dst string, now func() time.Time) (rep RepairReport, err error) {
	if _, err := os.Stat(dst); err == nil {
		return rep, fmt.Errorf("repair: %s exists; name a new file with --out", dst)
	} else if !errors.Is(err, fs.ErrNotExist) {
		return rep, fmt.Errorf("repair: %w", err)
	}
	in, err := Open(src, Options{ReadOnly: true})
	if err != nil {
		return rep, fmt.Errorf("repair: %w", err)
	}
	defer in.Close()
	out, err := Open(dst, Options{Now: now})
	if err != nil {
		return rep, fmt.Errorf("repair: %w", err)
	}
	defer func() {
		if cerr := out.Close(); err == nil && cerr != nil {
			err = cerr
		}
		if err != nil {
			os.Remove(dst) // a half-made copy is worth nothing
		}
	}()

	c := copier{out: out, runs: map[uint64]*RunRepair{}}
	// Pass 1: the run records, so the data of a run whose record is
	// unreadable is not copied (nothing could read it).
	err = in.db.View(func(tx *bolt.Tx) error {
		return protectWalk(tx, bucketRuns, func(path [][]byte, seq uint64, k, v []byte) error {
			c.runsSeq = seq
			if len(k) != 8 {
				c.damage(nil, Damage{Path: "runs", Records: 1, Reason: fmt.Sprintf("a key of %d bytes", len(k))})
				return nil
			}
			id := binary.BigEndian.Uint64(k)
			r, err := decodeRun(id, v)
			if err != nil {
				c.damage(nil, Damage{Path: fmt.Sprintf("runs/%d", id), Records: 1, Reason: "run record does not decode"})
				return nil
			}
			c.runs[id] = &RunRepair{ID: id, Rig: r.Rig}
			c.records = append(c.records, r)
			return nil
		}, func(d Damage) { c.damage(nil, d) })
	})
	if err != nil {
		return rep, fmt.Errorf("repair: read %s: %w", src, err)
	}
	// Pass 2: everything else, value by value.
	err = in.db.View(func(tx *bolt.Tx) error {
		return walk(tx, c.visit, func(d Damage) {
			if strings.HasPrefix(d.Path, "runs") {
				return // reported by pass 1
			}
			c.damage(c.runOfPath(d.Path), d)
		})
	})
	if err == nil {
		err = c.flush()
	}
	if err == nil {
		err = c.finishRuns()
	}
	if err != nil {
		return rep, fmt.Errorf("repair: %w", err)
	}
	rep.Damage = c.other
	rep.Calibrations = c.cals
	for _, r := range c.records {
		rep.Runs = append(rep.Runs, *c.runs[r.ID])
	}
	if err := out.recover(); err != nil { // recording → interrupted
		return rep, fmt.Errorf("repair: %w", err)
	}
	return rep, nil
}

// protectWalk walks one top-level bucket as walk does.
func protectWalk(tx *bolt.Tx, name []byte, fn visit, bad func(Damage)) error {
	var b *bolt.Bucket
	if err := protect(func() { b = tx.Bucket(name) }); err != nil || b == nil {
		bad(Damage{Path: string(name), Reason: "bucket unreadable"})
		return nil
	}
	w := walker{fn: fn, bad: bad}
	return w.bucket(b, [][]byte{name})
}

// pair is one record waiting to be written to the new file.
type pair struct {
	path [][]byte
	seq  uint64
	k, v []byte
}

type copier struct {
	out     *Store
	runs    map[uint64]*RunRepair
	records []Run
	runsSeq uint64
	other   []Damage
	cals    int
	pending []pair
	size    int
}

func (c *copier) damage(run *RunRepair, d Damage) {
	if run != nil {
		run.Damage = append(run.Damage, d)
		return
	}
	c.other = append(c.other, d)
}

// runOfPath returns the run a damaged bucket path belongs to, or nil.
func (c *copier) runOfPath(p string) *RunRepair {
	parts := strings.Split(p, "/")
	var idPart string
	switch {
	case len(parts) >= 2 && (parts[0] == "raw" || parts[0] == "results" || parts[0] == "events"):
		idPart = parts[1]
	default:
		return nil
	}
	var id uint64
	if _, err := fmt.Sscan(idPart, &id); err != nil {
		return nil
	}
	return c.runs[id]
}

// runOf returns the run of an 8-byte bucket name or key, or nil.
func (c *copier) runOf(k []byte) *RunRepair {
	if len(k) != 8 {
		return nil
	}
	return c.runs[binary.BigEndian.Uint64(k)]
}

// visit checks one record by where it lives and queues it for the new file.
func (c *copier) visit(path [][]byte, seq uint64, k, v []byte) error {
	top := string(path[0])
	bad := func(run *RunRepair, why string) error {
		c.damage(run, Damage{Path: showPath(path), Records: 1, Reason: why})
		return nil
	}
	switch {
	case top == "runs":
		return nil // copied from pass 1's records by finishRuns
	case top == "raw" && len(path) == 3:
		run := c.runOf(path[1])
		if run == nil {
			return nil // data of a run without a readable record
		}
		if len(k) != 16 {
			return bad(run, "block key of the wrong length")
		}
		blocks, err := decodeRecord(v)
		if err != nil {
			return bad(run, "block does not decode")
		}
		for i := range blocks {
			run.Blocks++
			run.Samples += uint64(blocks[i].Len())
		}
	case top == "results" && len(path) == 2:
		run := c.runOf(path[1])
		if run == nil {
			return nil
		}
		if _, err := decodeSegment(v); err != nil {
			return bad(run, "result row does not decode")
		}
		run.Segments++
	case top == "events" && len(path) == 2:
		run := c.runOf(path[1])
		if run == nil {
			return nil
		}
		var ev Event
		if err := json.Unmarshal(v, &ev); err != nil {
			return bad(run, "event does not decode")
		}
		run.Events++
	case top == "meta" && len(path) == 1:
		return nil // format and created are the new file's own
	case top == "meta" && len(path) == 2 && bytes.Equal(path[1], metaMarks):
		run := c.runOf(k)
		if run == nil {
			return nil
		}
		if !json.Valid(v) {
			return bad(run, "marks do not decode")
		}
		run.Marks = true
	case top == "cal" && len(path) == 2 && bytes.Equal(path[1], calRuns):
		run := c.runOf(k)
		if run == nil {
			return nil
		}
		if !json.Valid(v) {
			return bad(run, "calibration links do not decode")
		}
	case top == "cal" && len(path) == 2 && bytes.Equal(path[1], calRecords):
		if !json.Valid(v) {
			return bad(nil, "calibration does not decode")
		}
		c.cals++
	default:
		// A record of a kind this version does not know: copied as it is.
	}
	p := pair{path: clonePath(path), seq: seq, k: bytes.Clone(k), v: bytes.Clone(v)}
	c.pending = append(c.pending, p)
	c.size += len(k) + len(v)
	if c.size >= repairBatch {
		return c.flush()
	}
	return nil
}

func clonePath(path [][]byte) [][]byte {
	out := make([][]byte, len(path))
	for i, p := range path {
		out[i] = bytes.Clone(p)
	}
	return out
}

// flush writes the queued records in one transaction.
func (c *copier) flush() error {
	if len(c.pending) == 0 {
		return nil
	}
	err := c.out.db.Update(func(tx *bolt.Tx) error {
		for _, p := range c.pending {
			b := tx.Bucket(p.path[0])
			if b == nil {
				var err error
				if b, err = tx.CreateBucket(p.path[0]); err != nil {
					return err
				}
			}
			b.FillPercent = appendFill
			for _, name := range p.path[1:] {
				var err error
				if b, err = b.CreateBucketIfNotExists(name); err != nil {
					return err
				}
				b.FillPercent = appendFill
			}
			if p.seq > b.Sequence() {
				if err := b.SetSequence(p.seq); err != nil {
					return err
				}
			}
			if err := b.Put(p.k, p.v); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return writeError("write the copy", err)
	}
	clear(c.pending)
	c.pending, c.size = c.pending[:0], 0
	return nil
}

// finishRuns writes the run records, each with the sample count of what was
// copied, and an event on each run that lost something.
func (c *copier) finishRuns() error {
	return c.out.db.Update(func(tx *bolt.Tx) error {
		runs := tx.Bucket(bucketRuns)
		if err := runs.SetSequence(max(c.runsSeq, runs.Sequence())); err != nil {
			return err
		}
		for _, r := range c.records {
			rr := c.runs[r.ID]
			if len(rr.Damage) > 0 {
				lost := r.Samples - min(r.Samples, rr.Samples)
				msg := fmt.Sprintf("copied by liftyard repair: %d block(s) (%d sample times) read; %d sample time(s) of the %d recorded were unreadable; %d place(s) damaged, first %s",
					rr.Blocks, rr.Samples, lost, r.Samples, len(rr.Damage), rr.Damage[0])
				if err := putEvent(tx, r.ID, Event{T: c.out.now(), Kind: EventRepaired, Message: msg}); err != nil {
					return err
				}
				r.Samples, r.Segments = rr.Samples, rr.Segments
			}
			if err := putRun(tx, r); err != nil {
				return err
			}
		}
		return nil
	})
}
