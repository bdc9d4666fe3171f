package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os/exec"
	"slices"
	"strings"
	"testing"
)

// allowed lists, for each row of the layout, the rows its packages may import
// (DEVELOPERS.md, "The data flow and who owns what": a package imports only
// what lies upstream of it). A package
// belongs to the row with the longest matching path: acquire/serial,
// acquire/mqtt and acquire/sim are rows of their own, so a source may use
// acquire and rig but not a sibling source; cmd/liftyard is in "cmd" and
// internal/... in "internal". A package may always import within its own
// row. Only the packages' own files are checked: tests may use the
// simulator as a fake device, and the internal/... helpers, anywhere.
var allowed = map[string][]string{
	"rig":            {},
	"acquire":        {"rig"},
	"acquire/serial": {"rig", "acquire"},
	"acquire/mqtt":   {"rig", "acquire"},
	"acquire/sim":    {"rig", "acquire"},
	"calibrate":      {"rig", "acquire"},
	"estimate":       {"rig", "acquire", "calibrate"},
	"storage":        {"rig", "acquire", "calibrate", "estimate"},
	"process":        {"rig", "acquire", "acquire/serial", "acquire/mqtt", "acquire/sim", "calibrate", "estimate", "storage"},
	"report":         {"rig", "acquire", "calibrate", "estimate", "storage", "process"},
	"dashboard":      {"rig", "acquire", "calibrate", "estimate", "storage", "process", "report"},
	"cmd":            {"rig", "acquire", "acquire/serial", "acquire/mqtt", "acquire/sim", "calibrate", "estimate", "storage", "process", "report", "dashboard", "internal"},
	"internal":       {"rig", "acquire", "acquire/serial", "acquire/mqtt", "acquire/sim", "calibrate", "estimate", "storage", "process", "report", "dashboard"},
}

// forbiddenStd lists standard-library packages a row must not use; a rule
// for a row holds for the rows under it (acquire's for acquire/mqtt).
// estimate does no I/O; storage and the sources know no HTTP; process
// replays files and stored runs without a listener.
var forbiddenStd = map[string][]string{
	"estimate": {"os", "net", "net/http"},
	"storage":  {"net/http"},
	"acquire":  {"net/http"},
	"process":  {"net/http"},
}

// goPackage is what the layout check needs from `go list -json`.
type goPackage struct {
	ImportPath string
	Imports    []string
}

// rowOf returns the layout row of a liftyard import path: the longest key
// of allowed that is the path or a parent folder of it, or "" when no row
// holds it.
func rowOf(importPath string) string {
	rel, ok := strings.CutPrefix(importPath, "liftyard/")
	if !ok {
		return ""
	}
	best := ""
	for row := range allowed {
		if (rel == row || strings.HasPrefix(rel, row+"/")) && len(row) > len(best) {
			best = row
		}
	}
	return best
}

// layoutProblems returns one line per import that the table forbids, and
// per liftyard package that has no row.
func layoutProblems(pkgs []goPackage) []string {
	var out []string
	for _, p := range pkgs {
		row := rowOf(p.ImportPath)
		if row == "" {
			out = append(out, fmt.Sprintf("package %s is not in the layout table; add its row (no util/common/types packages)", p.ImportPath))
			continue
		}
		for _, imp := range p.Imports {
			if !strings.HasPrefix(imp, "liftyard/") {
				for r, bad := range forbiddenStd {
					if (row == r || strings.HasPrefix(row, r+"/")) && slices.Contains(bad, imp) {
						out = append(out, fmt.Sprintf("%s imports %s, which %s must not use", p.ImportPath, imp, r))
					}
				}
				continue
			}
			dep := rowOf(imp)
			if dep != row && !slices.Contains(allowed[row], dep) {
				out = append(out, fmt.Sprintf("%s imports %s: %s is not upstream of %s", p.ImportPath, imp, dep, row))
			}
		}
	}
	return out
}

