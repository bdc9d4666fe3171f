package rig_test

import (
	"errors"
	"testing"

	"liftyard/rig"
)

// Ensure that an Error prints its position the way each reader's messages
// need: file:line:col for rig files, file:line for CSV readers, "line N"
// before the caller names the file, and the bare message for a whole file.
func TestError_Position(t *testing.T) {
	msg := rig.Problem(rig.ErrUnit, "channel %q: unknown unit %q", "n_fore", "kgs")
	for _, c := range []struct {
		name string
		err  rig.Error
		want string
	}{
		{"file line col", rig.Error{File: "rig.toml", Line: 14, Col: 3, Err: msg}, `rig.toml:14:3: channel "n_fore": unknown unit "kgs"`},
		{"file line", rig.Error{File: "raw.csv", Line: 4, Err: msg}, `raw.csv:4: channel "n_fore": unknown unit "kgs"`},
		{"file line, col kept quiet", rig.Error{File: "points.csv", Line: 7, Col: 4, LineOnly: true, Err: msg}, `points.csv:7: channel "n_fore": unknown unit "kgs"`},
		{"file only", rig.Error{File: "d.csv", Col: 2, Err: msg}, `d.csv: channel "n_fore": unknown unit "kgs"`},
		{"no file", rig.Error{Line: 2, Col: 3, LineOnly: true, Err: msg}, `line 2: channel "n_fore": unknown unit "kgs"`},
		{"no file, col", rig.Error{Line: 2, Col: 3, Err: msg}, `line 2, column 3: channel "n_fore": unknown unit "kgs"`},
		{"whole file, no name", rig.Error{Err: msg}, `channel "n_fore": unknown unit "kgs"`},
		{"nil message", rig.Error{File: "rig.toml", Line: 1}, `rig.toml:1: <nil>`},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := c.err.Error(); got != c.want {
				t.Errorf("got  %s\nwant %s", got, c.want)
			}
		})
	}
}

// Ensure that Problem's sentinel is reachable with errors.Is through an
// Error, and that its own words stay out of the message.
func TestProblem_Sentinel(t *testing.T) {
	kind := errors.New("bad thing")
	err := error(&rig.Error{File: "f.csv", Line: 3, Err: rig.Problem(kind, "cell %d", 2)})
	if !errors.Is(err, kind) || errors.Is(err, rig.ErrUnit) {
		t.Errorf("errors.Is(%v): want the given sentinel only", err)
	}
	if got, want := err.Error(), "f.csv:3: cell 2"; got != want {
		t.Errorf("got %q, want %q", got, want)
	}
	var re *rig.Error
	if !errors.As(err, &re) || re.Line != 3 {
		t.Errorf("errors.As: %v", re)
	}
}
