package main

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"

	"liftyard/acquire"
)

// progressEvery is how often progress lines are written when stderr is
// not a terminal (a log file, a pipe, a CI job); one more comes at the
// end.
var progressEvery = 5 * time.Second

// quietFlag adds --quiet (no progress) to a long verb's flags.
func quietFlag(fs *flag.FlagSet) *bool {
	return fs.Bool("quiet", false, "show no progress (a bar on a terminal, else a line every few seconds on stderr)")
}

// progress shows how far a long job (import, reprocess, export, report)
// has got: a bar on a terminal (schollz/progressbar), plain periodic lines
// on stderr otherwise, nothing when quiet. It counts items (rows, sample
// times) against a total known in advance, and the readings in them for
// the rate. Its methods may be called from any goroutine; a nil *progress
// does nothing.
type progress struct {
	mu       sync.Mutex
	w        io.Writer
	verb     string // "import"
	unit     string // "rows"
	total    int64  // items expected; ≤ 0: unknown
	items    int64
	readings int64
	start    time.Time
	last     time.Time // last plain line
	now      func() time.Time
	bar      *progressbar.ProgressBar // nil when w is not a terminal
	ended    bool
}

// newProgress starts the progress of verb over total items of unit,
// shown on stderr; nil when quiet.
func newProgress(stderr io.Writer, quiet bool, verb, unit string, total int64) *progress {
	if quiet || stderr == nil {
		return nil
	}
	p := &progress{w: stderr, verb: verb, unit: unit, total: total, now: time.Now}
	p.start = p.now()
	p.last = p.start
	if f, ok := stderr.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		max := total
		if max <= 0 {
			max = -1 // a spinner
		}
		opts := []progressbar.Option{
			progressbar.OptionSetWriter(stderr),
			progressbar.OptionSetDescription(verb),
			progressbar.OptionSetPredictTime(true),
			progressbar.OptionThrottle(100 * time.Millisecond),
			progressbar.OptionSetWidth(30),
			progressbar.OptionOnCompletion(func() { fmt.Fprintln(stderr) }),
		}
		if unit == unitBytes {
			opts = append(opts, progressbar.OptionShowBytes(true))
		} else {
			opts = append(opts, progressbar.OptionShowCount(), progressbar.OptionShowIts(), progressbar.OptionSetItsString(unit))
		}
		p.bar = progressbar.NewOptions64(max, opts...)
	}
	return p
}

// unitBytes counts bytes (a file read through reader), shown in MB.
const unitBytes = "bytes"

// reader counts the bytes read through r as items.
func (p *progress) reader(r io.Reader) io.Reader {
	if p == nil {
		return r
	}
	return progressReader{r: r, p: p}
}

type progressReader struct {
	r io.Reader
	p *progress
}

func (r progressReader) Read(b []byte) (int, error) {
	n, err := r.r.Read(b)
	if n > 0 {
		r.p.add(n, 0)
	}
	return n, err
}

// add counts items more done, holding readings readings.
func (p *progress) add(items, readings int) {
	if p == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	p.items += int64(items)
	p.readings += int64(readings)
	if p.bar != nil {
		_ = p.bar.Add64(int64(items))
		return
	}
	if t := p.now(); t.Sub(p.last) >= progressEvery {
		p.last = t
		fmt.Fprintln(p.w, p.lineLocked(t, false))
	}
}

// finish ends the progress: the bar completes, or a last line says how
// long it took. Calling it again does nothing.
func (p *progress) finish() {
	if p == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.ended {
		return
	}
	p.ended = true
	if p.bar != nil {
		_ = p.bar.Finish()
		return
	}
	fmt.Fprintln(p.w, p.lineLocked(p.now(), true))
}

// writer counts the lines written through w as items (an export's rows),
// after the first skip lines (a header).
func (p *progress) writer(w io.Writer, skip int) io.Writer {
	if p == nil {
		return w
	}
	return &lineCounter{w: w, p: p, skip: skip}
}

