package mosquittotest_test

import (
	"net"
	"os"
	"strings"
	"testing"
	"time"

	"liftyard/internal/mosquittotest"
)

// dialable reports whether something accepts TCP connections on addr.
func dialable(addr string) bool {
	c, err := net.DialTimeout("tcp", addr, 500*time.Millisecond)
	if err != nil {
		return false
	}
	c.Close()
	return true
}

// Ensure that the broker listens on loopback, stops, restarts on the same
// port, and dies on Kill.
func TestStart_StopRestartKill(t *testing.T) {
	b := mosquittotest.Start(t)
	if !strings.HasPrefix(b.URL(), "tcp://127.0.0.1:") {
		t.Fatalf("URL %q is not on 127.0.0.1", b.URL())
	}
	if !dialable(b.Addr()) || !b.Running() {
		t.Fatal("broker does not accept after Start")
	}
	addr := b.Addr()
	b.Stop()
	if dialable(addr) || b.Running() {
		t.Fatal("broker still accepts after Stop")
	}
	b.Restart()
	if b.Addr() != addr || !dialable(addr) {
		t.Fatalf("broker did not come back on %s", addr)
	}
	b.Kill()
	if dialable(addr) {
		t.Fatal("broker still accepts after Kill")
	}
	b.Stop() // stopping a stopped broker does nothing
}

// Ensure that Binary finds the Debian package's broker where it installs it.
func TestBinary(t *testing.T) {
	p := mosquittotest.Binary()
	if p == "" {
		if testing.Short() {
			t.Skip(mosquittotest.InstallHint)
		}
		t.Fatal(mosquittotest.InstallHint)
	}
	if st, err := os.Stat(p); err != nil || st.Mode()&0o111 == 0 {
		t.Fatalf("%s is not an executable: %v", p, err)
	}
}
