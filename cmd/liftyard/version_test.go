package main

import (
	"regexp"
	"runtime/debug"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// Ensure that every verb's --help prints its help once, to stdout, exit 0,
// and spells every flag --name as the usage line does (issue 13).
func TestHelp_OnceWithDoubleDashFlags(t *testing.T) {
	singleDash := regexp.MustCompile(`(?m)^\s+-[a-z]`)
	for _, v := range verbs() {
		t.Run(v.name, func(t *testing.T) {
			code, out, errOut := runCLI(t, v.name, "--help")
			require.Equal(t, 0, code, errOut)
			assert.Empty(t, errOut)
			assert.Equal(t, 1, strings.Count(out, "Usage: liftyard "+v.name), "help printed once:\n%s", out)
			assert.NotRegexp(t, singleDash, out, "flags listed as --name")
			if strings.Contains(out, "Flags:\n  ") {
				assert.Regexp(t, `(?m)^  --[a-z]`, out)
			}
		})
	}
	// A bad flag is a usage error that names it as written and prints no help.
	code, out, errOut := runCLI(t, "runs", "--bogus")
	assert.Equal(t, 2, code)
	assert.Empty(t, out)
	assert.Contains(t, errOut, "unknown flag --bogus (see liftyard runs --help)")
}

// Ensure that `liftyard version` and `liftyard --version` print the module
// version, and the VCS revision when the build has one (issue 13).
func TestVersion(t *testing.T) {
	for _, args := range [][]string{{"version"}, {"--version"}} {
		code, out, errOut := runCLI(t, args...)
		require.Equal(t, 0, code, errOut)
		assert.Equal(t, "liftyard "+versionString()+"\n", out)
	}
	bi := &debug.BuildInfo{GoVersion: "go1.26.0", Main: debug.Module{Path: "liftyard", Version: "v0.13.0"},
		Settings: []debug.BuildSetting{{Key: "vcs.revision", Value: "0123456789abcdef0123"}, {Key: "vcs.time", Value: "2026-03-14T09:00:00Z"}, {Key: "vcs.modified", Value: "true"}}}
	assert.Equal(t, "v0.13.0 revision 0123456789ab+changes (2026-03-14T09:00:00Z), go1.26.0", versionOf(bi, true))
	assert.Equal(t, "(devel), go1.26.0", versionOf(&debug.BuildInfo{GoVersion: "go1.26.0"}, true))
	assert.Contains(t, versionOf(nil, false), "unknown")
}
