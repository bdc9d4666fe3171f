package rig_test

import (
	"errors"
	"strings"
	"testing"

	"liftyard/rig"
)

// Ensure that a rig file nested too deeply or too large is refused before
// the TOML decoder sees it (issue 16: a 25 kB file of nested inline tables
// took 1.6 GB), at the line where the limit is passed, while brackets in
// strings and comments do not count.
func TestParse_Guard(t *testing.T) {
	deep := "name = \"x\"\n" + "a = " + strings.Repeat("{b = ", 2000) + "1" + strings.Repeat("}", 2000) + "\n"
	deepArr := "name = \"x\"\n\n" + "a = " + strings.Repeat("[", 5000) + strings.Repeat("]", 5000) + "\n"
	for _, tc := range []struct {
		name, text, want string
		line             int
	}{
		{"nested inline tables", deep, "nested 17 deep", 2},
		{"nested arrays", deepArr, "nested 17 deep", 3},
		{"too large", "name = \"" + strings.Repeat("x", rig.MaxFileBytes) + "\"\n", "at most 1048576", 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := rig.Parse("g.toml", []byte(tc.text))
			var re *rig.Error
			if !errors.As(err, &re) || !errors.Is(err, rig.ErrSyntax) {
				t.Fatalf("error %v: want a *rig.Error wrapping ErrSyntax", err)
			}
			if re.Line != tc.line || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %q at line %d, want %q at line %d", err, re.Line, tc.want, tc.line)
			}
		})
	}
	// Brackets inside strings and comments are not nesting: the file
	// reaches the decoder (and fails there for its missing tables, not
	// for depth).
	text := "name = \"" + strings.Repeat("[{", 40) + "\" # " + strings.Repeat("[", 40) + "\nnote = '''\n" + strings.Repeat("{", 40) + "\n'''\n"
	_, err := rig.Parse("ok.toml", []byte(text))
	if err != nil && strings.Contains(err.Error(), "nested") {
		t.Errorf("brackets in strings or comments counted: %v", err)
	}
}
