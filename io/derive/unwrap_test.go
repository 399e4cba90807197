package derive

import (
	"testing"

	"manyfold/io/table"
)

// countedReader is a reader that knows its rows, as a Parquet file does.
type countedReader struct{ table.Reader }

func (countedReader) NumRows() int64 { return 3 }

// TestUnwrap: what the reader under the derived columns implements is
// found through them (table.Find).
func TestUnwrap(t *testing.T) {
	base := countedReader{memTable(t, []string{"a", "b"}, [][]string{{"x", "1"}, {"y", "2"}, {"x", "3"}})}
	r, err := Wrap(base, []string{"a*b"})
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := r.(*Reader); !ok {
		t.Fatalf("Wrap added no derived column: %T", r)
	}
	rc, ok := table.Find[table.RowCounter](r)
	if !ok || rc.NumRows() != 3 {
		t.Errorf("the row count under the derived columns is not found (%v)", ok)
	}
}
