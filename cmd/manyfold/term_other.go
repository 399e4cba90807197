//go:build !linux

package main

import "os"

// isTerminal reports whether f is a character device, the closest test
// without the terminal's ioctl.
func isTerminal(f *os.File) bool {
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// terminalWidth returns 0: the width is not known.
func terminalWidth(*os.File) int { return 0 }
