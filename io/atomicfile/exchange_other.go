//go:build !linux

package atomicfile

import "errors"

// exchangeDirs is not available here: Dir.Commit renames the old directory
// aside instead.
func exchangeDirs(a, b string) error { return errors.New("no atomic exchange") }
