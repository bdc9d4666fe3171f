package main

import (
	"bytes"
	"flag"
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// Ensure that the dashboard token can come from a file or the environment
// (not only the command line, which the process list shows), that the flag
// wins, and that a token given for a loopback address is warned about
// rather than ignored in silence (issue 16).
func TestTokenFlags(t *testing.T) {
	file := filepath.Join(t.TempDir(), "token")
	require.NoError(t, os.WriteFile(file, []byte("0123456789abcdefXYZ\nsecond line\n"), 0o600))
	empty := filepath.Join(t.TempDir(), "empty")
	require.NoError(t, os.WriteFile(empty, []byte("\n"), 0o600))
	for _, tc := range []struct {
		name, env, addr string
		args            []string
		want, warn, err string
	}{
		{name: "flag", args: []string{"--token", "fromflag-0123456789"}, addr: "192.0.2.1:8470", want: "fromflag-0123456789"},
		{name: "file", args: []string{"--token-file", file}, addr: "192.0.2.1:8470", want: "0123456789abcdefXYZ"},
		{name: "environment", env: "fromenv-0123456789", addr: "192.0.2.1:8470", want: "fromenv-0123456789"},
		{name: "flag before environment", env: "fromenv-0123456789", args: []string{"--token", "fromflag-0123456789"}, addr: "192.0.2.1:8470", want: "fromflag-0123456789"},
		{name: "loopback warns", args: []string{"--token-file", file}, addr: "127.0.0.1:8470", want: "0123456789abcdefXYZ", warn: "not used on the loopback address"},
		{name: "empty file", args: []string{"--token-file", empty}, addr: "192.0.2.1:8470", err: "first line is empty"},
		{name: "missing file", args: []string{"--token-file", empty + ".x"}, addr: "192.0.2.1:8470", err: "--token-file"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Setenv(tokenEnv, tc.env)
			fs := flag.NewFlagSet("x", flag.ContinueOnError)
			fs.SetOutput(io.Discard)
			get := tokenFlags(fs)
			require.NoError(t, fs.Parse(tc.args))
			var stderr bytes.Buffer
			got, err := get(tc.addr, &stderr)
			if tc.err != "" {
				assert.ErrorContains(t, err, tc.err)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tc.want, got)
			if tc.warn != "" {
				assert.Contains(t, stderr.String(), tc.warn)
			} else {
				assert.Empty(t, stderr.String())
			}
		})
	}
}
