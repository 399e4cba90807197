package table

import (
	"errors"
	"io"
	"reflect"
	"strings"
	"testing"
)

// memText is a text column of vals ("" with null set is a null).
func memText(vals ...string) Column {
	c := Column{Form: FormText, Offsets: []int32{0}}
	for _, v := range vals {
		c.Data = append(c.Data, v...)
		c.Offsets = append(c.Offsets, int32(len(c.Data)))
	}
	return c
}

// memSchema is the schema of the memory reader's tests.
func memSchema() *Schema {
	return &Schema{Fields: []Field{{Name: "dest_postcode", Kind: String}, {Name: "weight", Kind: Float64}, {Name: "late", Kind: Int64}}}
}

// memBatches are two batches of 2 and 1 rows.
func memBatches() []*Batch {
	return []*Batch{
		{Rows: 2, Cols: []Column{memText("10115", "80331"), {Form: FormFloat64, Floats: []float64{1.5, 2}}, {Form: FormInt64, Ints: []int64{0, 1}}}},
		{Rows: 1, FirstRow: 99, Cols: []Column{memText("10115"), {Form: FormFloat64, Floats: []float64{0.25}}, {Form: FormInt64, Ints: []int64{1}}}},
	}
}

// readAll returns the text of every value of r, row by row, and the
// FirstRow of every batch.
func readAll(t *testing.T, r Reader) (rows [][]string, first []int64) {
	t.Helper()
	err := ForEach(r, func(b *Batch) error {
		first = append(first, b.FirstRow)
		for i := 0; i < b.Rows; i++ {
			var row []string
			for c := range b.Cols {
				row = append(row, string(b.Cols[c].AppendText(nil, i)))
			}
			rows = append(rows, row)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return rows, first
}

// TestMemReader reads the batches whole and through Select, and checks
// the row numbering, the end of the table and Close.
func TestMemReader(t *testing.T) {
	r := NewMemReader(memSchema(), memBatches()...)
	if got := r.Schema().Names(); !reflect.DeepEqual(got, []string{"dest_postcode", "weight", "late"}) {
		t.Fatalf("schema %v", got)
	}
	rows, first := readAll(t, r)
	want := [][]string{{"10115", "1.5", "0"}, {"80331", "2", "1"}, {"10115", "0.25", "1"}}
	if !reflect.DeepEqual(rows, want) {
		t.Errorf("rows %v, want %v", rows, want)
	}
	if !reflect.DeepEqual(first, []int64{1, 3}) { // the given FirstRow 99 is renumbered
		t.Errorf("first rows %v, want [1 3]", first)
	}
	if _, err := r.Next(); err != io.EOF {
		t.Errorf("Next after the last batch: %v, want io.EOF", err)
	}
	if err := r.Select([]int{0}); err == nil {
		t.Error("Select after Next succeeded")
	}
	r.Close()
	if _, err := r.Next(); err == nil || err == io.EOF {
		t.Errorf("Next after Close: %v, want an error", err)
	}

	batches := memBatches()
	r = NewMemReader(memSchema(), batches...)
	if err := r.Select([]int{2, 0}); err != nil {
		t.Fatal(err)
	}
	if got := r.Schema().Names(); !reflect.DeepEqual(got, []string{"late", "dest_postcode"}) {
		t.Fatalf("selected schema %v", got)
	}
	rows, _ = readAll(t, r)
	want = [][]string{{"0", "10115"}, {"1", "80331"}, {"1", "10115"}}
	if !reflect.DeepEqual(rows, want) {
		t.Errorf("selected rows %v, want %v", rows, want)
	}
	if len(batches[0].Cols) != 3 || batches[1].FirstRow != 99 {
		t.Error("the reader modified the caller's batches")
	}
}

// TestMemReaderSelectErrors checks that Select refuses positions out of
// range and a column given twice.
func TestMemReaderSelectErrors(t *testing.T) {
	for _, cols := range [][]int{{3}, {-1}, {1, 1}} {
		r := NewMemReader(memSchema(), memBatches()...)
		if err := r.Select(cols); err == nil {
			t.Errorf("Select(%v) succeeded", cols)
		}
	}
}

// TestMemReaderBadBatch checks that a batch whose shape does not fit is an
// error wrapping ErrCorrupt, not a panic of the consumer, and that the
// batches before it are read.
func TestMemReaderBadBatch(t *testing.T) {
	bad := func(f func(b *Batch)) *Batch {
		b := memBatches()[0]
		f(b)
		return b
	}
	cases := []struct {
		name, msg string
		b         *Batch
	}{
		{"nil", "nil batch", nil},
		{"columns", "2 columns", bad(func(b *Batch) { b.Cols = b.Cols[:2] })},
		{"rows", "2 values for 3 rows", bad(func(b *Batch) { b.Rows = 3 })},
		{"short floats", "1 values for 2 rows", bad(func(b *Batch) { b.Cols[1].Floats = b.Cols[1].Floats[:1] })},
		{"nulls", "1 null flags", bad(func(b *Batch) { b.Cols[2].Nulls = []bool{true} })},
		{"lines", "1 lines", bad(func(b *Batch) { b.Lines = []int64{2} })},
		{"offset past data", "offset 2 is 99", bad(func(b *Batch) { b.Cols[0].Offsets[2] = 99 })},
		{"offsets decrease", "offset 2 is 1", bad(func(b *Batch) { b.Cols[0].Offsets[2] = 1 })},
		{"negative offset", "offsets start at -1", bad(func(b *Batch) { b.Cols[0].Offsets[0] = -1 })},
		{"no dictionary", "without a dictionary", bad(func(b *Batch) { b.Cols[0] = Column{Form: FormDict, Indices: []int32{0, 0}} })},
		{"index", "index 1 of a dictionary of 1", bad(func(b *Batch) {
			b.Cols[0] = Column{Form: FormDict, Indices: []int32{0, 1}, Dict: &Dict{Data: []byte("x"), Offsets: []int32{0, 1}}}
		})},
		{"form", "unknown form", bad(func(b *Batch) { b.Cols[2].Form = 9 })},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := NewMemReader(memSchema(), memBatches()[0], tc.b)
			if _, err := r.Next(); err != nil {
				t.Fatalf("first batch: %v", err)
			}
			_, err := r.Next()
			if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), "batch 2") || !strings.Contains(err.Error(), tc.msg) {
				t.Errorf("error %v, want ErrCorrupt naming batch 2 and %q", err, tc.msg)
			}
		})
	}
	// A null row's dictionary index is not read, so it may be anything.
	b := memBatches()[0]
	b.Cols[0] = Column{Form: FormDict, Indices: []int32{0, 7}, Nulls: []bool{false, true}, Dict: &Dict{Data: []byte("x"), Offsets: []int32{0, 1}}}
	if _, err := NewMemReader(memSchema(), b).Next(); err != nil {
		t.Errorf("a null row's index: %v", err)
	}
}
