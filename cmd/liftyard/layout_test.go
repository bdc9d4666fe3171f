package main

import (
	"bytes"
	"encoding/json"
	"os/exec"
	"strings"
	"testing"
)

// allowed lists, for each liftyard package, the liftyard packages it may import
// (STYLE §1: a package imports only what lies upstream of it). Subpackages
// (acquire/mqtt, acquire/sim) belong to their parent's row; internal/... test
// helpers may be imported by tests anywhere.
var allowed = map[string][]string{
	"rig":       {},
	"acquire":   {"rig", "acquire"},
	"calibrate": {"rig", "acquire"},
	"estimate":  {"rig", "acquire", "calibrate"},
	"storage":   {"rig", "acquire", "calibrate", "estimate"},
	"process":   {"rig", "acquire", "calibrate", "estimate", "storage"},
	"report":    {"rig", "acquire", "calibrate", "estimate", "storage", "process"},
	"dashboard": {"rig", "acquire", "calibrate", "estimate", "storage", "process", "report"},
	"cmd":       {"rig", "acquire", "calibrate", "estimate", "storage", "process", "report", "dashboard"},
	"internal":  {"rig", "acquire", "calibrate", "estimate", "storage", "process", "report", "dashboard", "internal"},
}

// forbiddenStd lists standard-library packages a stage must not use.
var forbiddenStd = map[string][]string{
	"estimate": {"os", "net", "net/http"},
	"storage":  {"net/http"},
	"acquire":  {"net/http"},
}

// Ensure that no package imports a liftyard package downstream of it, and
// that estimate does no I/O and storage knows no HTTP (STYLE §1).
func TestLayout_ImportsFlowDownstreamOnly(t *testing.T) {
	out, err := exec.Command("go", "list", "-json", "liftyard/...").Output()
	if err != nil {
		t.Fatalf("go list: %v", err)
	}
	dec := json.NewDecoder(bytes.NewReader(out))
	checked := 0
	for dec.More() {
		var p struct {
			ImportPath string
			Imports    []string
		}
		if err := dec.Decode(&p); err != nil {
			t.Fatal(err)
		}
		self := strings.TrimPrefix(p.ImportPath, "liftyard/")
		top := strings.SplitN(self, "/", 2)[0]
		ok, known := allowed[top]
		if !known {
			t.Errorf("package %s is not in the layout table; add its row (no util/common/types packages)", p.ImportPath)
			continue
		}
		checked++
		for _, imp := range p.Imports {
			if !strings.HasPrefix(imp, "liftyard/") {
				for _, bad := range forbiddenStd[top] {
					if imp == bad {
						t.Errorf("%s imports %s, which %s must not use", p.ImportPath, imp, top)
					}
				}
				continue
			}
			dep := strings.SplitN(strings.TrimPrefix(imp, "liftyard/"), "/", 2)[0]
			if !contains(ok, dep) {
				t.Errorf("%s imports %s: %s is not upstream of %s", p.ImportPath, imp, dep, top)
			}
		}
	}
	if checked < 6 {
		t.Fatalf("only %d packages checked; go list found too little", checked)
	}
}

func contains(xs []string, x string) bool {
	for _, v := range xs {
		if v == x {
			return true
		}
	}
	return false
}
