package atomicfile

import (
	"os"
	"syscall"
)

// syncFileRangeWrite is SYNC_FILE_RANGE_WRITE from linux/fs.h: start
// write-back of the range's dirty pages without waiting for it.
const syncFileRangeWrite = 2

// startWriteback asks the kernel to start writing n bytes of f from off to
// disk. It is a hint: an error (a file system that does not support it)
// changes nothing, as Commit's fsync still makes the file durable.
func startWriteback(f *os.File, off, n int64) {
	rc, err := f.SyscallConn()
	if err != nil {
		return
	}
	rc.Control(func(fd uintptr) {
		syscall.Syscall6(syscall.SYS_SYNC_FILE_RANGE, fd, uintptr(off), uintptr(n), syncFileRangeWrite, 0, 0)
	})
}
