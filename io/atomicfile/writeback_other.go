//go:build !linux

package atomicfile

import "os"

// startWriteback does nothing where the system has no way to start
// write-back without waiting; Commit's sync writes the whole file.
func startWriteback(f *os.File, off, n int64) {}
