package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"io"
	"net/http"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/process"
	"liftyard/storage"
)

// startServe runs `liftyard serve` on 127.0.0.1:0 until the returned stop
// is called; stop returns serve's error.
func startServe(t *testing.T, db string) (url string, stop func() error) {
	t.Helper()
	ctx, cancel := context.WithCancel(t.Context())
	ready := make(chan string, 1)
	done := make(chan error, 1)
	var logs bytes.Buffer
	go func() {
		done <- serve(ctx, serveOptions{db: db, addr: "127.0.0.1:0", onReady: func(u string) { ready <- u }}, &logs)
	}()
	select {
	case url = <-ready:
	case err := <-done:
		cancel()
		t.Fatalf("serve ended before listening: %v", err)
	case <-time.After(10 * time.Second):
		cancel()
		t.Fatal("serve did not listen within 10 s")
	}
	stopped := false
	stop = func() error {
		if stopped {
			return nil
		}
		stopped = true
		cancel()
		select {
		case err := <-done:
			return err
		case <-time.After(5 * time.Second):
			return errors.New("serve did not stop within 5 s of Ctrl-C")
		}
	}
	t.Cleanup(func() { _ = stop() })
	return url, stop
}

func fetch(t *testing.T, method, url, body string, hdr map[string]string) (int, string) {
	t.Helper()
	var rd io.Reader
	if body != "" {
		rd = strings.NewReader(body)
	}
	req, err := http.NewRequestWithContext(t.Context(), method, url, rd)
	require.NoError(t, err)
	for k, v := range hdr {
		req.Header.Set(k, v)
	}
	res, err := http.DefaultClient.Do(req)
	require.NoError(t, err)
	defer res.Body.Close()
	b, err := io.ReadAll(res.Body)
	require.NoError(t, err)
	return res.StatusCode, string(b)
}

// Ensure that `liftyard serve` shows a stored database — run list, run
// page with its marking form, calibrations, JSON API, a live page that
// says no run is recording — holds the file so that other commands fail
// fast with the "in use" message, takes marks and applies them through
// the API (the segments change), and shuts down cleanly on Ctrl-C.
func TestServe_StoredDatabase(t *testing.T) {
	db := importedRun(t)
	url, stop := startServe(t, db)

	for _, c := range []struct{ path, want string }{
		{"", "no run recording"},
		{"runs", "foil"},
		{"runs/1", `id="marks" data-run="1"`},
		{"runs/1/polar.svg", "<svg"},
		{"calibrations", "Calibrations"},
		{"api/v1/runs", `"id":1`},
		{"api/v1/runs/1/segments", `"cl"`},
		{"static/run.js", "/marks"},
	} {
		code, body := fetch(t, "GET", url+c.path, "", nil)
		assert.Equal(t, 200, code, "GET /%s", c.path)
		assert.Contains(t, body, c.want, "GET /%s", c.path)
	}
	code, body := fetch(t, "GET", url+"api/v1/runs/1/marks", "", nil)
	require.Equal(t, 200, code, body)
	var mj struct {
		Editable bool      `json:"editable"`
		RunStart time.Time `json:"run_start"`
		Marks    []any     `json:"marks"`
	}
	require.NoError(t, json.Unmarshal([]byte(body), &mj))
	assert.True(t, mj.Editable, body)
	assert.True(t, mj.RunStart.Equal(time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)), "run start %s", mj.RunStart)
	assert.Empty(t, mj.Marks)

	// The file is held: a second command fails fast and says why.
	start := time.Now()
	c, _, errOut := runCLI(t, "runs", "--db", db)
	assert.NotEqual(t, 0, c)
	assert.Contains(t, errOut, "in use")
	assert.Less(t, time.Since(start), 3*time.Second)

	js := map[string]string{"Content-Type": "application/json"}
	code, body = fetch(t, "POST", url+"api/v1/runs/1/marks", `{"start_s": 6.4, "end_s": 8.1, "label": "hold at 4°"}`,
		map[string]string{"Content-Type": "application/json", "Origin": "http://evil.example"})
	assert.Equal(t, 403, code, "cross-origin POST: %s", body)
	code, body = fetch(t, "POST", url+"api/v1/runs/1/marks", `{"start_s": 6.4, "end_s": 5}`, js)
	assert.Equal(t, 400, code)
	assert.Contains(t, body, "end_s")
	code, body = fetch(t, "POST", url+"api/v1/runs/1/marks", `{"start_s": 6.4, "end_s": 8.1, "label": "hold at 4°"}`, js)
	require.Equal(t, 200, code, body)
	code, body = fetch(t, "POST", url+"api/v1/runs/1/marks/apply", "", nil)
	require.Equal(t, 200, code, body)
	assert.Contains(t, body, `"segments":1`)
	code, body = fetch(t, "GET", url+"api/v1/runs/1/segments", "", nil)
	require.Equal(t, 200, code)
	var segs []map[string]any
	require.NoError(t, json.Unmarshal([]byte(body), &segs))
	require.Len(t, segs, 1, "one segment from one mark")
	assert.InDelta(t, 4, segs[0]["alpha_deg"].(float64), 0.3)
	assert.EqualValues(t, 171, segs[0]["n"])

	require.NoError(t, stop(), "serve returns nil after Ctrl-C")
	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err, "the store is released")
	defer st.Close()
	run, err := st.Run(1)
	require.NoError(t, err)
	assert.Contains(t, run.Note, process.MarksNote)
	marks, err := st.Marks(1)
	require.NoError(t, err)
	require.Len(t, marks, 1)
	assert.Equal(t, "hold at 4°", marks[0].Label)
}

