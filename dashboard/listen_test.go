package dashboard_test

import (
	"net"
	"testing"
)

// listen opens a loopback listener on a free port, closed at cleanup.
func listen(t *testing.T) net.Listener {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { ln.Close() })
	return ln
}
