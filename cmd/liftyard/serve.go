package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"sync"
	"time"

	"liftyard/dashboard"
	"liftyard/process"
	"liftyard/storage"
)

// markStore is the marks capability of a dashboard (dashboard.MarkStore)
// over a store: the marks kept with each run, and each run's first sample,
// read once.
type markStore struct {
	*storage.Store
	mu     sync.Mutex
	starts map[uint64]time.Time // first sample of each run, read once
}

func newMarkStore(store *storage.Store) *markStore {
	return &markStore{Store: store, starts: map[uint64]time.Time{}}
}

// RunStart implements dashboard.MarkStore. A run's first raw sample never
// changes once stored, so the answer is kept.
func (s *markStore) RunStart(id uint64) (time.Time, error) {
	s.mu.Lock()
	t, ok := s.starts[id]
	s.mu.Unlock()
	if ok {
		return t, nil
	}
	t, err := process.RunStart(s.Store, id)
	if err != nil {
		return time.Time{}, err
	}
	s.mu.Lock()
	s.starts[id] = t
	s.mu.Unlock()
	return t, nil
}

// serveOptions are the flags of `liftyard serve`.
type serveOptions struct {
	db, addr, token string
	verbose         bool
	// onReady, when set, gets the dashboard URL once it listens.
	onReady func(url string)
}

// runServe is `liftyard serve --db FILE [--addr 127.0.0.1:8470] [--token T]`.
func runServe(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("serve", "--db FILE [--addr 127.0.0.1:8470] [--token-file FILE]",
		"serve the dashboard for a stored database (runs, calibrations, marks), without recording", stdout)
	var o serveOptions
	fs.StringVar(&o.db, "db", "liftyard.db", "bbolt store file")
	fs.StringVar(&o.addr, "addr", dashboard.DefaultAddr, "dashboard listen address")
	tokenOf := tokenFlags(fs)
	fs.BoolVar(&o.verbose, "v", false, "log requests that fail to stderr")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard serve --help)", pos[0])
	}
	if o.token, err = tokenOf(o.addr, stderr); err != nil {
		return err
	}
	o.onReady = func(url string) {
		fmt.Fprintf(stdout, "liftyard serve: dashboard for %s on %s (Ctrl-C to stop)\n", o.db, url)
	}
	return serve(ctx, o, stderr)
}

// serve holds the store read-write (so marks can be saved; a recorder on
// the same file then fails fast with the "in use" message) and serves the
// dashboard until ctx is done.
func serve(ctx context.Context, o serveOptions, stderr io.Writer) error {
	if _, err := os.Stat(o.db); err != nil {
		return usagef("store %s: %v", o.db, err)
	}
	store, err := storage.Open(o.db, storage.Options{})
	damaged := errors.Is(err, storage.ErrDamaged)
	if damaged {
		// Nothing is written to a damaged file, but what is readable is
		// worth showing: read-only, without marking.
		fmt.Fprintf(stderr, "liftyard serve: warning: %v\nliftyard serve: serving it read-only: marks cannot be set\n", err)
		store, err = storage.Open(o.db, storage.Options{ReadOnly: true})
	}
	if err != nil {
		return err
	}
	defer store.Close()
	// Stored runs only: no live feed. Marks are edited and applied here
	// (the file is held read-write), and run pages link to the report.
	var apply func(ctx context.Context, runID uint64) (dashboard.MarksApplied, error)
	if !damaged {
		apply = func(ctx context.Context, id uint64) (dashboard.MarksApplied, error) {
			return process.ApplyMarks(ctx, store, id)
		}
	}
	dash, err := dashboard.New(dashboard.Config{Addr: o.addr, Token: o.token, Runs: store,
		Marks:        newMarkStore(store),
		ApplyMarks:   apply,
		Timeline:     timeliner(store),
		Report:       reportWriter(store, ""),
		Compare:      comparer(store),
		Calibrations: store,
		Logger:       newLogger(stderr, o.verbose)})
	if err != nil {
		return usagef("%v", err)
	}
	ln, err := net.Listen("tcp", o.addr)
	if err != nil {
		return fmt.Errorf("dashboard listen on %s: %w", o.addr, err)
	}
	if o.onReady != nil {
		o.onReady("http://" + ln.Addr().String() + "/")
	}
	return dash.Serve(ctx, ln)
}

// timeliner is the run-timeline capability over a store: a run's stored
// raw blocks replayed through the pipeline (process.RunTimeline).
func timeliner(store *storage.Store) dashboard.TimelineFunc {
	return func(ctx context.Context, run storage.Run, points int) (process.Timeline, error) {
		return process.RunTimeline(ctx, store, run, points)
	}
}
