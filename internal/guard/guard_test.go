package guard

import (
	"errors"
	"strings"
	"testing"
	"time"
)

func TestCatch(t *testing.T) {
	f := func() (err error) {
		defer Catch(&err)
		var m map[string]int
		m["x"] = 1 // a nil map write panics
		return nil
	}
	err := f()
	var p *Panic
	if !errors.As(err, &p) {
		t.Fatalf("Catch gave %v, want a *Panic", err)
	}
	if !strings.Contains(err.Error(), "internal error: assignment to entry in nil map; please report it") {
		t.Errorf("message %q", err)
	}
	if !strings.Contains(string(p.Stack), "guard.TestCatch") {
		t.Errorf("the stack does not name the function that panicked:\n%s", p.Stack)
	}
}

// TestGroupCarriesPanic checks that a worker's panic reaches the goroutine
// that waits, with the worker's stack, after every worker has finished.
func TestGroupCarriesPanic(t *testing.T) {
	var g Group
	finished := make([]bool, 4)
	for i := range 4 {
		g.Go(func() {
			if i == 2 {
				panic("worker 2")
			}
			time.Sleep(10 * time.Millisecond)
			finished[i] = true
		})
	}
	var got any
	func() {
		defer func() { got = recover() }()
		g.Wait()
	}()
	p, ok := got.(*Panic)
	if !ok || p.Value != "worker 2" {
		t.Fatalf("Wait panicked with %#v, want the worker's *Panic", got)
	}
	if !strings.Contains(string(p.Stack), "TestGroupCarriesPanic.func") {
		t.Errorf("the stack is not the worker's:\n%s", p.Stack)
	}
	for i, ok := range finished {
		if i != 2 && !ok {
			t.Errorf("worker %d had not finished when Wait returned", i)
		}
	}
	// From keeps a carried panic as it is.
	if From(p) != p {
		t.Error("From wrapped a *Panic again")
	}
}

func TestGoKeepsPanic(t *testing.T) {
	if Err() != nil {
		t.Fatal("Err before any panic")
	}
	done := make(chan struct{})
	Go(func() {
		defer close(done)
		panic(errors.New("boom"))
	})
	<-done
	for range 100 {
		if Err() != nil {
			break
		}
		time.Sleep(time.Millisecond)
	}
	err := Err()
	if err == nil || !strings.Contains(err.Error(), "internal error: boom") {
		t.Fatalf("Err() = %v", err)
	}
}
