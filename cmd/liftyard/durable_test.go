package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
	"liftyard/storage"
)

// child is a liftyard run by the test binary itself (TestChildMain) whose
// output lines are kept with the time each arrived.
type child struct {
	cmd    *exec.Cmd
	mu     sync.Mutex
	out    []line
	exited chan struct{} // closed when the child has exited and its output is read
	err    error         // cmd.Wait's, set before exited closes
}

type line struct {
	at     time.Time
	stderr bool
	text   string
}

// spawn starts `liftyard args...` in a child process; fsize > 0 sets its
// file-size limit (childFileSizeEnv). The child is killed at cleanup.
func spawn(t *testing.T, fsize int64, args ...string) *child {
	t.Helper()
	js, err := json.Marshal(args)
	require.NoError(t, err)
	c := &child{cmd: exec.Command(os.Args[0], "-test.run=^TestChildMain$"), exited: make(chan struct{})}
	c.cmd.Env = append(os.Environ(), childEnv+"="+string(js))
	if fsize > 0 {
		c.cmd.Env = append(c.cmd.Env, childFileSizeEnv+"="+strconv.FormatInt(fsize, 10))
	}
	stdout, err := c.cmd.StdoutPipe()
	require.NoError(t, err)
	stderr, err := c.cmd.StderrPipe()
	require.NoError(t, err)
	require.NoError(t, c.cmd.Start())
	t.Cleanup(func() { _ = c.cmd.Process.Kill(); <-c.exited })
	var wg sync.WaitGroup
	for _, p := range []struct {
		r   io.Reader
		err bool
	}{{stdout, false}, {stderr, true}} {
		wg.Go(func() {
			sc := bufio.NewScanner(p.r)
			sc.Buffer(nil, 1<<20)
			for sc.Scan() {
				c.mu.Lock()
				c.out = append(c.out, line{at: time.Now(), stderr: p.err, text: sc.Text()})
				c.mu.Unlock()
			}
		})
	}
	go func() { wg.Wait(); c.err = c.cmd.Wait(); close(c.exited) }()
	return c
}

// waitLine waits up to within for a line containing s and returns it.
func (c *child) waitLine(t *testing.T, s string, within time.Duration) line {
	t.Helper()
	deadline := time.Now().Add(within)
	for time.Now().Before(deadline) {
		c.mu.Lock()
		for _, l := range c.out {
			if strings.Contains(l.text, s) {
				c.mu.Unlock()
				return l
			}
		}
		c.mu.Unlock()
		time.Sleep(5 * time.Millisecond)
	}
	t.Fatalf("no line containing %q within %s; output:\n%s", s, within, c.text())
	return line{}
}

func (c *child) text() string {
	c.mu.Lock()
	defer c.mu.Unlock()
	var b strings.Builder
	for _, l := range c.out {
		b.WriteString(l.text + "\n")
	}
	return b.String()
}

// wait waits up to within for the child to exit and returns its exit
// status. A child that hangs fails the test: it gets SIGQUIT first, so
// that its goroutines are in the output, then SIGKILL.
func (c *child) wait(t *testing.T, within time.Duration) int {
	t.Helper()
	select {
	case <-c.exited:
		var ee *exec.ExitError
		if errors.As(c.err, &ee) {
			return ee.ExitCode()
		}
		require.NoError(t, c.err)
		return 0
	case <-time.After(within):
		_ = c.cmd.Process.Signal(syscall.SIGQUIT)
		select {
		case <-c.exited:
		case <-time.After(5 * time.Second):
			_ = c.cmd.Process.Kill()
		}
		t.Fatalf("child hung: not exited within %s; output:\n%s", within, c.text())
		return -1
	}
}

// simRigFile writes the example tow-tank rig with its MQTT source replaced
// by a simulated one at rateHz, and returns its path.
func simRigFile(t *testing.T, rateHz int) string {
	t.Helper()
	data, err := os.ReadFile(towtankRig)
	require.NoError(t, err)
	src := regexp.MustCompile(`(?s)\[\[source\]\].*?\n\n`)
	require.True(t, src.Match(data), "the example rig has a [[source]] block")
	text := src.ReplaceAllString(string(data), fmt.Sprintf("[[source]]\nname = \"carriage\"\ntype = \"simulated\"\nrate_hz = %d\n\n", rateHz))
	path := filepath.Join(t.TempDir(), "sim-rig.toml")
	require.NoError(t, os.WriteFile(path, []byte(text), 0o600))
	return path
}

// highWater is the end of the pages bbolt uses in the file at path (its
// meta page's high-water mark): past it, a commit must grow the file.
func highWater(t *testing.T, path string) int64 {
	t.Helper()
	db, err := bolt.Open(path, 0o600, &bolt.Options{ReadOnly: true, Timeout: time.Second})
	require.NoError(t, err)
	defer db.Close()
	var hw int64
	require.NoError(t, db.View(func(tx *bolt.Tx) error { hw = tx.Size(); return nil }))
	return hw
}

