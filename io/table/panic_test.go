package table

import (
	"errors"
	"strings"
	"testing"

	"manyfold/internal/guard"
)

// panicReader panics on its second Next, as a reader with a bug might.
type panicReader struct{ reuseReader }

func (r *panicReader) Next() (*Batch, error) {
	if r.i == 1 {
		var cols []Column
		_ = cols[3] // index out of range
	}
	return r.reuseReader.Next()
}

// TestReadAheadPanic: a panic of the reader on ReadAhead's goroutine is
// returned by Next as a *guard.Panic, not a crash of the process.
func TestReadAheadPanic(t *testing.T) {
	r := ReadAhead(&panicReader{reuseReader{n: 3}})
	defer r.Close()
	var err error
	for err == nil {
		_, err = r.Next()
	}
	var p *guard.Panic
	if !errors.As(err, &p) || !strings.Contains(err.Error(), "internal error: runtime error: index out of range") {
		t.Fatalf("Next gave %v, want the reader's panic as an error", err)
	}
	if !strings.Contains(string(p.Stack), "panicReader") {
		t.Errorf("the stack does not name the reader:\n%s", p.Stack)
	}
}

type panicWriter struct{ n int }

func (w *panicWriter) Write(b *Batch) error {
	w.n++
	if w.n == 2 {
		panic("writer bug")
	}
	return nil
}
func (w *panicWriter) Close() error { return nil }

// TestWriteBehindPanic: a panic of the writer on WriteBehind's goroutine
// is returned by a later Write or by Close.
func TestWriteBehindPanic(t *testing.T) {
	w := WriteBehind(&panicWriter{})
	b := &Batch{Rows: 1, Cols: []Column{{Form: FormInt64, Ints: []int64{1}}}}
	var err error
	for i := 0; i < 5 && err == nil; i++ {
		err = w.Write(b)
	}
	if cerr := w.Close(); err == nil {
		err = cerr
	}
	var p *guard.Panic
	if !errors.As(err, &p) || p.Value != "writer bug" {
		t.Fatalf("got %v, want the writer's panic as an error", err)
	}
}
