// Package guard turns a panic into an error, so that a bug ends a run with
// one line and exit code 1 rather than a crash, including a panic on a
// worker goroutine, which a recover at the top of the command could not
// catch.
//
// A goroutine started with Group.Go hands its panic to Wait, which panics
// again on the caller's goroutine with the same *Panic; Catch, deferred,
// turns a panic into an error return; Go starts a goroutine that nobody
// waits for, whose panic is kept for Err.
package guard

import (
	"fmt"
	"runtime/debug"
	"sync"
)

// Panic is a recovered panic: its value and the stack of the goroutine
// that panicked.
type Panic struct {
	Value any
	Stack []byte
}

// Error says that a bug was met and how to report it.
func (p *Panic) Error() string {
	return fmt.Sprintf("internal error: %v; please report it with the command line", p.Value)
}

// Unwrap returns the panic's value when it is an error.
func (p *Panic) Unwrap() error {
	err, _ := p.Value.(error)
	return err
}

// From makes a *Panic of a value recover returned, keeping the stack of
// a *Panic carried from another goroutine. It must be called in the
// deferred function that recovered, for the stack to be the panic's.
func From(v any) *Panic {
	if p, ok := v.(*Panic); ok {
		return p
	}
	return &Panic{Value: v, Stack: debug.Stack()}
}

// Catch, deferred, stops a panic and stores it in *err as a *Panic:
//
//	func work() (err error) {
//		defer guard.Catch(&err)
//		...
//	}
func Catch(err *error) {
	if v := recover(); v != nil {
		*err = From(v)
	}
}

// Group runs functions on goroutines of their own and waits for them. The
// zero Group is ready to use.
type Group struct {
	wg    sync.WaitGroup
	mu    sync.Mutex
	first *Panic
}

// Go runs f on a new goroutine.
func (g *Group) Go(f func()) {
	g.wg.Add(1)
	go func() {
		defer g.wg.Done()
		defer func() {
			if v := recover(); v != nil {
				p := From(v)
				g.mu.Lock()
				if g.first == nil {
					g.first = p
				}
				g.mu.Unlock()
			}
		}()
		f()
	}()
}

// Wait waits for every function started by Go; if one of them panicked,
// Wait panics with the first *Panic, on the caller's goroutine. That is on
// purpose: a panic is a bug, not bad input, and moving it to the caller
// lets the command's top-level recover report it as one internal-error
// line (exit 1) instead of the worker's goroutine killing the process.
func (g *Group) Wait() {
	g.wg.Wait()
	if g.first != nil {
		panic(g.first)
	}
}

var (
	orphanMu sync.Mutex
	orphan   *Panic
)

// Go runs f on a goroutine that nobody waits for (work done ahead, whose
// result is also computed when asked for). Its panic is kept: Err returns
// it, and outputs are not committed after it (see atomicfile).
func Go(f func()) {
	go func() {
		defer func() {
			if v := recover(); v != nil {
				p := From(v)
				orphanMu.Lock()
				if orphan == nil {
					orphan = p
				}
				orphanMu.Unlock()
			}
		}()
		f()
	}()
}

// Err returns the first panic of a goroutine started by Go, or nil.
func Err() error {
	orphanMu.Lock()
	defer orphanMu.Unlock()
	if orphan == nil {
		return nil
	}
	return orphan
}
