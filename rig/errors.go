package rig

import (
	"errors"
	"fmt"
	"strings"
	"unicode/utf8"
)

// Sentinel errors of rig files. Every problem that Parse reports is an *Error whose chain
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

// Error is one problem at a place in an input file. It is the one positioned
// error of liftyard, here because rig lies upstream of every reader: rig
// files (Parse), raw CSV records (acquire.ReadRawCSV), calibration points
// files (calibrate.ReadPoints) and design curves (estimate.ParseDesignCurve)
// all report their problems as *Error, each wrapping its own sentinel, and
// cmd/liftyard answers any *Error with exit status 2 (bad input file).
//
// Error prints as "rig.toml:14:3: channel \"n_fore\": unknown unit ...":
// the file, then the line and column when known, then the message. With no
// File it prints "line 14: ..." (or the message alone when Line is 0), so a
// reader that does not know its file name can leave it to the caller, who
// sets File before showing the error.
type Error struct {
	// File names the file for the user, as the caller gave it; "" when the
	// reader was not told.
	File string
	// Line is 1-based; 0 means the problem has no single line (a missing
	// top-level key, an empty file).
	Line int
	// Col is the 1-based column where the problem starts on Line; 0 means it
	// is not known or not meaningful.
	Col int
	// LineOnly prints the position as file:line even when Col is set: the
	// points reader names the field in its message and keeps Col for
	// callers only.
	LineOnly bool
	// Key is what the problem is about: the TOML path of a rig key with
	// 0-based indices for arrays of tables ("channel[2].unit"), or a CSV
	// column name ("pitot"); "" for syntax errors and whole-file problems.
	// The message already names it: Key is for callers, not printed.
	Key string
	// Err is the message; its chain ends in the reader's sentinel (ErrUnit,
	// acquire.ErrRawCSV, ...), for errors.Is.
	Err error
}

func (e *Error) Error() string {
	msg := "<nil>"
	if e.Err != nil {
		msg = e.Err.Error()
	}
	var b strings.Builder
	switch {
	case e.File != "":
		b.WriteString(e.File)
		if e.Line > 0 {
			fmt.Fprintf(&b, ":%d", e.Line)
			if e.Col > 0 && !e.LineOnly {
				fmt.Fprintf(&b, ":%d", e.Col)
			}
		}
	case e.Line > 0:
		fmt.Fprintf(&b, "line %d", e.Line)
		if e.Col > 0 && !e.LineOnly {
			fmt.Fprintf(&b, ", column %d", e.Col)
		}
	default:
		return msg
	}
	b.WriteString(": ")
	b.WriteString(msg)
	return b.String()
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

// Problem returns the message of an Error: the formatted text, whose chain
// ends in kind. The text is printed without kind's own words, so a reader
// keeps its messages while errors.Is(err, kind) sorts them. Arguments
// quoted with %q are cut to an Excerpt: a message quotes what it is about,
// never a whole field of a hostile file.
func Problem(kind error, format string, args ...any) error {
	return &problem{msg: fmt.Sprintf(format, Excerpts(format, args...)...), kind: kind}
}

// ExcerptBytes is the most of an input field an error message quotes.
const ExcerptBytes = 80

// Excerpt returns s cut to ExcerptBytes bytes (at a character boundary)
// with "…" appended when it was longer.
func Excerpt(s string) string {
	if len(s) <= ExcerptBytes {
		return s
	}
	cut := ExcerptBytes
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return s[:cut] + "…"
}

// Excerpts returns args with every string (or []byte) that format quotes
// with %q cut to an Excerpt: the arguments of a message that echoes its
// input. Words of our own (%s, %v) are left whole.
func Excerpts(format string, args ...any) []any {
	out := args
	n := 0 // index of the argument the next verb takes
	for i := 0; i < len(format); i++ {
		if format[i] != '%' {
			continue
		}
		i++
		for i < len(format) && strings.IndexByte("+-# 0123456789.*", format[i]) >= 0 {
			if format[i] == '*' {
				n++
			}
			i++
		}
		if i >= len(format) || format[i] == '%' {
			continue
		}
		if format[i] == '[' { // explicit argument indexes: not used here
			return out
		}
		if format[i] == 'q' && n < len(args) {
			var s string
			switch x := args[n].(type) {
			case string:
				s = x
			case []byte:
				s = string(x)
			}
			if len(s) > ExcerptBytes {
				if &out[0] == &args[0] {
					out = append([]any(nil), args...)
				}
				out[n] = Excerpt(s)
			}
		}
		n++
	}
	return out
}
