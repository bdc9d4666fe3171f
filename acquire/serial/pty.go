package serial

import (
	"fmt"
	"os"

	"github.com/creack/pty"
	"golang.org/x/sys/unix"
)

// OpenPTY opens a pseudo-terminal pair for a dry run without hardware. It
// returns the device side (master: write frames here) and the path of the
// port side (slavePath, e.g. /dev/pts/3: give it to a Source). Closing the
// master is an unplug: the port side then reads PortClosed.
//
// The master is non-blocking, so deadlines work on it and Close releases a
// goroutine blocked in Read or Write (creack/pty hands out a blocking fd,
// on which neither holds). The port side is set to raw mode before it is
// closed here, so bytes written early are neither echoed nor edited.
func OpenPTY() (master *os.File, slavePath string, err error) {
	m, tty, err := pty.Open()
	if err != nil {
		return nil, "", fmt.Errorf("open pseudo-terminal: %w", err)
	}
	slavePath = tty.Name()
	rawErr := makeRaw(int(tty.Fd()))
	tty.Close()
	if rawErr != nil {
		m.Close()
		return nil, "", fmt.Errorf("pseudo-terminal %s: raw mode: %w", slavePath, rawErr)
	}
	fd, err := unix.Dup(int(m.Fd()))
	m.Close()
	if err != nil {
		return nil, "", fmt.Errorf("pseudo-terminal: dup master: %w", err)
	}
	if err := unix.SetNonblock(fd, true); err != nil {
		unix.Close(fd)
		return nil, "", fmt.Errorf("pseudo-terminal: non-blocking master: %w", err)
	}
	return os.NewFile(uintptr(fd), "/dev/ptmx"), slavePath, nil
}

// makeRaw puts a terminal in raw mode, as cfmakeraw(3) does.
func makeRaw(fd int) error {
	t, err := unix.IoctlGetTermios(fd, unix.TCGETS)
	if err != nil {
		return err
	}
	t.Iflag &^= unix.IGNBRK | unix.BRKINT | unix.PARMRK | unix.ISTRIP | unix.INLCR | unix.IGNCR | unix.ICRNL | unix.IXON
	t.Oflag &^= unix.OPOST
	t.Lflag &^= unix.ECHO | unix.ECHONL | unix.ICANON | unix.ISIG | unix.IEXTEN
	t.Cflag &^= unix.CSIZE | unix.PARENB
	t.Cflag |= unix.CS8
	t.Cc[unix.VMIN], t.Cc[unix.VTIME] = 1, 0
	return unix.IoctlSetTermios(fd, unix.TCSETS, t)
}
