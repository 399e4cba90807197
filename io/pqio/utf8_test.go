package pqio

import (
	"bytes"
	"errors"
	"strings"
	"testing"

	"manyfold/io/table"
)

// utf8Batch is a batch of 5 rows, from row 101 on lines 201-205 of its
// file, whose city column (in the given form; a dictionary's ID is id)
// holds city at row 104.
func utf8Batch(form table.Form, id uint64, city string) *table.Batch {
	cities := []string{"Zürich", "Basel", "", city, "Bern"}
	col := table.Column{Form: table.FormText, Offsets: []int32{0}, Nulls: []bool{false, false, true, false, false}}
	if form == table.FormDict {
		d := &table.Dict{ID: id, Offsets: []int32{0}}
		for _, c := range append(cities, "unused \xff") {
			d.Data = append(d.Data, c...)
			d.Offsets = append(d.Offsets, int32(len(d.Data)))
		}
		col = table.Column{Form: table.FormDict, Dict: d, Indices: []int32{0, 1, 2, 3, 4}, Nulls: col.Nulls}
	} else {
		for _, c := range cities {
			col.Data = append(col.Data, c...)
			col.Offsets = append(col.Offsets, int32(len(col.Data)))
		}
	}
	return &table.Batch{Rows: 5, FirstRow: 101, Lines: []int64{201, 202, 203, 204, 205},
		Cols: []table.Column{{Form: table.FormInt64, Ints: []int64{1, 2, 3, 4, 5}}, col}}
}

// TestWriterRefusesInvalidUTF8: text that is not UTF-8 is refused with
// the input's name, the line, the row and the column; a dictionary entry
// no row uses is not; valid text is written.
func TestWriterRefusesInvalidUTF8(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{{Name: "id", Kind: table.Int64}, {Name: "city", Kind: table.String, Nullable: true}}}
	for _, form := range []table.Form{table.FormText, table.FormDict} {
		var buf bytes.Buffer
		w, err := NewWriter(&buf, schema, WriterOptions{Input: "in.csv", CheckUTF8: true})
		if err != nil {
			t.Fatal(err)
		}
		if err := w.Write(utf8Batch(form, 1, "Genève")); err != nil {
			t.Fatalf("form %d: valid UTF-8 refused: %v", form, err)
		}
		err = w.Write(utf8Batch(form, 2, "Gen\xe8ve"))
		var de *table.DataError
		if !errors.As(err, &de) || !errors.Is(err, table.ErrNotUTF8) || de.File != "in.csv" || de.Line != 204 || de.Row != 104 || de.Column != "city" {
			t.Fatalf("form %d: error %v", form, err)
		}
		if msg := err.Error(); !strings.HasPrefix(msg, `in.csv:204: column "city": "Gen\xe8ve" is not valid UTF-8`) {
			t.Fatalf("form %d: message %q", form, msg)
		}
		w.Close()
	}
	// A column name.
	_, err := NewWriter(&bytes.Buffer{}, &table.Schema{Fields: []table.Field{{Name: "id", Kind: table.Int64}, {Name: "st\xe4dt", Kind: table.String}}}, WriterOptions{Input: "in.csv", CheckUTF8: true})
	var de *table.DataError
	if !errors.As(err, &de) || !errors.Is(err, table.ErrNotUTF8) || !strings.HasPrefix(err.Error(), `in.csv: output column 2: its name "st\xe4dt" is not valid UTF-8`) {
		t.Fatalf("column name: %v", err)
	}
}

// TestWriterKeepsBytesWithoutCheck: without CheckUTF8 (manyfold's mapping
// tables) text is written as it is and reads back the same.
func TestWriterKeepsBytesWithoutCheck(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{{Name: "id", Kind: table.Int64}, {Name: "city", Kind: table.String, Nullable: true}}}
	var buf bytes.Buffer
	w, err := NewWriter(&buf, schema, WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(utf8Batch(table.FormText, 0, "Gen\xe8ve")); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	res := readAll(t, openBytes(t, "kept.parquet", buf.Bytes()))
	if got := res.cols[1][3].text; got != "Gen\xe8ve" {
		t.Fatalf("read back %q", got)
	}
}
