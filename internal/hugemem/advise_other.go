//go:build !linux

package hugemem

func supported() bool { return false }

func advise(b []byte) {}

func systemMemory() (avail int64, strict bool) { return -1, false }