// Ensure that serve refuses bad usage with exit status 2.
func TestServe_BadUsage(t *testing.T) {
	db := importedRun(t)
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"no store", []string{"--db", db + ".missing"}, "missing"},
		{"off loopback without token", []string{"--db", db, "--addr", "0.0.0.0:0"}, "token is required"},
		{"argument", []string{"--db", db, "extra"}, `unexpected argument "extra"`},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, errOut := runCLI(t, append([]string{"serve"}, c.args...)...)
			if code != 2 || !strings.Contains(errOut, c.want) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", code, errOut, c.want)
			}
		})
	}
}

// Ensure that `liftyard serve --db FILE`, run as the command line runs it,
// offers each run's printable report and serves it: the run page links it
// and GET /runs/{id}/report answers 200 with the report's HTML (issue 9:
// the link used to answer 404 "this dashboard has no store attached").
func TestServe_Report(t *testing.T) {
	db := importedRun(t)
	ctx, cancel := context.WithCancel(t.Context())
	outR, outW := io.Pipe()
	var errOut syncBuf
	done := make(chan int, 1)
	go func() {
		code := run(ctx, []string{"serve", "--db", db, "--addr", "127.0.0.1:0"}, outW, &errOut)
		outW.Close()
		done <- code
	}()
	t.Cleanup(func() {
		cancel()
		select {
		case code := <-done:
			assert.Equal(t, 0, code, "serve exit code; stderr: %s", errOut.String())
		case <-time.After(5 * time.Second):
			t.Error("serve did not stop within 5 s of Ctrl-C")
		}
	})
	lines := make(chan string, 1)
	go func() {
		line, _ := bufio.NewReader(outR).ReadString('\n')
		lines <- line
		io.Copy(io.Discard, outR)
	}()
	var url string
	select {
	case line := <-lines:
		m := regexp.MustCompile(`on (http://127\.0\.0\.1:\d+/)`).FindStringSubmatch(line)
		require.NotNil(t, m, "serve's first line %q names no URL; stderr: %s", line, errOut.String())
		url = m[1]
	case <-time.After(10 * time.Second):
		t.Fatalf("serve did not listen within 10 s; stderr: %s", errOut.String())
	}

	code, page := fetch(t, "GET", url+"runs/1", "", nil)
	require.Equal(t, 200, code, page)
	assert.Contains(t, page, `<a href="/runs/1/report"`)

	req, err := http.NewRequestWithContext(t.Context(), "GET", url+"runs/1/report", nil)
	require.NoError(t, err)
	res, err := http.DefaultClient.Do(req)
	require.NoError(t, err)
	body, err := io.ReadAll(res.Body)
	res.Body.Close()
	require.NoError(t, err)
	require.Equal(t, http.StatusOK, res.StatusCode, string(body))
	assert.Equal(t, "text/html; charset=utf-8", res.Header.Get("Content-Type"))
	assert.Contains(t, string(body), "Lift test report: run 1")
	assert.Contains(t, string(body), "<h2>Steady segments</h2>")
	assert.Contains(t, string(body), "<svg", "the report's plots are inline")

	code, _ = fetch(t, "GET", url+"runs/9/report", "", nil)
	assert.Equal(t, http.StatusNotFound, code, "report of a run the store does not have")
}

// syncBuf is a bytes.Buffer safe for a writer and a reader goroutine.
type syncBuf struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuf) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuf) String() string { s.mu.Lock(); defer s.mu.Unlock(); return s.b.String() }
