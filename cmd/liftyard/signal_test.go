package main

import (
	"bufio"
	"context"
	"encoding/json"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/storage"
)

// childEnv carries the command line of a child liftyard run by the test
// binary itself (the bbolt robustness-test pattern: a real process to signal
// or kill).
const childEnv = "LIFTYARD_TEST_CHILD_ARGS"

// childFileSizeEnv, when set, is the file-size limit in bytes
// (RLIMIT_FSIZE) the child sets on itself before it runs: writes past it
// fail with EFBIG as on a full disk (Go ignores SIGXFSZ).
const childFileSizeEnv = "LIFTYARD_TEST_CHILD_FSIZE"

// TestChildMain is not a test: it is the child process of the signal tests.
func TestChildMain(t *testing.T) {
	raw := os.Getenv(childEnv)
	if raw == "" {
		return
	}
	var args []string
	if err := json.Unmarshal([]byte(raw), &args); err != nil {
		os.Exit(3)
	}
	if v := os.Getenv(childFileSizeEnv); v != "" {
		n, err := strconv.ParseUint(v, 10, 64)
		if err != nil {
			os.Exit(3)
		}
		if err := syscall.Setrlimit(syscall.RLIMIT_FSIZE, &syscall.Rlimit{Cur: n, Max: n}); err != nil {
			os.Exit(3)
		}
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, args, os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// startChild runs `liftyard args...` in a child process and waits until it
// prints the dashboard URL.
func startChild(t *testing.T, args ...string) *exec.Cmd {
	t.Helper()
	js, err := json.Marshal(args)
	require.NoError(t, err)
	cmd := exec.Command(os.Args[0], "-test.run=^TestChildMain$")
	cmd.Env = append(os.Environ(), childEnv+"="+string(js))
	out, err := cmd.StdoutPipe()
	require.NoError(t, err)
	cmd.Stderr = os.Stderr
	require.NoError(t, cmd.Start())
	t.Cleanup(func() { _ = cmd.Process.Kill(); _ = cmd.Wait() })
	ready := make(chan struct{})
	go func() {
		sc := bufio.NewScanner(out)
		for sc.Scan() {
			if strings.Contains(sc.Text(), "dashboard on http://") {
				close(ready)
				break
			}
		}
		for sc.Scan() { // keep draining so the child never blocks on stdout
		}
	}()
	select {
	case <-ready:
	case <-time.After(20 * time.Second):
		t.Fatal("child liftyard did not start its dashboard within 20 s")
	}
	return cmd
}

func waitExit(t *testing.T, cmd *exec.Cmd, within time.Duration) error {
	t.Helper()
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case err := <-done:
		return err
	case <-time.After(within):
		t.Fatalf("child did not exit within %s", within)
		return nil
	}
}

func storedRun(t *testing.T, db string) storage.Run {
	t.Helper()
	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	r, err := st.LatestRun()
	require.NoError(t, err)
	return r
}

// Ensure that Ctrl-C (SIGINT) stops the demo in order: exit status 0, the
// last batch committed, the run marked complete (DEVELOPERS.md, shutdown order).
func TestDemo_CtrlCShutsDownInOrder(t *testing.T) {
	db := filepath.Join(t.TempDir(), "ctrlc.db")
	cmd := startChild(t, "demo", "--db", db, "--addr", "127.0.0.1:0")
	time.Sleep(3 * time.Second) // let it record some blocks
	require.NoError(t, cmd.Process.Signal(os.Interrupt))
	require.NoError(t, waitExit(t, cmd, 15*time.Second), "exit status after Ctrl-C")
	r := storedRun(t, db)
	assert.Equal(t, storage.StatusComplete, r.Status)
	assert.Greater(t, r.Samples, uint64(100))
	require.NotEmpty(t, r.Sources)
	assert.Equal(t, r.Sources[0].Samples, r.Samples, "every received sample was committed before exit")
}

// Ensure that a recorder killed outright (SIGKILL: a power cut as far as the
// process is concerned) leaves a store that opens, keeps what was committed,
// and marks the run interrupted (docs/design.md §5).
func TestDemo_KilledRecorderLeavesAUsableStore(t *testing.T) {
	db := filepath.Join(t.TempDir(), "kill.db")
	cmd := startChild(t, "demo", "--db", db, "--addr", "127.0.0.1:0")
	time.Sleep(2 * time.Second)
	require.NoError(t, cmd.Process.Kill())
	_ = waitExit(t, cmd, 10*time.Second)

	// The next writer to open the file recovers it: the run is marked interrupted.
	st, err := storage.Open(db, storage.Options{})
	require.NoError(t, err)
	require.NoError(t, st.Close())
	r := storedRun(t, db)
	assert.Equal(t, storage.StatusInterrupted, r.Status)
	var blocks int
	st, err = storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	require.NoError(t, st.RawBlocks(r.ID, func(acquire.Block) error { blocks++; return nil }))
	assert.Greater(t, blocks, 0, "committed batches survive the kill")
}
