//go:build !unix

package storage

import "errors"

// FreeBytes is not known on this system: the free-space warning is off
// (WriterState.FreeKnown stays false).
func FreeBytes(dir string) (uint64, error) {
	return 0, errors.New("free space: not known on this system")
}
