//go:build !unix

package pipeline

import "os"

// openNoFollow opens path for reading; the caller checks with Lstat before
// and Stat after that it opened the regular file it meant to.
func openNoFollow(path string) (*os.File, error) { return os.Open(path) }
