package rig

import (
	"strconv"
	"strings"
)

// position is a 1-based line and column in the rig file.
type position struct{ line, col int }

// lineIndex maps TOML paths ("channel[2].unit", "lift.normal[1]",
// "conditions") to where they are written. BurntSushi/toml keeps key
// positions private, so the index comes from a small scan of the text. The
// scan runs only on text that the decoder has already accepted as TOML, so
// it can be lenient; it still never panics and always makes progress.
type lineIndex struct {
	pos map[string]position
	aot map[string]int // array-of-tables path → elements seen so far
}

// at returns where path is written, or where its nearest recorded parent is,
// or the zero position when nothing of it is in the file.
func (x *lineIndex) at(path string) position {
	if x == nil {
		return position{}
	}
	for path != "" {
		if p, ok := x.pos[path]; ok {
			return p
		}
		path = parentPath(path)
	}
	return position{}
}

// parentPath strips the last segment: "a[1].b" → "a[1]", "a[1]" → "a",
// "a" → "".
func parentPath(p string) string {
	if strings.HasSuffix(p, "]") {
		if i := strings.LastIndexByte(p, '['); i > 0 {
			return p[:i]
		}
	}
	if i := strings.LastIndexByte(p, '.'); i >= 0 {
		return p[:i]
	}
	return ""
}

func joinPath(prefix, key string) string {
	if prefix == "" {
		return key
	}
	return prefix + "." + key
}

func indexPath(p string, i int) string { return p + "[" + strconv.Itoa(i) + "]" }

// buildIndex scans TOML text.
func buildIndex(text string) *lineIndex {
	s := &scanner{src: text, line: 1, col: 1, x: &lineIndex{pos: map[string]position{}, aot: map[string]int{}}}
	s.document()
	return s.x
}

type scanner struct {
	src       string
	i         int
	line, col int
	x         *lineIndex
	steps     int
}

// maxSteps bounds the scan: each step consumes input, so this is only a
// guard against a bug turning into a hang on hostile input.
const maxStepsPerByte = 8

func (s *scanner) ok() bool {
	s.steps++
	return s.i < len(s.src) && s.steps < maxStepsPerByte*len(s.src)+64
}

func (s *scanner) peek() byte {
	if s.i < len(s.src) {
		return s.src[s.i]
	}
	return 0
}

func (s *scanner) hasPrefix(p string) bool { return strings.HasPrefix(s.src[s.i:], p) }

func (s *scanner) advance(n int) {
	for k := 0; k < n && s.i < len(s.src); k++ {
		c := s.src[s.i]
		s.i++
		switch {
		case c == '\n':
			s.line++
			s.col = 1
		case c&0xC0 != 0x80: // count runes, not UTF-8 continuation bytes
			s.col++
		}
	}
}

func (s *scanner) record(path string, p position) {
	if path == "" {
		return
	}
	if _, seen := s.x.pos[path]; !seen {
		s.x.pos[path] = p
	}
}

func (s *scanner) here() position { return position{s.line, s.col} }

// skipSpace skips blanks, and with nl also newlines and comments.
func (s *scanner) skipSpace(nl bool) {
	for s.ok() {
		switch c := s.peek(); {
		case c == ' ' || c == '\t' || c == '\r':
			s.advance(1)
		case c == '#':
			for s.ok() && s.peek() != '\n' {
				s.advance(1)
			}
		case c == '\n' && nl:
			s.advance(1)
		default:
			return
		}
	}
}

func (s *scanner) document() {
	prefix := ""
	for s.ok() {
		s.skipSpace(true)
		if !s.ok() {
			return
		}
		if s.peek() == '[' {
			prefix = s.header()
			continue
		}
		start := s.here()
		keys := s.keyPath()
		if len(keys) == 0 {
			s.skipLine()
			continue
		}
		path := s.recordKeys(prefix, keys, start)
		s.skipSpace(false)
		if s.peek() != '=' {
			s.skipLine()
			continue
		}
		s.advance(1)
		s.value(path)
		s.skipLine()
	}
}

// recordKeys records a dotted key and its intermediate tables.
func (s *scanner) recordKeys(prefix string, keys []string, at position) string {
	path := prefix
	for _, k := range keys {
		path = joinPath(path, k)
		s.record(path, at)
	}
	return path
}

