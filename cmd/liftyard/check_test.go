package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// Ensure that `check` warns (and still passes) when a roof's tributary
// areas do not add up to its reference area (issue 11).
func TestCheck_TributaryAreas(t *testing.T) {
	text, err := os.ReadFile("../../testdata/rigs/roof-yard.toml")
	require.NoError(t, err)
	dir := t.TempDir()
	for _, tc := range []struct {
		name, text, want string
	}{
		{"adds up", string(text), ""},
		{"one tap short", strings.Replace(string(text), "area_m2   = 6.0", "area_m2   = 7.5", 1), "add up to 6 m², the reference area is 7.5 m² (-20.0 %)"},
	} {
		path := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-")+".toml")
		require.NoError(t, os.WriteFile(path, []byte(tc.text), 0o644))
		var out, errb bytes.Buffer
		require.Equal(t, 0, run(t.Context(), []string{"check", path}, &out, &errb), "%s: %s", tc.name, errb.String())
		if tc.want == "" {
			assert.NotContains(t, out.String(), "warning", tc.name)
		} else {
			assert.Contains(t, out.String(), tc.want, tc.name)
		}
	}
}