// nearlyFullStore makes a store at path whose file has at most room bytes
// (and at least room/4) before bbolt must grow it, with a ballast run of
// incompressible blocks, and returns the file's size. bbolt grows a file
// in 16 MiB steps, so a file-size limit equal to this size leaves the
// recorder about room bytes, then every growth fails with EFBIG: a disk
// that fills after a second or two, the same for every machine.
func nearlyFullStore(t *testing.T, path string, room int64) int64 {
	t.Helper()
	rng := rand.New(rand.NewPCG(16, 1))
	seq := uint64(0)
	for i := 0; ; i++ {
		require.Less(t, i, 200, "filling the store did not converge")
		st, err := storage.Open(path, storage.Options{})
		require.NoError(t, err)
		if i == 0 {
			id, err := st.CreateRun(storage.Run{Rig: "ballast", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.09})
			require.NoError(t, err)
			require.NoError(t, st.FinishRun(id, time.Now(), storage.StatusComplete, nil))
		}
		require.NoError(t, st.Close())
		info, err := os.Stat(path)
		require.NoError(t, err)
		left := info.Size() - highWater(t, path)
		if left <= room && left >= room/4 {
			return info.Size()
		}
		// Fill half of what is left beyond room (at least 16 KiB), so the
		// file never has to grow again: 8-byte readings, no compression.
		fill := max((left-room)/2, 16<<10)
		if left < room/4 {
			fill = 32 << 20 // overshot into a new growth step: fill most of it
		}
		st, err = storage.Open(path, storage.Options{})
		require.NoError(t, err)
		w := st.NewWriter(1, storage.WriterConfig{})
		in := make(chan storage.Item, 64)
		errc := make(chan error, 1)
		go func() { errc <- w.Run(t.Context(), in) }()
		for n := int64(0); n < fill; n += 8 * 512 * 4 {
			b := &acquire.Block{Source: "ballast", Seq: seq, T0Us: int64(seq) * 512, DtUs: 1, Received: time.Unix(1773478800, int64(seq))}
			for _, ch := range []string{"a", "b", "c", "d"} {
				raw := make([]float64, 512)
				for k := range raw {
					raw[k] = rng.Float64()
				}
				b.Series = append(b.Series, acquire.Series{Channel: ch, Raw: raw})
			}
			in <- storage.Item{Block: b}
			seq++
		}
		close(in)
		require.NoError(t, <-errc)
		require.NoError(t, st.Close())
	}
}

// accountingRe reads the recorder's final count (process.Accounting).
var accountingRe = regexp.MustCompile(`sample times received (\d+) = stored (\d+) \+ rejected (\d+) \+ dropped from the queue (\d+) \+ lost in the failing store (\d+)`)

type accounting struct{ received, stored, rejected, dropped, lost uint64 }

func parseAccounting(t *testing.T, text string) accounting {
	t.Helper()
	m := accountingRe.FindStringSubmatch(text)
	require.NotNil(t, m, "no sample accounting in the output:\n%s", text)
	var n [5]uint64
	for i := range n {
		v, err := strconv.ParseUint(m[i+1], 10, 64)
		require.NoError(t, err)
		n[i] = v
	}
	return accounting{n[0], n[1], n[2], n[3], n[4]}
}

// checkStore opens the file read-only and checks every run: each opens,
// is complete or interrupted (never "recording": a read-only open proves
// that no recorder holds the file), its raw blocks decode, and its sample
// count is what its blocks hold (they are committed in one transaction).
// It returns the runs.
func checkStore(t *testing.T, db string) []storage.Run {
	t.Helper()
	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	runs, err := st.Runs()
	require.NoError(t, err)
	for _, r := range runs {
		assert.Contains(t, []storage.Status{storage.StatusComplete, storage.StatusInterrupted}, r.Status, "run %d", r.ID)
		var samples uint64
		require.NoError(t, st.RawBlocks(r.ID, func(b acquire.Block) error {
			if len(b.Series) == 0 || b.DtUs <= 0 {
				return fmt.Errorf("block %s/%d decodes to nonsense: %+v", b.Source, b.Seq, b)
			}
			for _, s := range b.Series {
				if len(s.Raw) != b.Len() {
					return fmt.Errorf("block %s/%d: series %s has %d readings, the block %d", b.Source, b.Seq, s.Channel, len(s.Raw), b.Len())
				}
			}
			samples += uint64(b.Len())
			return nil
		}), "run %d", r.ID)
		assert.Equal(t, r.Samples, samples, "run %d: the run record counts what its blocks hold", r.ID)
		_, err := st.Events(r.ID)
		require.NoError(t, err, "run %d events", r.ID)
		_, err = st.Segments(r.ID)
		require.NoError(t, err, "run %d segments", r.ID)
	}
	return runs
}

