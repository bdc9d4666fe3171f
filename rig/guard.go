package rig

// Limits checked before a rig file reaches the TOML decoder: a rig file is
// a page or two of text, and a small file of deeply nested inline tables
// can otherwise make the decoder take gigabytes.
const (
	// MaxFileBytes is the largest rig file read (1 MiB: a roof with
	// thousands of taps is well under it).
	MaxFileBytes = 1 << 20
	// MaxNesting is the deepest nesting of arrays and inline tables
	// accepted (a rig file needs 3: a matrix row in an array).
	MaxNesting = 16
)

// guard refuses a rig file that is too large or nested too deeply, naming
// the line where the limit is passed. It skips strings and comments, so
// brackets inside them do not count.
func guard(file string, data []byte) error {
	if len(data) > MaxFileBytes {
		return &Error{File: file, Err: Problem(ErrSyntax, "file of %d bytes: a rig file may hold at most %d", len(data), MaxFileBytes)}
	}
	line, depth := 1, 0
	for i := 0; i < len(data); i++ {
		switch c := data[i]; c {
		case '\n':
			line++
		case '#':
			for i < len(data) && data[i] != '\n' {
				i++
			}
			i-- // the newline is counted by the loop
		case '"', '\'':
			q := []byte{c}
			if i+2 < len(data) && data[i+1] == c && data[i+2] == c {
				q = []byte{c, c, c}
			}
			i += len(q)
			for i < len(data) {
				if data[i] == '\n' {
					line++
				}
				if c == '"' && data[i] == '\\' {
					i += 2
					continue
				}
				if data[i] == c && (len(q) == 1 || (i+2 < len(data) && data[i+1] == c && data[i+2] == c)) {
					i += len(q) - 1
					break
				}
				if len(q) == 1 && data[i] == '\n' {
					break // an unterminated one-line string: the decoder says so
				}
				i++
			}
		case '[', '{':
			if depth++; depth > MaxNesting {
				return &Error{File: file, Line: line, Err: Problem(ErrSyntax, "arrays and inline tables nested %d deep: a rig file may nest at most %d", depth, MaxNesting)}
			}
		case ']', '}':
			if depth > 0 {
				depth--
			}
		}
	}
	return nil
}