// Ensure that no package imports a liftyard package downstream of it or a
// sibling source, and that estimate does no I/O and storage knows no HTTP.
func TestLayout_ImportsFlowDownstreamOnly(t *testing.T) {
	out, err := exec.Command("go", "list", "-json", "liftyard/...").Output()
	if err != nil {
		t.Fatalf("go list: %v", err)
	}
	dec := json.NewDecoder(bytes.NewReader(out))
	var pkgs []goPackage
	for dec.More() {
		var p goPackage
		if err := dec.Decode(&p); err != nil {
			t.Fatal(err)
		}
		pkgs = append(pkgs, p)
	}
	if len(pkgs) < 9 {
		t.Fatalf("only %d packages listed; go list found too little", len(pkgs))
	}
	for _, p := range layoutProblems(pkgs) {
		t.Error(p)
	}
}

// Ensure that the rules catch what they are for, on made-up packages: a
// sibling source, a consumer imported upstream, a package with no row, a
// forbidden standard package, and that allowed imports pass.
func TestLayout_Rules(t *testing.T) {
	for _, c := range []struct {
		name string
		pkg  goPackage
		want string // "" when allowed
	}{
		{"source uses acquire and rig", goPackage{"liftyard/acquire/sim", []string{"liftyard/acquire", "liftyard/rig", "math"}}, ""},
		{"sibling source", goPackage{"liftyard/acquire/sim", []string{"liftyard/acquire/serial"}}, "acquire/serial is not upstream of acquire/sim"},
		{"acquire uses a source", goPackage{"liftyard/acquire", []string{"liftyard/acquire/mqtt"}}, "acquire/mqtt is not upstream of acquire"},
		{"process uses sources and storage", goPackage{"liftyard/process", []string{"liftyard/acquire/mqtt", "liftyard/acquire/sim", "liftyard/storage", "os"}}, ""},
		{"process uses the dashboard", goPackage{"liftyard/process", []string{"liftyard/dashboard"}}, "dashboard is not upstream of process"},
		{"process serves HTTP", goPackage{"liftyard/process", []string{"net/http"}}, "which process must not use"},
		{"storage uses process", goPackage{"liftyard/storage", []string{"liftyard/process"}}, "process is not upstream of storage"},
		{"report and dashboard use process", goPackage{"liftyard/dashboard", []string{"liftyard/process", "liftyard/report"}}, ""},
		{"dashboard uses a source", goPackage{"liftyard/dashboard", []string{"liftyard/acquire/sim"}}, "acquire/sim is not upstream of dashboard"},
		{"a source serves HTTP", goPackage{"liftyard/acquire/mqtt", []string{"net/http"}}, "which acquire must not use"},
		{"subpackage of a source", goPackage{"liftyard/acquire/sim/wave", []string{"liftyard/acquire/sim", "liftyard/acquire"}}, ""},
		{"cmd uses everything", goPackage{"liftyard/cmd/liftyard", []string{"liftyard/acquire/serial", "liftyard/process", "liftyard/dashboard"}}, ""},
		{"no row", goPackage{"liftyard/common", nil}, "not in the layout table"},
		{"name that only starts like a row", goPackage{"liftyard/acquirex", nil}, "not in the layout table"},
	} {
		t.Run(c.name, func(t *testing.T) {
			got := layoutProblems([]goPackage{c.pkg})
			switch {
			case c.want == "" && len(got) > 0:
				t.Errorf("want no problem, got %q", got)
			case c.want != "" && (len(got) != 1 || !strings.Contains(got[0], c.want)):
				t.Errorf("got %q, want one problem containing %q", got, c.want)
			}
		})
	}
}

// Ensure that the table names only its own rows, and that no two rows may
// import each other (the layout has no cycle).
func TestLayout_TableConsistent(t *testing.T) {
	for row, deps := range allowed {
		for _, d := range deps {
			if _, ok := allowed[d]; !ok {
				t.Errorf("row %s lists %s, which is not a row", row, d)
			}
			if slices.Contains(allowed[d], row) {
				t.Errorf("rows %s and %s may import each other", row, d)
			}
		}
	}
	for r := range forbiddenStd {
		if _, ok := allowed[r]; !ok {
			t.Errorf("forbiddenStd names %s, which is not a row", r)
		}
	}
}
