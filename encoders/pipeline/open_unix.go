//go:build unix

package pipeline

import (
	"os"
	"syscall"
)

// openNoFollow opens path for reading without following a symbolic link
// in its last element, and without waiting for a writer if it is a FIFO.
func openNoFollow(path string) (*os.File, error) {
	return os.OpenFile(path, os.O_RDONLY|syscall.O_NOFOLLOW|syscall.O_NONBLOCK, 0)
}
