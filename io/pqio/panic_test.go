package pqio

import (
	"errors"
	"runtime"
	"testing"

	"manyfold/internal/guard"
	"manyfold/io/table"
)

// TestColumnsPanicIsInternal: a panic while a column is written on a
// worker goroutine is a bug of ours, so it reaches the caller as an
// internal error (a *guard.Panic, exit 1), not as a failure to write the
// output (exit 5).
func TestColumnsPanicIsInternal(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(2))
	w := &writer{fields: make([]table.Field, 3)}
	err := w.columns(func(j int) error {
		if j == 1 {
			panic("column 1")
		}
		return nil
	})
	var p *guard.Panic
	if !errors.As(err, &p) {
		t.Fatalf("columns returned %v (%T), want a *guard.Panic", err, err)
	}
}
