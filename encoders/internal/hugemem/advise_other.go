//go:build !linux

package hugemem

func supported() bool { return false }

func advise(b []byte) {}
