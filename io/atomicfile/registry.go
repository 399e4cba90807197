package atomicfile

import (
	"errors"
	"os"
	"sync"
	"syscall"
	"time"
)

// The registry holds every temporary path this process has made and not
// yet moved into place or removed: temporary files, staged directories,
// an old directory moved aside, a spool of standard input. Cleanup removes
// them, for a run stopped by a signal or by a bug.
// unitMu is held while CommitAll moves its outputs into place, so that
// Cleanup, which takes it first, cannot stop a run between two of them.
var unitMu sync.Mutex

var registry struct {
	mu     sync.Mutex
	paths  map[string]bool
	closed bool // after Cleanup: new paths are removed at once
}

// Track records a temporary path for Cleanup. After Cleanup has run, path
// is removed at once and Track returns false.
func Track(path string) bool {
	registry.mu.Lock()
	defer registry.mu.Unlock()
	if registry.closed {
		os.RemoveAll(path)
		return false
	}
	trackLocked(path)
	return true
}

// Untrack forgets a path: it was moved into place or removed.
func Untrack(path string) {
	registry.mu.Lock()
	untrackLocked(path)
	registry.mu.Unlock()
}

// trackLocked and untrackLocked are Track and Untrack for a caller that
// holds the registry's lock (a function run by commitLock).
func trackLocked(path string) {
	if registry.paths == nil {
		registry.paths = map[string]bool{}
	}
	registry.paths[path] = true
}

func untrackLocked(path string) { delete(registry.paths, path) }

// Remove removes a tracked path and forgets it.
func Remove(path string) {
	os.RemoveAll(path)
	Untrack(path)
}

// Cleanup removes every tracked path, and any path tracked later. It waits
// for a commit in progress (a rename, a directory swap, or the moves of a
// CommitAll) to finish, so that what is in place is either the old set of
// outputs or the new one. A command
// stopped by a signal calls it before exiting; nothing can be committed
// after it.
func Cleanup() {
	unitMu.Lock()
	defer unitMu.Unlock()
	registry.mu.Lock()
	registry.closed = true
	paths := registry.paths
	registry.paths = nil
	registry.mu.Unlock()
	// Unlocked, so that a file made at this moment in a staging directory
	// is removed by Track at once (the registry is closed), and the
	// directory can then go.
	for p := range paths {
		removeAll(p)
	}
}

// removeAll removes path and what it holds, trying again for a while when
// a file made meanwhile (and removed by Track) kept a directory from going.
func removeAll(path string) {
	for range 50 {
		if err := os.RemoveAll(path); err == nil || !errors.Is(err, syscall.ENOTEMPTY) {
			return
		}
		time.Sleep(time.Millisecond)
	}
}

// RemoveTracked removes every tracked path now, as Cleanup does, but
// lets the process go on making new ones: for a command that returns after
// a panic, whose deferred aborts did not all run.
func RemoveTracked() {
	registry.mu.Lock()
	defer registry.mu.Unlock()
	for p := range registry.paths {
		os.RemoveAll(p)
	}
	registry.paths = nil
}

// Tracked returns the tracked paths, for tests.
func Tracked() []string {
	registry.mu.Lock()
	defer registry.mu.Unlock()
	var out []string
	for p := range registry.paths {
		out = append(out, p)
	}
	return out
}

// commitLock runs f, a move into place, so that Cleanup does not run
// during it (f must use trackLocked and untrackLocked); it reports errClosed without running f after Cleanup.
func commitLock(f func() error) error {
	registry.mu.Lock()
	defer registry.mu.Unlock()
	if registry.closed {
		return errClosed
	}
	return f()
}
