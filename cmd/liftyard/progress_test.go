package main

import (
	"bytes"
	"io"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/creack/pty"
	"github.com/stretchr/testify/require"
)

// progressLines returns stderr's progress lines of verb ("import",
// "import: check").
func progressLines(stderr, verb string) []string {
	var out []string
	for _, l := range strings.Split(stderr, "\n") {
		if strings.HasPrefix(l, verb+": ") && (verb != "import" || !strings.HasPrefix(l, "import: check: ")) {
			out = append(out, l)
		}
	}
	return out
}

// Ensure that import, reprocess and export write plain progress lines on a
// stderr that is not a terminal: counts that grow to the total, a
// percentage, a rate and the time left, then a last line with the time it
// took; and that --quiet writes none of them.
func TestProgress_PlainLinesAndQuiet(t *testing.T) {
	defer func(d time.Duration) { progressEvery = d }(progressEvery)
	progressEvery = 0 // a line after every block
	db := filepath.Join(t.TempDir(), "p.db")

	code, _, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", db, importCSV)
	require.Equal(t, 0, code, errOut)
	lines := progressLines(errOut, "import")
	require.GreaterOrEqual(t, len(lines), 1450/100, "a line after every block of 100 rows:\n%s", errOut)
	step := regexp.MustCompile(`^import: ([\d ]+) of 1 450 rows \((\d+) %\), [\d.]+( [kM])? readings/s, [\d.]+ s left$`)
	prev := 0
	for _, l := range lines[:len(lines)-1] {
		m := step.FindStringSubmatch(l)
		require.NotNil(t, m, "line %q", l)
		n, err := strconv.Atoi(strings.ReplaceAll(m[1], " ", ""))
		require.NoError(t, err)
		require.Greater(t, n, prev, "counts grow: %q", l)
		pct, _ := strconv.Atoi(m[2])
		require.Equal(t, n*100/1450, pct, "percentage of %q", l)
		prev = n
	}
	require.Regexp(t, `^import: 1 450 of 1 450 rows \(100 %\), [\d.]+( [kM])? readings/s, done in [\d.]+ s$`, lines[len(lines)-1])
	check := progressLines(errOut, "import: check")
	require.NotEmpty(t, check, "the check pass before the run is made shows its progress too")
	require.Regexp(t, `^import: check: 0\.1 of 0\.1 MB \(100 %\), \d+ MB/s, done in [\d.]+ s$`, check[len(check)-1])

	code, _, errOut = runCLI(t, "reprocess", "--db", db, "--run", "1")
	require.Equal(t, 0, code, errOut)
	lines = progressLines(errOut, "reprocess")
	require.NotEmpty(t, lines)
	require.Regexp(t, `^reprocess: 1 450 of 1 450 sample times \(100 %\), .* readings/s, done in`, lines[len(lines)-1])

	out := filepath.Join(t.TempDir(), "raw.csv")
	code, _, errOut = runCLI(t, "export", "--db", db, "--run", "1", "--what", "raw", "--out", out)
	require.Equal(t, 0, code, errOut)
	lines = progressLines(errOut, "export")
	require.NotEmpty(t, lines)
	require.Regexp(t, `^export: 1 450 of 1 450 rows \(100 %\), .* rows/s, done in`, lines[len(lines)-1], "rows after the header")

	code, _, errOut = runCLI(t, "report", "--db", db, "--run", "1", "--out", filepath.Join(t.TempDir(), "r.html"))
	require.Equal(t, 0, code, errOut)
	require.Regexp(t, `(?m)^report: 2 of 2 steps \(100 %\), done in [\d.]+ s$`, errOut)

	for _, args := range [][]string{
		{"import", "--quiet", "--rig", towtankRig, "--db", db, importCSV},
		{"reprocess", "--quiet", "--db", db, "--run", "1"},
		{"export", "--quiet", "--db", db, "--run", "1", "--what", "raw", "--out", out},
		{"report", "--quiet", "--db", db, "--run", "1", "--out", filepath.Join(t.TempDir(), "q.html")},
	} {
		code, _, errOut = runCLI(t, args...)
		require.Equal(t, 0, code, errOut)
		require.Empty(t, progressLines(errOut, args[0]), "--quiet shows no progress:\n%s", errOut)
		require.NotContains(t, errOut, "import: check", "--quiet shows no check progress")
	}
}