// runsJSON is `liftyard runs --json`, in process.
func runsJSON(t *testing.T, db string) []storage.Run {
	t.Helper()
	var out, errb bytes.Buffer
	require.Equal(t, 0, run(t.Context(), []string{"runs", "--db", db, "--json"}, &out, &errb), errb.String())
	var runs []storage.Run
	require.NoError(t, json.Unmarshal(out.Bytes(), &runs))
	return runs
}

// Ensure that a disk that fills during `record` (a file-size limit on the
// recorder: every growth of the store fails with EFBIG) is reported within
// a second, the recording neither hangs nor ignores Ctrl-C, exits with
// status 1, the store opens afterwards with every committed sample intact,
// and every sample received is either stored or counted as lost (issue 16).
func TestRecord_DiskFull(t *testing.T) {
	db := filepath.Join(t.TempDir(), "full.db")
	limit := nearlyFullStore(t, db, 64<<10)
	// 6 channels at 500 Hz: about 25 kB/s, so the room lasts a few seconds;
	// slow enough for a race-instrumented recorder on a busy machine.
	rigPath := simRigFile(t, 500)
	c := spawn(t, limit, "record", "--rig", rigPath, "--db", db, "--addr", "127.0.0.1:0", "--for", "60s")
	fail := c.waitLine(t, "the store failed to commit", 30*time.Second)
	assert.True(t, fail.stderr, "the failure is on stderr")
	assert.Contains(t, fail.text, syscall.EFBIG.Error(), "the commit error is the real one")
	time.Sleep(1500 * time.Millisecond) // the writer holds and retries meanwhile
	require.NoError(t, c.cmd.Process.Signal(os.Interrupt))
	code := c.wait(t, 15*time.Second)
	out := c.text()
	t.Logf("child output:\n%s", out)
	assert.Equal(t, 1, code, "exit status after a store failure")

	acc := parseAccounting(t, out)
	assert.Equal(t, acc.received, acc.stored+acc.rejected+acc.dropped+acc.lost, "every received sample is stored or counted: %+v", acc)
	assert.Positive(t, acc.lost, "the failing store lost samples and counted them")
	assert.Zero(t, acc.rejected)

	runs := checkStore(t, db)
	require.Len(t, runs, 2)
	r := runs[0] // newest first: the recording
	assert.Equal(t, storage.StatusInterrupted, r.Status)
	assert.Equal(t, acc.stored, r.Samples, "the samples the recorder says it stored are in the file")
	assert.Positive(t, r.Samples)

	// Reported within a second: the last block that reached the disk was
	// received at most one commit before the failure, and the report came
	// at once (same host clock).
	var last time.Time
	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	require.NoError(t, st.RawBlocks(r.ID, func(b acquire.Block) error {
		if b.Received.After(last) {
			last = b.Received
		}
		return nil
	}))
	require.NoError(t, st.Close())
	assert.Less(t, fail.at.Sub(last), time.Second, "failure reported %s after the last stored block arrived", fail.at.Sub(last))

	// Read-only commands show the run as interrupted; the next writer opens
	// the file and keeps every committed sample.
	assert.Equal(t, storage.StatusInterrupted, runsJSON(t, db)[0].Status)
	st, err = storage.Open(db, storage.Options{})
	require.NoError(t, err)
	require.NoError(t, st.Close())
	after := checkStore(t, db)
	assert.Equal(t, r.Samples, after[0].Samples)
}

