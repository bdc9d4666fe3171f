// Package mosquittotest runs Debian's mosquitto broker for integration
// tests: on a free 127.0.0.1 port, with a config file in the test's temp
// directory, stopped by its PID when the test ends.
//
// If mosquitto is not installed the test fails with the install command
// (a skipped broker test would be a green run that tested nothing); only
// under -short is it skipped.
package mosquittotest

import (
	"fmt"
	"net"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
)

// InstallHint is the message of a test that needs mosquitto and cannot find it.
const InstallHint = "install mosquitto: apt-get install -y mosquitto"

// startWait bounds the wait for a started broker to accept connections.
const startWait = 5 * time.Second

// Option changes the broker configuration.
type Option func(*config)

type config struct {
	persistent bool
	lines      []string
}

// Persistent keeps sessions and queued messages across Stop/Restart
// (persistence true, in the test's temp directory).
func Persistent() Option { return func(c *config) { c.persistent = true } }

// Config adds lines to mosquitto.conf after the listener line, so
// per-listener settings (cafile, certfile, keyfile) apply to it, e.g.
// "allow_anonymous false", "password_file /path".
// Without such a line the broker admits anonymous clients.
func Config(lines ...string) Option { return func(c *config) { c.lines = append(c.lines, lines...) } }

// Broker is one mosquitto process on 127.0.0.1.
type Broker struct {
	tb   testing.TB
	bin  string
	conf string
	log  string
	port int

	mu     sync.Mutex
	cmd    *exec.Cmd  // nil while stopped
	exited chan error // receives cmd.Wait()'s result
}

// Binary returns the path of mosquitto, looking in PATH and /usr/sbin, or
// "" if it is not installed.
func Binary() string {
	if p, err := exec.LookPath("mosquitto"); err == nil {
		return p
	}
	for _, p := range []string{"/usr/sbin/mosquitto", "/usr/local/sbin/mosquitto"} {
		if st, err := os.Stat(p); err == nil && !st.IsDir() && st.Mode()&0o111 != 0 {
			return p
		}
	}
	return ""
}

// Start starts mosquitto on a free 127.0.0.1 port and waits until it
// accepts connections. The broker is stopped when the test ends; its log is
// printed if the test failed.
func Start(tb testing.TB, opts ...Option) *Broker {
	tb.Helper()
	bin := Binary()
	if bin == "" {
		if testing.Short() {
			tb.Skip("mosquitto not installed; skipped under -short (" + InstallHint + ")")
		}
		tb.Fatal(InstallHint)
	}
	var c config
	for _, o := range opts {
		o(&c)
	}
	dir := tb.TempDir()
	b := &Broker{tb: tb, bin: bin, conf: filepath.Join(dir, "mosquitto.conf"), log: filepath.Join(dir, "mosquitto.log"), port: freePort(tb)}
	var conf strings.Builder
	fmt.Fprintf(&conf, "listener %d 127.0.0.1\n", b.port)
	anon := true
	for _, l := range c.lines {
		if strings.HasPrefix(strings.TrimSpace(l), "allow_anonymous") {
			anon = false
		}
	}
	if anon {
		conf.WriteString("allow_anonymous true\n")
	}
	for _, l := range c.lines {
		conf.WriteString(l + "\n")
	}
	if c.persistent {
		fmt.Fprintf(&conf, "persistence true\npersistence_location %s/\n", dir)
	} else {
		conf.WriteString("persistence false\n")
	}
	// Run as whoever runs the test: started as root, mosquitto would
	// otherwise switch to the "mosquitto" user, who cannot read the
	// test's temp directory.
	if u, err := user.Current(); err == nil {
		fmt.Fprintf(&conf, "user %s\n", u.Username)
	}
	fmt.Fprintf(&conf, "log_dest file %s\nlog_type all\n", b.log)
	if err := os.WriteFile(b.conf, []byte(conf.String()), 0o600); err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() {
		b.Stop()
		if tb.Failed() {
			if data, err := os.ReadFile(b.log); err == nil {
				tb.Logf("mosquitto log:\n%s", data)
			}
		}
	})
	b.start()
	return b
}

func freePort(tb testing.TB) int {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		tb.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// URL returns tcp://127.0.0.1:PORT (for a TLS listener, replace the scheme
// with ssl://).
func (b *Broker) URL() string { return "tcp://" + b.Addr() }

// Addr returns 127.0.0.1:PORT.
func (b *Broker) Addr() string { return net.JoinHostPort("127.0.0.1", strconv.Itoa(b.port)) }

// start runs mosquitto and waits until it accepts, or fails the test.
func (b *Broker) start() {
	b.tb.Helper()
	b.mu.Lock()
	defer b.mu.Unlock()
	if b.cmd != nil {
		return
	}
	cmd := exec.Command(b.bin, "-c", b.conf)
	if err := cmd.Start(); err != nil {
		b.tb.Fatalf("start mosquitto: %v", err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	deadline := time.Now().Add(startWait)
	for {
		select {
		case err := <-exited:
			data, _ := os.ReadFile(b.log)
			b.tb.Fatalf("mosquitto exited at start (%v); config %s; log:\n%s", err, b.conf, data)
		default:
		}
		c, err := net.DialTimeout("tcp", b.Addr(), 200*time.Millisecond)
		if err == nil {
			c.Close()
			break
		}
		if time.Now().After(deadline) {
			_ = cmd.Process.Kill()
			<-exited
			b.tb.Fatalf("mosquitto did not accept on %s within %s: %v", b.Addr(), startWait, err)
		}
		time.Sleep(20 * time.Millisecond)
	}
	b.cmd = cmd
	b.exited = exited
}

// Stop ends the broker with SIGTERM (mosquitto saves persistent sessions
// then) and waits for it, killing it after 5 s. Stopping a stopped broker
// does nothing.
func (b *Broker) Stop() { b.halt(syscall.SIGTERM) }

// Kill ends the broker with SIGKILL, as a crash or power cut would: nothing
// is saved.
func (b *Broker) Kill() { b.halt(syscall.SIGKILL) }

func (b *Broker) halt(sig syscall.Signal) {
	b.mu.Lock()
	defer b.mu.Unlock()
	if b.cmd == nil {
		return
	}
	_ = b.cmd.Process.Signal(sig)
	select {
	case <-b.exited:
	case <-time.After(5 * time.Second):
		_ = b.cmd.Process.Kill()
		<-b.exited
	}
	b.cmd, b.exited = nil, nil
}

// Restart stops the broker (if it runs) and starts it again on the same port.
func (b *Broker) Restart() {
	b.tb.Helper()
	b.Stop()
	b.start()
}

// Running reports whether the broker process is up.
func (b *Broker) Running() bool {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.cmd != nil
}