func (s *scanner) skipLine() {
	for s.ok() && s.peek() != '\n' {
		s.advance(1)
	}
}

// header reads [a.b] or [[a.b]] and returns the resolved table path.
func (s *scanner) header() string {
	start := s.here()
	aot := s.hasPrefix("[[")
	if aot {
		s.advance(2)
	} else {
		s.advance(1)
	}
	s.skipSpace(false)
	keys := s.keyPath()
	path := ""
	for j, k := range keys {
		path = joinPath(path, k)
		if j < len(keys)-1 {
			if n, isAOT := s.x.aot[path]; isAOT && n > 0 {
				path = indexPath(path, n-1)
			}
		}
	}
	if aot {
		n := s.x.aot[path]
		s.x.aot[path] = n + 1
		s.record(path, start)
		path = indexPath(path, n)
	}
	s.record(path, start)
	s.skipLine()
	return path
}

// keyPath reads a dotted key made of bare and quoted parts.
func (s *scanner) keyPath() []string {
	var keys []string
	for s.ok() {
		s.skipSpace(false)
		var k string
		switch c := s.peek(); {
		case c == '"' || c == '\'':
			k = s.quoted()
		case isBare(c):
			st := s.i
			for s.ok() && isBare(s.peek()) {
				s.advance(1)
			}
			k = s.src[st:s.i]
		default:
			return keys
		}
		keys = append(keys, k)
		s.skipSpace(false)
		if s.peek() != '.' {
			return keys
		}
		s.advance(1)
	}
	return keys
}

func isBare(c byte) bool {
	return c >= 'A' && c <= 'Z' || c >= 'a' && c <= 'z' || c >= '0' && c <= '9' || c == '_' || c == '-'
}

// quoted reads a one-line quoted key and returns its raw inside.
func (s *scanner) quoted() string {
	q := s.peek()
	s.advance(1)
	st := s.i
	for s.ok() && s.peek() != q && s.peek() != '\n' {
		if q == '"' && s.peek() == '\\' {
			s.advance(1)
		}
		s.advance(1)
	}
	k := s.src[st:min(s.i, len(s.src))]
	if q == '"' {
		if u, err := strconv.Unquote(`"` + k + `"`); err == nil {
			k = u
		}
	}
	s.advance(1)
	return k
}

// value reads one value and records the positions of what it holds.
func (s *scanner) value(path string) {
	s.skipSpace(false)
	s.record(path, s.here())
	switch c := s.peek(); {
	case c == '{':
		s.advance(1)
		for s.ok() {
			s.skipSpace(true)
			if s.peek() == '}' {
				s.advance(1)
				return
			}
			if s.peek() == ',' {
				s.advance(1)
				continue
			}
			start := s.here()
			keys := s.keyPath()
			if len(keys) == 0 {
				s.advance(1)
				continue
			}
			p := s.recordKeys(path, keys, start)
			s.skipSpace(false)
			if s.peek() == '=' {
				s.advance(1)
				s.value(p)
			}
		}
	case c == '[':
		s.advance(1)
		for n := 0; s.ok(); {
			s.skipSpace(true)
			switch s.peek() {
			case ']':
				s.advance(1)
				return
			case ',':
				s.advance(1)
				continue
			}
			before := s.i
			s.value(indexPath(path, n))
			n++
			if s.i == before {
				s.advance(1)
			}
		}
	case c == '"' || c == '\'':
		s.str()
	default:
		for s.ok() {
			switch s.peek() {
			case ',', ']', '}', '#', '\n':
				return
			}
			s.advance(1)
		}
	}
}

// str skips a basic, literal or multi-line string.
func (s *scanner) str() {
	q := s.peek()
	triple := strings.Repeat(string(q), 3)
	if s.hasPrefix(triple) {
		s.advance(3)
		for s.ok() && !s.hasPrefix(triple) {
			if q == '"' && s.peek() == '\\' {
				s.advance(1)
			}
			s.advance(1)
		}
		s.advance(3)
		for s.ok() && s.peek() == q { // up to two quotes may close the content
			s.advance(1)
		}
		return
	}
	s.advance(1)
	for s.ok() && s.peek() != q && s.peek() != '\n' {
		if q == '"' && s.peek() == '\\' {
			s.advance(1)
		}
		s.advance(1)
	}
	s.advance(1)
}