// Ensure that a disk that fills during `import` stops the import within a
// second of the failure with status 1, and that every sample stored is the
// file's own, in order, up to the last commit; received = stored + lost.
func TestImport_DiskFull(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "full.db")
	limit := nearlyFullStore(t, db, 1<<20)
	// A raw record of 100,000 rows of incompressible readings (4.8 MB of
	// readings, about five times the room left), imported in blocks of 10
	// rows so that a few commits (of at most 512 blocks, 245 kB) fit.
	const rows = 100000
	channels := []string{"n_fore", "n_aft", "a_main", "pitot", "alpha", "t_water"}
	rng := rand.New(rand.NewPCG(16, 2))
	want := make([][]float64, len(channels))
	var csv bytes.Buffer
	csv.WriteString("t_s," + strings.Join(channels, ",") + "\n")
	for i := range rows {
		fmt.Fprintf(&csv, "%.3f", 1773478800+float64(i)/100)
		for c := range channels {
			v := float64(rng.IntN(1 << 24))
			want[c] = append(want[c], v)
			fmt.Fprintf(&csv, ",%.0f", v)
		}
		csv.WriteByte('\n')
	}
	csvPath := filepath.Join(dir, "raw.csv")
	require.NoError(t, os.WriteFile(csvPath, csv.Bytes(), 0o600))

	c := spawn(t, limit, "import", "--rig", towtankRig, "--db", db, "--block-samples", "10", csvPath)
	fail := c.waitLine(t, "the store failed to commit", 60*time.Second)
	code := c.wait(t, 30*time.Second)
	exited := time.Now()
	out := c.text()
	t.Logf("child output:\n%s", out)
	assert.Equal(t, 1, code, "exit status after a store failure")
	assert.Less(t, exited.Sub(fail.at), time.Second, "import exited %s after the failure", exited.Sub(fail.at))
	assert.Contains(t, out, syscall.EFBIG.Error())

	acc := parseAccounting(t, out)
	assert.Equal(t, acc.received, acc.stored+acc.rejected+acc.dropped+acc.lost, "%+v", acc)
	assert.Positive(t, acc.lost)
	assert.Less(t, acc.received, uint64(rows), "the import stopped at the failure rather than reading on")

	runs := checkStore(t, db)
	require.Len(t, runs, 2)
	r := runs[0]
	assert.Equal(t, storage.StatusInterrupted, r.Status)
	assert.Equal(t, acc.stored, r.Samples)
	assert.Positive(t, r.Samples)
	// Every committed sample is the file's, in order.
	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	row := 0
	require.NoError(t, st.RawBlocks(r.ID, func(b acquire.Block) error {
		for _, s := range b.Series {
			c := -1
			for i, name := range channels {
				if name == s.Channel {
					c = i
				}
			}
			if c < 0 {
				return fmt.Errorf("unexpected channel %q", s.Channel)
			}
			for k, v := range s.Raw {
				if v != want[c][row+k] {
					return fmt.Errorf("row %d channel %s: stored %v, the file has %v", row+k, s.Channel, v, want[c][row+k])
				}
			}
		}
		row += b.Len()
		return nil
	}))
	assert.Equal(t, int(r.Samples), row)
}

// Ensure that 20 SIGKILLs at random moments of a recording process (during
// start-up, run creation, commits, between them) each leave a store that
// opens, every run intact up to its last commit (blocks decode, the sample
// count matches them), and read-only commands showing the killed run as
// interrupted, never as recording (issue 16).
func TestRecord_TwentyKills(t *testing.T) {
	db := filepath.Join(t.TempDir(), "kills.db")
	rigPath := simRigFile(t, 1000)
	seed := uint64(time.Now().UnixNano())
	t.Logf("seed %d", seed)
	rng := rand.New(rand.NewPCG(seed, 16))
	started := time.Now()
	recorded := 0
	for i := range 20 {
		c := spawn(t, 0, "record", "--rig", rigPath, "--db", db, "--addr", "127.0.0.1:0")
		// Half the kills hit a running recording at a random moment, the
		// other half anywhere from process start (opening the file,
		// recovering the last run, creating the run).
		if i%2 == 0 {
			c.waitLine(t, "dashboard on http://", 20*time.Second)
		}
		time.Sleep(time.Duration(rng.IntN(1200)) * time.Millisecond)
		require.NoError(t, c.cmd.Process.Kill())
		c.wait(t, 10*time.Second)

		runs := checkStore(t, db)
		for _, r := range runsJSON(t, db) {
			assert.NotEqual(t, storage.StatusRecording, r.Status, "kill %d: runs shows run %d as recording", i+1, r.ID)
		}
		if len(runs) > 0 {
			var raw bytes.Buffer
			require.NoError(t, exportRaw(t, db, runs[0].ID, &raw), "kill %d: export of run %d", i+1, runs[0].ID)
			if runs[0].Samples > 0 {
				assert.Equal(t, int(runs[0].Samples)+1, bytes.Count(raw.Bytes(), []byte("\n")), "kill %d: raw export has a line per sample time", i+1)
			}
		}
		recorded = len(runs)
	}
	t.Logf("20 kills in %s, %d runs made", time.Since(started).Round(time.Millisecond), recorded)
	assert.GreaterOrEqual(t, recorded, 10, "most children lived long enough to make a run")
}

// exportRaw is `liftyard export --what raw` of run id, in process.
func exportRaw(t *testing.T, db string, id uint64, w io.Writer) error {
	t.Helper()
	var errb bytes.Buffer
	if code := run(context.Background(), []string{"export", "--db", db, "--run", strconv.FormatUint(id, 10), "--what", "raw"}, w, &errb); code != 0 {
		return fmt.Errorf("exit %d: %s", code, errb.String())
	}
	return nil
}
