package main

import (
	"context"
	"fmt"
	"io"
	"runtime/debug"
	"strings"
)

// versionString names this build: the module version and, when the binary
// was built from a git checkout, the VCS revision (12 digits, "+changes"
// when the tree was modified) and its commit time, from
// runtime/debug.ReadBuildInfo. A test binary or `go run` has no module
// version: it reads "(devel)".
func versionString() string {
	bi, ok := debug.ReadBuildInfo()
	return versionOf(bi, ok)
}

// versionOf is versionString for given build information.
func versionOf(bi *debug.BuildInfo, ok bool) string {
	if !ok || bi == nil {
		return "unknown (no build information)"
	}
	v := bi.Main.Version
	if v == "" {
		v = "(devel)"
	}
	var rev, at string
	dirty := false
	for _, s := range bi.Settings {
		switch s.Key {
		case "vcs.revision":
			rev = s.Value
		case "vcs.time":
			at = s.Value
		case "vcs.modified":
			dirty = s.Value == "true"
		}
	}
	var b strings.Builder
	b.WriteString(v)
	if rev != "" {
		if len(rev) > 12 {
			rev = rev[:12]
		}
		fmt.Fprintf(&b, " revision %s", rev)
		if dirty {
			b.WriteString("+changes")
		}
		if at != "" {
			fmt.Fprintf(&b, " (%s)", at)
		}
	}
	fmt.Fprintf(&b, ", %s", bi.GoVersion)
	return b.String()
}

// version is the liftyard version printed in reports and by `liftyard
// version`.
var version = versionString()

// runVersion is `liftyard version` (also `liftyard --version`).
func runVersion(_ context.Context, args []string, stdout, _ io.Writer) error {
	fs := newFlags("version", "", "print the module version and VCS revision of this build", stdout)
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q", pos[0])
	}
	fmt.Fprintf(stdout, "liftyard %s\n", version)
	return nil
}
