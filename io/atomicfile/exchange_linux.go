package atomicfile

import "golang.org/x/sys/unix"

// exchangeDirs swaps the directories a and b at once (renameat2 with
// RENAME_EXCHANGE); it fails on file systems and kernels without it.
func exchangeDirs(a, b string) error {
	return unix.Renameat2(unix.AT_FDCWD, a, unix.AT_FDCWD, b, unix.RENAME_EXCHANGE)
}
