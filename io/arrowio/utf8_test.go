package arrowio

import (
	"bytes"
	"errors"
	"strings"
	"testing"

	"manyfold/io/table"
)

// TestWriterRefusesInvalidUTF8: a utf8 column's text that is not UTF-8 is
// refused with the input's name, the line, the row and the column (a
// dictionary entry no row uses is not); so is a column name.
func TestWriterRefusesInvalidUTF8(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{{Name: "city", Kind: table.String, Nullable: true}}}
	text := func(vals ...string) table.Column {
		c := table.Column{Form: table.FormText, Offsets: []int32{0}}
		for _, v := range vals {
			c.Data = append(c.Data, v...)
			c.Offsets = append(c.Offsets, int32(len(c.Data)))
		}
		return c
	}
	dict := text("Basel", "Z\xfcrich", "unused \xff")
	cols := map[string][2]table.Column{
		"text": {text("Genève", "Basel"), text("Bern", "Gen\xe8ve")},
		"dict": {
			{Form: table.FormDict, Dict: &table.Dict{ID: 1, Data: dict.Data, Offsets: dict.Offsets}, Indices: []int32{0, 0}},
			{Form: table.FormDict, Dict: &table.Dict{ID: 1, Data: dict.Data, Offsets: dict.Offsets}, Indices: []int32{0, 1}},
		},
	}
	for name, c := range cols {
		var out bytes.Buffer
		w, err := NewWriterWith(&out, schema, WriterOptions{Input: "in.csv", CheckUTF8: true})
		if err != nil {
			t.Fatal(err)
		}
		if err := w.Write(&table.Batch{Rows: 2, FirstRow: 1, Lines: []int64{2, 3}, Cols: []table.Column{c[0]}}); err != nil {
			t.Fatalf("%s: valid text refused: %v", name, err)
		}
		err = w.Write(&table.Batch{Rows: 2, FirstRow: 3, Lines: []int64{4, 6}, Cols: []table.Column{c[1]}})
		var de *table.DataError
		if !errors.As(err, &de) || !errors.Is(err, table.ErrNotUTF8) || de.File != "in.csv" || de.Line != 6 || de.Row != 4 || de.Column != "city" {
			t.Fatalf("%s: error %v", name, err)
		}
		w.Close()
	}
	_, err := NewWriterWith(&bytes.Buffer{}, &table.Schema{Fields: []table.Field{{Name: "id", Kind: table.Int64}, {Name: "st\xe4dt", Kind: table.String}}}, WriterOptions{Input: "in.csv", CheckUTF8: true})
	if !errors.Is(err, table.ErrNotUTF8) || !strings.HasPrefix(err.Error(), `in.csv: output column 2: its name "st\xe4dt" is not valid UTF-8`) {
		t.Fatalf("column name: %v", err)
	}
}
