//go:build unix

package storage

import (
	"fmt"
	"syscall"
)

// FreeBytes returns the space an unprivileged program may still write on
// the file system holding dir (statfs: available blocks × block size).
func FreeBytes(dir string) (uint64, error) {
	var st syscall.Statfs_t
	if err := syscall.Statfs(dir, &st); err != nil {
		return 0, fmt.Errorf("free space of %s: %w", dir, err)
	}
	return uint64(st.Bavail) * uint64(st.Bsize), nil
}
