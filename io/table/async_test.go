package table

import (
	"errors"
	"fmt"
	"io"
	"reflect"
	"testing"
	"time"
)

// reuseReader yields n batches of 3 rows from one buffer that it
// overwrites on every Next, as manyfold's readers do; failAt > 0 makes
// batch failAt fail.
type reuseReader struct {
	buf     Batch
	dict    Dict
	i, n    int
	failAt  int
	closed  bool
	schema  Schema
	selects [][]int
}

func (r *reuseReader) Schema() *Schema { return &r.schema }
func (r *reuseReader) Select(c []int) error {
	r.selects = append(r.selects, c)
	return nil
}
func (r *reuseReader) Close() error { r.closed = true; return nil }
func (r *reuseReader) Next() (*Batch, error) {
	if r.i == r.failAt && r.failAt > 0 {
		return nil, errors.New("bad page")
	}
	if r.i >= r.n {
		return nil, io.EOF
	}
	k := int64(r.i)
	if r.i%2 == 0 {
		// A new dictionary every other batch, refilled in place.
		r.dict = Dict{Data: []byte(fmt.Sprintf("d%dd%d", k, k+1)), Offsets: []int32{0, 2, 4}, ID: uint64(100 + k)}
	}
	r.buf = Batch{Rows: 3, FirstRow: 3*k + 1, Cols: []Column{
		{Form: FormInt64, Ints: append(reused(&r.buf), k, k+1, k+2)},
		{Form: FormDict, Dict: &r.dict, Indices: []int32{0, 1, 0}, Nulls: []bool{false, k%3 == 0, false}},
		{Form: FormText, Data: []byte(fmt.Sprintf("a%db", k)), Offsets: []int32{0, 1, 2, 3}},
	}}
	r.i++
	return &r.buf, nil
}

// reused returns the first column's ints storage emptied, so that the
// reader overwrites it in place.
func reused(b *Batch) []int64 {
	if len(b.Cols) == 0 {
		return nil
	}
	return b.Cols[0].Ints[:0]
}

// snapshot renders a batch's cells as text.
func snapshot(b *Batch) []string {
	var out []string
	for i := 0; i < b.Rows; i++ {
		for j := range b.Cols {
			out = append(out, string(b.Cols[j].AppendText(nil, i))+fmt.Sprint(b.Cols[j].IsNull(i)))
		}
	}
	return append(out, fmt.Sprint(b.FirstRow))
}

func TestReadAhead(t *testing.T) {
	// What the reader yields, read directly.
	var want [][]string
	direct := &reuseReader{n: 9}
	ForEach(direct, func(b *Batch) error { want = append(want, snapshot(b)); return nil })

	src := &reuseReader{n: 9}
	r := ReadAhead(src)
	if err := r.Select([]int{0, 1, 2}); err != nil || len(src.selects) != 1 {
		t.Fatalf("Select: %v, %v", err, src.selects)
	}
	var got [][]string
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		before := snapshot(b)
		// Give the goroutine time to read the next batch into the
		// reader's buffer: ours must not change.
		time.Sleep(2 * time.Millisecond)
		if after := snapshot(b); !reflect.DeepEqual(before, after) {
			t.Fatalf("batch changed while held: %v then %v", before, after)
		}
		got = append(got, before)
	}
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("batches %v, want %v", got, want)
	}
	if err := r.Select([]int{0}); err == nil {
		t.Error("Select after Next succeeded")
	}
	if err := r.Close(); err != nil || !src.closed {
		t.Fatalf("Close: %v, closed %v", err, src.closed)
	}
}

func TestReadAheadError(t *testing.T) {
	r := ReadAhead(&reuseReader{n: 9, failAt: 3})
	n := 0
	err := ForEach(r, func(*Batch) error { n++; return nil })
	if err == nil || err.Error() != "bad page" || n != 3 {
		t.Fatalf("%d batches then %v, want 3 then the reader's error", n, err)
	}
	// Closing early, with the goroutine blocked on a full channel.
	src := &reuseReader{n: 100}
	r = ReadAhead(src)
	if _, err := r.Next(); err != nil {
		t.Fatal(err)
	}
	done := make(chan error)
	go func() { done <- r.Close() }()
	select {
	case err := <-done:
		if err != nil || !src.closed {
			t.Fatalf("Close: %v", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("Close hangs")
	}
	if _, err := r.Next(); err == nil {
		t.Error("Next after Close succeeded")
	}
}

// recordWriter records the batches it is given; failAt > 0 fails that one.
type recordWriter struct {
	got    [][]string
	failAt int
	closed bool
}

func (w *recordWriter) Write(b *Batch) error {
	if len(w.got)+1 == w.failAt {
		return errors.New("disk full")
	}
	w.got = append(w.got, snapshot(b))
	return nil
}
func (w *recordWriter) Close() error { w.closed = true; return nil }

func TestWriteBehind(t *testing.T) {
	src := &reuseReader{n: 20}
	var want [][]string
	rec := &recordWriter{}
	w := WriteBehind(rec)
	ForEach(src, func(b *Batch) error {
		want = append(want, snapshot(b))
		return w.Write(b) // b is overwritten by the next Next at once
	})
	if err := w.Close(); err != nil || !rec.closed {
		t.Fatalf("Close: %v, closed %v", err, rec.closed)
	}
	if !reflect.DeepEqual(rec.got, want) {
		t.Fatalf("the writer got %v, want %v", rec.got, want)
	}
	if err := w.Write(&Batch{}); err == nil {
		t.Error("Write after Close succeeded")
	}

	// An error of the writer comes back from a later Write or Close, and
	// later batches do not reach it.
	rec = &recordWriter{failAt: 2}
	w = WriteBehind(rec)
	var werr error
	ForEach(&reuseReader{n: 20}, func(b *Batch) error {
		if werr == nil {
			werr = w.Write(b)
		}
		return nil
	})
	cerr := w.Close()
	if (werr == nil || werr.Error() != "disk full") && (cerr == nil || cerr.Error() != "disk full") {
		t.Fatalf("Write %v, Close %v: want the writer's error", werr, cerr)
	}
	if len(rec.got) != 1 || !rec.closed {
		t.Fatalf("%d batches reached the failed writer (want 1); closed %v", len(rec.got), rec.closed)
	}
}

func TestCopyBatchKeepsDict(t *testing.T) {
	d := &Dict{Data: []byte("ab"), Offsets: []int32{0, 1, 2}, ID: 7}
	src := &Batch{Rows: 2, Cols: []Column{{Form: FormDict, Dict: d, Indices: []int32{1, 0}}}}
	var dst Batch
	CopyBatch(&dst, src)
	first := dst.Cols[0].Dict
	if first == d || string(first.Data) != "ab" || first.ID != 7 {
		t.Fatalf("dictionary not copied: %+v", first)
	}
	CopyBatch(&dst, src)
	if dst.Cols[0].Dict != first {
		t.Error("the same dictionary (same ID) was copied again")
	}
	d2 := &Dict{Data: []byte("xy"), Offsets: []int32{0, 1, 2}, ID: 8}
	src.Cols[0].Dict = d2
	CopyBatch(&dst, src)
	if dst.Cols[0].Dict == first || string(dst.Cols[0].Dict.Data) != "xy" || string(first.Data) != "ab" {
		t.Error("a new dictionary was not copied into a new Dict")
	}
}