type lineCounter struct {
	w    io.Writer
	p    *progress
	skip int
}

func (c *lineCounter) Write(b []byte) (int, error) {
	n, err := c.w.Write(b)
	k := bytes.Count(b[:n], []byte{'\n'})
	if c.skip > 0 {
		d := min(k, c.skip)
		k, c.skip = k-d, c.skip-d
	}
	if k > 0 {
		c.p.add(k, 0)
	}
	return n, err
}

// lineLocked is one plain progress line:
//
//	import: 412 000 of 1 000 000 rows (41 %), 1.8 M readings/s, 3 s left
func (p *progress) lineLocked(t time.Time, done bool) string {
	el := t.Sub(p.start).Seconds()
	count, unit := groupDigits, p.unit
	if p.unit == unitBytes {
		count = func(n int64) string { return fmt.Sprintf("%.1f", float64(n)/1e6) }
		unit = "MB"
	}
	var b strings.Builder
	b.WriteString(p.verb + ": " + count(p.items))
	if p.total > 0 {
		fmt.Fprintf(&b, " of %s %s (%d %%)", count(p.total), unit, min(100, p.items*100/p.total))
	} else {
		b.WriteString(" " + unit)
	}
	if el > 0 && (p.readings > 0 || p.items >= 100) { // no rate of a few steps
		switch {
		case p.readings > 0:
			fmt.Fprintf(&b, ", %s readings/s", siRate(float64(p.readings)/el))
		case p.unit == unitBytes:
			fmt.Fprintf(&b, ", %.0f MB/s", float64(p.items)/el/1e6)
		default:
			fmt.Fprintf(&b, ", %s %s/s", siRate(float64(p.items)/el), p.unit)
		}
	}
	switch {
	case done:
		fmt.Fprintf(&b, ", done in %s", seconds(el))
	case p.total > 0 && p.items > 0 && el > 0:
		left := float64(p.total-p.items) / (float64(p.items) / el)
		fmt.Fprintf(&b, ", %s left", seconds(math.Max(0, left)))
	}
	return b.String()
}

// groupDigits writes n with a space between groups of three digits:
// 1 000 000.
func groupDigits(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(' ')
		}
		b.WriteRune(c)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

// siRate writes a rate as 950, 12 k or 1.8 M.
func siRate(v float64) string {
	switch {
	case v >= 1e6:
		return fmt.Sprintf("%.1f M", v/1e6)
	case v >= 1e4:
		return fmt.Sprintf("%.0f k", v/1e3)
	default:
		return fmt.Sprintf("%.0f", v)
	}
}

// seconds writes a duration in seconds as 0.4 s, 3 s or 2 min 05 s.
func seconds(s float64) string {
	switch {
	case s < 10:
		return fmt.Sprintf("%.1f s", s)
	case s < 120:
		return fmt.Sprintf("%.0f s", s)
	default:
		m := int(s) / 60
		return fmt.Sprintf("%d min %02d s", m, int(s)-60*m)
	}
}

// replayer counts the blocks src hands over: their sample times as items,
// their readings for the rate.
func (p *progress) replayer(src acquire.Replayer) acquire.Replayer {
	if p == nil {
		return src
	}
	return progressReplayer{src: src, p: p}
}

type progressReplayer struct {
	src acquire.Replayer
	p   *progress
}

// Replay counts the rows of the file as those of its furthest source: a
// file with several sources' columns gives each row to every source, as a
// block of each.
func (r progressReplayer) Replay(ctx context.Context, fn func(acquire.Block) error) error {
	rows := map[string]int{}
	most := 0
	return r.src.Replay(ctx, func(b acquire.Block) error {
		n := b.Len()
		rows[b.Source] += n
		r.p.add(max(rows[b.Source]-most, 0), n*len(b.Series))
		most = max(most, rows[b.Source])
		return fn(b)
	})
}
