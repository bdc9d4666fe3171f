package estimate

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"time"
	"unicode"
)

// Mark is a steady segment set by hand: the operator knows the rig held
// still from Start to End (e.g. the carriage ran steady from 12.0 s to
// 15.5 s). Start and End are on the same clock as Segment.TStart and
// Segment.TEnd: UTC wall time, the timeline source's device clock mapped
// through acquire.Aligner (see Estimator.Add); both ends are
// included. Label is free text for the operator's own notes (at most
// MaxMarkLabel bytes, no control characters).
type Mark struct {
	Start time.Time `json:"start"`
	End   time.Time `json:"end"`
	Label string    `json:"label,omitempty"`
}

// MaxMarkLabel bounds a mark's label, in bytes.
const MaxMarkLabel = 200

// MaxMarks bounds the marks of one run: far more than the steps of any
// sweep, small enough that a mistaken script cannot fill the store.
const MaxMarks = 1000

// ErrMarks is wrapped by every error of CheckMarks (and so of NewEstimator
// when Config.Marks is bad).
var ErrMarks = errors.New("bad marks")

// CheckMarks checks a run's marks: each ends after it starts, has a label
// of at most MaxMarkLabel bytes without control characters, and starts
// after the previous one ended (marks are in time order and do not
// overlap). maxLen > 0 also bounds each mark's length. The error wraps
// ErrMarks and names the mark by its 1-based number.
func CheckMarks(marks []Mark, maxLen time.Duration) error {
	if len(marks) > MaxMarks {
		return fmt.Errorf("%w: %d marks, at most %d per run", ErrMarks, len(marks), MaxMarks)
	}
	for i, m := range marks {
		n := i + 1
		switch {
		case m.Start.IsZero() || m.End.IsZero():
			return fmt.Errorf("%w: mark %d has no start or no end time", ErrMarks, n)
		case !m.End.After(m.Start):
			return fmt.Errorf("%w: mark %d ends (%s) before or when it starts (%s)", ErrMarks, n,
				m.End.UTC().Format(time.RFC3339Nano), m.Start.UTC().Format(time.RFC3339Nano))
		case maxLen > 0 && m.End.Sub(m.Start) > maxLen:
			return fmt.Errorf("%w: mark %d lasts %s, longer than the %s a segment may hold (split it)", ErrMarks, n,
				m.End.Sub(m.Start), maxLen)
		case len(m.Label) > MaxMarkLabel:
			return fmt.Errorf("%w: mark %d label is %d bytes, at most %d", ErrMarks, n, len(m.Label), MaxMarkLabel)
		case strings.ContainsFunc(m.Label, unicode.IsControl):
			return fmt.Errorf("%w: mark %d label holds a control character", ErrMarks, n)
		}
		if i > 0 {
			p := marks[i-1]
			if m.Start.Before(p.Start) {
				return fmt.Errorf("%w: mark %d starts before mark %d: give marks in time order", ErrMarks, n, i)
			}
			if !m.Start.After(p.End) {
				return fmt.Errorf("%w: mark %d (from %s) overlaps mark %d (to %s)", ErrMarks, n,
					m.Start.UTC().Format(time.RFC3339Nano), i, p.End.UTC().Format(time.RFC3339Nano))
			}
		}
	}
	return nil
}

// markSpan is a mark in wall-clock microseconds, both ends included.
type markSpan struct {
	startUs, endUs int64
	used           bool // gave a segment
}

// newMarkSpans converts checked marks: a start inside a microsecond rounds
// up, an end rounds down, so no sample outside the mark is taken.
func newMarkSpans(marks []Mark) []markSpan {
	out := make([]markSpan, len(marks))
	for i, m := range marks {
		s := m.Start.UnixMicro()
		if m.Start.Sub(time.UnixMicro(s)) > 0 {
			s++
		}
		out[i] = markSpan{startUs: s, endUs: m.End.UnixMicro()}
	}
	return out
}

// marked reports whether user marks set the segments (Config.Marks).
func (e *Estimator) marked() bool { return e.spans != nil }

// markSample routes one joined sample to the segment of the mark that holds
// it. A sample past the open mark's end closes that mark's segment. A
// sample that goes back in time (a clock step) never reopens a closed mark.
func (e *Estimator) markSample(sm sample, out []Segment) []Segment {
	for e.markIdx < len(e.spans) && sm.tUs > e.spans[e.markIdx].endUs {
		out = e.closeMark(out)
	}
	if e.markIdx < len(e.spans) && sm.tUs >= e.spans[e.markIdx].startUs {
		if n := e.seg.len(); n == 0 || sm.tUs > e.seg.tUs[n-1] {
			e.seg.push(sm)
		}
	}
	return out
}

// closeMark reduces the open mark's samples into its segment (when there
// are at least two and Reduce can use them) and moves to the next mark.
func (e *Estimator) closeMark(out []Segment) []Segment {
	defer e.seg.reset()
	i := e.markIdx
	e.markIdx++
	if e.seg.len() < 2 {
		return out
	}
	seg, ok := e.reduceBuf(&e.seg)
	if !ok {
		return out
	}
	e.spans[i].used = true
	seg.Index = e.segments
	e.segments++
	return append(out, seg)
}

// flushMarks closes the open mark and every mark not yet reached.
func (e *Estimator) flushMarks(out []Segment) []Segment {
	for e.markIdx < len(e.spans) {
		out = e.closeMark(out)
	}
	return out
}

// UnusedMarks returns the marks (of Config.Marks, in order) that have given
// no segment so far: after Flush, those that held fewer than two samples
// with a usable q, i.e. lay outside the run or in a gap.
func (e *Estimator) UnusedMarks() []Mark {
	var out []Mark
	for i, s := range e.spans {
		if !s.used {
			out = append(out, e.cfg.Marks[i])
		}
	}
	return out
}

// MarkSeconds formats a mark relative to a run's first sample, for
// messages: "12.000–15.500 s".
func MarkSeconds(m Mark, t0 time.Time) string {
	s := func(t time.Time) string {
		v := t.Sub(t0).Seconds()
		return fmt.Sprintf("%.3f", math.Round(v*1000)/1000)
	}
	return s(m.Start) + "–" + s(m.End) + " s"
}