// Ensure that on a terminal import draws a bar (schollz/progressbar) that
// reaches 100 % and writes none of the plain lines.
func TestProgress_BarOnTerminal(t *testing.T) {
	ptmx, tty, err := pty.Open()
	require.NoError(t, err)
	defer ptmx.Close()
	var seen bytes.Buffer
	done := make(chan struct{})
	go func() {
		defer close(done)
		_, _ = io.Copy(&seen, ptmx) // ends when tty closes
	}()
	var stdout bytes.Buffer
	code := run(t.Context(), []string{"import", "--rig", towtankRig, "--db", filepath.Join(t.TempDir(), "bar.db"), importCSV}, &stdout, tty)
	require.Equal(t, 0, code)
	tty.Close()
	<-done
	got := seen.String()
	require.Contains(t, got, "import")
	require.Contains(t, got, "100%", "the bar completes:\n%q", got)
	require.Contains(t, got, "1450/1450", "the bar counts rows")
	require.NotContains(t, got, "done in", "no plain lines on a terminal")
}

// Ensure that a plain progress line says the count, the share, the rate
// and the time left in the words the README shows, comes only every
// progressEvery, and that the last one says how long it took.
func TestProgress_LineFormat(t *testing.T) {
	defer func(d time.Duration) { progressEvery = d }(progressEvery)
	progressEvery = 5 * time.Second
	var buf bytes.Buffer
	t0 := time.Date(2026, 12, 2, 9, 0, 0, 0, time.UTC)
	now := t0
	p := newProgress(&buf, false, "import", "rows", 1_000_000)
	p.now, p.start, p.last = func() time.Time { return now }, t0, t0
	now = t0.Add(3 * time.Second)
	p.add(412_000, 412_000*16) // before the first 5 s: no line
	require.Empty(t, buf.String())
	now = t0.Add(5 * time.Second)
	p.add(0, 0)
	require.Equal(t, "import: 412 000 of 1 000 000 rows (41 %), 1.3 M readings/s, 7.1 s left\n", buf.String())
	buf.Reset()
	now = t0.Add(8 * time.Second)
	p.add(588_000, 588_000*16)
	require.Empty(t, buf.String(), "next line 5 s after the last")
	now = t0.Add(130 * time.Second)
	p.finish()
	p.finish()
	require.Equal(t, "import: 1 000 000 of 1 000 000 rows (100 %), 123 k readings/s, done in 2 min 10 s\n", buf.String(), "one last line")

	var nilP *progress
	nilP.add(1, 1) // --quiet: a nil progress does nothing
	nilP.finish()
	w := nilP.writer(&buf, 1)
	require.Same(t, &buf, w)

	for _, c := range []struct {
		n    int64
		want string
	}{{0, "0"}, {999, "999"}, {1000, "1 000"}, {1_000_000, "1 000 000"}, {-12345, "-12 345"}} {
		require.Equal(t, c.want, groupDigits(c.n))
	}
}

// Ensure that an export's rows are counted across writes that split
// lines, after its header.
func TestProgress_WriterCountsRowsAfterHeader(t *testing.T) {
	var sink, errs bytes.Buffer
	p := newProgress(&errs, false, "export", "rows", 3)
	w := p.writer(&sink, 1)
	for _, part := range []string{"t_s,a\n0,", "1\n1,2", "\n2,3\n"} {
		_, err := io.WriteString(w, part)
		require.NoError(t, err)
	}
	require.Equal(t, int64(3), p.items)
	require.Equal(t, "t_s,a\n0,1\n1,2\n2,3\n", sink.String())
}
