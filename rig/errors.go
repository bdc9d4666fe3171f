package rig

import (
	"errors"
	"fmt"
	"strings"
)

// Sentinel errors. Every problem that Parse reports is an *Error whose chain
// ends in exactly one of these, so callers can sort problems with errors.Is.
var (
	// ErrSyntax is returned when the file is not valid TOML: an unclosed
	// string or bracket, a duplicate key, a value with no key. The position
	// comes from the TOML decoder.
	ErrSyntax = errors.New("rig: TOML syntax error")

	// ErrUnknownKey is returned when the file holds a key or table that the
	// rig format does not define, usually a typing slip ("capcity").
	ErrUnknownKey = errors.New("rig: unknown key")

	// ErrMissing is returned when a required key or table is absent, such as
	// a channel without a unit or a roof rig without taps.
	ErrMissing = errors.New("rig: missing key")

	// ErrUnit is returned when a unit is not known, or does not fit the
	// quantity it is used for ("kgs" for a force, "Pa" for a speed).
	ErrUnit = errors.New("rig: bad unit")

	// ErrValue is returned when a value has the wrong type, is out of its
	// allowed range (a capacity ≤ 0, a negative uncertainty, NaN), or is not
	// one of the allowed words (kind, fluid, quantity, source type).
	ErrValue = errors.New("rig: bad value")

	// ErrReference is returned when a name refers to a channel or zone that
	// the file does not define, or to one of the wrong quantity.
	ErrReference = errors.New("rig: bad reference")

	// ErrDuplicate is returned when two channels, sources, taps or zones
	// share a name, when a channel is read by two sources, or when two
	// serial sources claim the same port.
	ErrDuplicate = errors.New("rig: duplicate")
)

// Error is one problem in a rig file, with its position. Line and Col are
// 1-based; Line 0 means the problem has no single line (a top-level key that
// is missing), Col 0 means the column is not meaningful. Key is the TOML path
// of the offending key, with 0-based indices for arrays of tables, for
// example "channel[2].unit"; it is empty for syntax errors.
//
// Error prints as "rig.toml:14:3: channel \"n_fore\": unknown unit ..." and
// unwraps to one of the sentinels in this file.
type Error struct {
	File      string
	Line, Col int
	Key       string
	Err       error
}

func (e *Error) Error() string {
	file := e.File
	if file == "" {
		file = "<rig>"
	}
	msg := "<nil>"
	if e.Err != nil {
		msg = e.Err.Error()
	}
	switch {
	case e.Line <= 0:
		return fmt.Sprintf("%s: %s", file, msg)
	case e.Col <= 0:
		return fmt.Sprintf("%s:%d: %s", file, e.Line, msg)
	default:
		return fmt.Sprintf("%s:%d:%d: %s", file, e.Line, e.Col, msg)
	}
}

// Unwrap returns the wrapped error, whose chain holds the sentinel.
func (e *Error) Unwrap() error { return e.Err }

// Errors is every problem found in one rig file, sorted by line and column.
// It is never empty when returned as an error.
type Errors []*Error

// Error prints one problem per line, in file order, the way
// "liftyard check" shows them.
func (es Errors) Error() string {
	var b strings.Builder
	for i, e := range es {
		if i > 0 {
			b.WriteByte('\n')
		}
		b.WriteString(e.Error())
	}
	return b.String()
}

// Unwrap returns the problems, so errors.Is(err, ErrUnit) reports whether
// any of them is a unit problem and errors.As finds the first *Error.
func (es Errors) Unwrap() []error {
	out := make([]error, len(es))
	for i, e := range es {
		out[i] = e
	}
	return out
}

// problem is the message of one Error: text for the user, and the sentinel
// that classifies it. It prints the text only; the sentinel is for errors.Is.
type problem struct {
	msg  string
	kind error
}

func (p *problem) Error() string { return p.msg }
func (p *problem) Unwrap() error { return p.kind }

// newProblem formats a message and ties it to a sentinel.
func newProblem(kind error, format string, args ...any) error {
	return &problem{msg: fmt.Sprintf(format, args...), kind: kind}
}
