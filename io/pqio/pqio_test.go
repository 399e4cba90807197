package pqio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// cell is one value as the tests compare it: null, or its canonical text.
type cell struct {
	null bool
	text string
}

func (c cell) String() string {
	if c.null {
		return "NULL"
	}
	return strconv.Quote(c.text)
}

// cellsOf gives the canonical cells of rows [0, n) of a column.
func cellsOf(c *table.Column, n int) []cell {
	out := make([]cell, n)
	for i := range out {
		if c.IsNull(i) {
			out[i] = cell{null: true}
		} else {
			out[i] = cell{text: string(c.AppendText(nil, i))}
		}
	}
	return out
}

// readResult is what a test reads back from a file.
type readResult struct {
	schema  table.Schema
	cols    [][]cell
	forms   [][]table.Form // per column, the form of each batch
	batches []int          // rows per batch
}

// openBytes opens a Parquet file held in memory.
func openBytes(t testing.TB, name string, data []byte) *Reader {
	t.Helper()
	r, err := openReaderAt(name, bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatalf("open %s: %v", name, err)
	}
	return r
}

// readAll reads every batch of r, checking each batch's shape.
func readAll(t testing.TB, r table.Reader) readResult {
	t.Helper()
	var res readResult
	res.schema = table.Schema{Fields: slices.Clone(r.Schema().Fields)}
	n := len(res.schema.Fields)
	res.cols = make([][]cell, n)
	res.forms = make([][]table.Form, n)
	var next int64 = 1
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("Next: %v", err)
		}
		if b.FirstRow != next {
			t.Fatalf("batch FirstRow = %d, want %d", b.FirstRow, next)
		}
		next += int64(b.Rows)
		if len(b.Cols) != n {
			t.Fatalf("batch has %d columns, schema %d", len(b.Cols), n)
		}
		for i := range b.Cols {
			c := &b.Cols[i]
			if c.Len() != b.Rows {
				t.Fatalf("column %d holds %d rows in a batch of %d", i, c.Len(), b.Rows)
			}
			if c.Nulls != nil && len(c.Nulls) != b.Rows {
				t.Fatalf("column %d has %d null marks for %d rows", i, len(c.Nulls), b.Rows)
			}
			if c.Form == table.FormDict {
				if c.Dict == nil || c.Dict.ID == 0 {
					t.Fatalf("column %d: dictionary form without a dictionary ID", i)
				}
				for j, x := range c.Indices {
					if c.IsNull(j) && x != 0 {
						t.Fatalf("column %d row %d: null row has index %d, want 0", i, j, x)
					}
				}
			}
			res.cols[i] = append(res.cols[i], cellsOf(c, b.Rows)...)
			res.forms[i] = append(res.forms[i], c.Form)
		}
		res.batches = append(res.batches, b.Rows)
	}
	return res
}

// col builds a test column from cells in the given form: text, or the
// kind's own form (numbers are parsed from the cell text).
func col(t testing.TB, kind table.Kind, form table.Form, cells []cell) table.Column {
	t.Helper()
	c := table.Column{Form: form}
	for i, v := range cells {
		if v.null {
			if c.Nulls == nil {
				c.Nulls = make([]bool, len(cells))
			}
			c.Nulls[i] = true
		}
	}
	switch form {
	case table.FormText:
		c.Offsets = append(c.Offsets, 0)
		for _, v := range cells {
			c.Data = append(c.Data, v.text...)
			c.Offsets = append(c.Offsets, int32(len(c.Data)))
		}
	case table.FormDict:
		d := &table.Dict{Offsets: []int32{0}, ID: 7}
		ids := map[string]int32{}
		for _, v := range cells {
			if v.null {
				c.Indices = append(c.Indices, 0)
				continue
			}
			id, ok := ids[v.text]
			if !ok {
				id = int32(d.Len())
				ids[v.text] = id
				d.Data = append(d.Data, v.text...)
				d.Offsets = append(d.Offsets, int32(len(d.Data)))
			}
			c.Indices = append(c.Indices, id)
		}
		c.Dict = d
	case table.FormInt64:
		for _, v := range cells {
			x, _ := strconv.ParseInt(v.text, 10, 64)
			c.Ints = append(c.Ints, x)
		}
	case table.FormFloat64:
		for _, v := range cells {
			x, _ := strconv.ParseFloat(v.text, 64)
			c.Floats = append(c.Floats, x)
		}
	case table.FormBool:
		for _, v := range cells {
			c.Bools = append(c.Bools, v.text == "true")
		}
	}
	return c
}

// slice returns rows [i, j) of c.
func slice(c table.Column, i, j int) table.Column {
	out := table.Column{Form: c.Form, Dict: c.Dict, Data: c.Data}
	if c.Nulls != nil {
		out.Nulls = c.Nulls[i:j]
	}
	switch c.Form {
	case table.FormText:
		out.Offsets = c.Offsets[i : j+1]
	case table.FormDict:
		out.Indices = c.Indices[i:j]
	case table.FormInt64:
		out.Ints = c.Ints[i:j]
	case table.FormFloat64:
		out.Floats = c.Floats[i:j]
	case table.FormBool:
		out.Bools = c.Bools[i:j]
	}
	return out
}

// writeCols writes columns of rows rows in batches of batch rows and
// returns the file.
func writeCols(t testing.TB, schema *table.Schema, cols []table.Column, rows, batch int, opts WriterOptions) []byte {
	t.Helper()
	var buf bytes.Buffer
	w, err := newWriter(&buf, schema, opts)
	if err != nil {
		t.Fatalf("newWriter: %v", err)
	}
	for i := 0; i < rows || (i == 0 && rows == 0); i += batch {
		j := min(i+batch, rows)
		b := &table.Batch{Rows: j - i, FirstRow: int64(i + 1)}
		for _, c := range cols {
			b.Cols = append(b.Cols, slice(c, i, j))
		}
		if err := w.Write(b); err != nil {
			t.Fatalf("Write rows %d-%d: %v", i+1, j, err)
		}
		if rows == 0 {
			break
		}
	}
	if err := w.Close(); err != nil {
		t.Fatalf("Close: %v", err)
	}
	return buf.Bytes()
}

// sample gives n cells of a kind, from a small deterministic generator;
// text cells include the empty string so that an empty value is never
// confused with a null.
func sample(kind table.Kind, n int, seed uint64) []cell {
	out := make([]cell, n)
	x := seed*0x9E3779B97F4A7C15 + 1
	for i := range out {
		x ^= x << 13
		x ^= x >> 7
		x ^= x << 17
		switch kind {
		case table.String:
			if x%5 == 0 {
				out[i] = cell{text: ""}
			} else {
				out[i] = cell{text: fmt.Sprintf("route-%d", x%53)}
			}
		case table.Int64:
			out[i] = cell{text: strconv.FormatInt(int64(x%2001)-1000, 10)}
		case table.Float64:
			out[i] = cell{text: string(table.AppendFloat(nil, float64(int64(x%100001)-50000)/8))}
		case table.Bool:
			out[i] = cell{text: strconv.FormatBool(x&1 == 1)}
		}
	}
	return out
}

func ownForm(k table.Kind) table.Form {
	switch k {
	case table.Int64:
		return table.FormInt64
	case table.Float64:
		return table.FormFloat64
	case table.Bool:
		return table.FormBool
	}
	return table.FormText
}

var kinds = []table.Kind{table.String, table.Int64, table.Float64, table.Bool}

func compareCells(t testing.TB, what string, got, want []cell) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: read %d rows, wrote %d", what, len(got), len(want))
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("%s: row %d = %v, want %v", what, i+1, got[i], want[i])
		}
	}
}

// eachPage calls f with every page of column c in row group g, in order.
func eachPage(t testing.TB, r *Reader, g, c int, f func(parquet.Page)) {
	t.Helper()
	pages := r.pf.RowGroups()[g].ColumnChunks()[c].Pages()
	defer pages.Close()
	for {
		p, err := pages.ReadPage()
		if err == io.EOF {
			return
		}
		if err != nil {
			t.Fatal(err)
		}
		f(p)
		parquet.Release(p)
	}
}

// pageCounts counts the data pages of column c in each row group.
func pageCounts(t testing.TB, r *Reader, c int) []int {
	t.Helper()
	var out []int
	for g := range r.pf.RowGroups() {
		n := 0
		eachPage(t, r, g, c, func(parquet.Page) { n++ })
		out = append(out, n)
	}
	return out
}

// TestNullsAtEveryPosition writes, for every kind, a table of n rows with
// a single null at row p and one with a single value at row p among nulls,
// for every p, with pages of a few rows so that page boundaries fall at
// many positions; every cell must come back, nulls as nulls.
func TestNullsAtEveryPosition(t *testing.T) {
	defer func(old int) { chunkRows = old }(chunkRows)
	chunkRows = 4
	const n = 29
	withGeometry(t, 8, 8, dictMaxBytes)
	for _, kind := range kinds {
		for _, lone := range []bool{false, true} {
			for p := 0; p < n; p++ {
				cells := sample(kind, n, uint64(p+1))
				for i := range cells {
					if (i == p) != lone {
						cells[i] = cell{null: true}
					}
				}
				schema := &table.Schema{Fields: []table.Field{{Name: "v", Kind: kind, Nullable: true}}}
				data := writeCols(t, schema, []table.Column{col(t, kind, ownForm(kind), cells)}, n, n, WriterOptions{})
				r := openBytes(t, "nulls.parquet", data)
				if p == 0 && !lone {
					if pc := pageCounts(t, r, 0); pc[0] < 3 {
						t.Fatalf("%v: %d pages, want several so that nulls straddle page boundaries", kind, pc[0])
					}
				}
				res := readAll(t, r)
				r.Close()
				compareCells(t, fmt.Sprintf("%v, lone=%v, p=%d", kind, lone, p), res.cols[0], cells)
			}
		}
	}
}

// TestNullsAcrossPagesAndBatches checks a long column with an irregular
// null pattern across many pages, several row groups and reader batches
// that do not line up with either.
func TestNullsAcrossPagesAndBatches(t *testing.T) {
	defer func(old int64) { batchRows = old }(batchRows)
	defer func(old int) { chunkRows = old }(chunkRows)
	batchRows, chunkRows = 1000, 100
	const n = 7777
	var fields []table.Field
	var cols []table.Column
	var want [][]cell
	for i, kind := range kinds {
		cells := sample(kind, n, uint64(i+11))
		for j := range cells {
			// Runs of nulls of varying length, and isolated ones.
			if j%97 < j%13 || j%31 == 0 || j >= n-3 {
				cells[j] = cell{null: true}
			}
		}
		fields = append(fields, table.Field{Name: "c" + strconv.Itoa(i), Kind: kind, Nullable: true})
		cols = append(cols, col(t, kind, ownForm(kind), cells))
		want = append(want, cells)
	}
	// The text column must hold both nulls and empty strings, so that a
	// null read back as "" (or the reverse) fails the comparison.
	if !slices.Contains(want[0], cell{null: true}) || !slices.Contains(want[0], cell{text: ""}) {
		t.Fatal("text column lacks nulls or empty strings")
	}
	schema := &table.Schema{Fields: fields}
	withGeometry(t, 1024, 1<<17, dictMaxBytes)
	data := writeCols(t, schema, cols, n, 611, WriterOptions{RowGroupRows: 3000})
	r := openBytes(t, "long.parquet", data)
	defer r.Close()
	if pc := pageCounts(t, r, 0); len(pc) != 3 || pc[0] < 4 {
		t.Fatalf("pages per row group = %v, want 3 row groups of several pages", pc)
	}
	res := readAll(t, r)
	if !slices.Equal(res.batches, []int{1000, 1000, 1000, 1000, 1000, 1000, 1000, 777}) {
		t.Fatalf("batches = %v", res.batches)
	}
	for i := range kinds {
		compareCells(t, fields[i].Name, res.cols[i], want[i])
	}
}

// TestRoundTrip writes every kind, nullable and not, from every input
// form, and reads it back.
func TestRoundTrip(t *testing.T) {
	const n = 300
	type colCase struct {
		kind     table.Kind
		form     table.Form
		nullable bool
	}
	var cases []colCase
	for _, k := range kinds {
		for _, nullable := range []bool{false, true} {
			cases = append(cases, colCase{k, ownForm(k), nullable})
			if k == table.String {
				cases = append(cases, colCase{k, table.FormDict, nullable})
			} else {
				cases = append(cases, colCase{k, table.FormText, nullable})
			}
		}
	}
	var fields []table.Field
	var cols []table.Column
	var want [][]cell
	for i, cc := range cases {
		cells := sample(cc.kind, n, uint64(i+3))
		if cc.nullable {
			for j := range cells {
				if j%7 == 3 {
					cells[j] = cell{null: true}
				}
			}
		}
		fields = append(fields, table.Field{Name: fmt.Sprintf("%v_%d_%v", cc.kind, cc.form, cc.nullable), Kind: cc.kind, Nullable: cc.nullable})
		cols = append(cols, col(t, cc.kind, cc.form, cells))
		want = append(want, cells)
	}
	schema := &table.Schema{Fields: fields}
	for _, comp := range []string{"", "snappy", "zstd", "none"} {
		t.Run("compression="+comp, func(t *testing.T) {
			data := writeCols(t, schema, cols, n, 128, WriterOptions{Compression: comp, RowGroupRows: 200})
			r := openBytes(t, "kinds.parquet", data)
			defer r.Close()
			wantCodec := map[string]format.CompressionCodec{"": format.Snappy, "snappy": format.Snappy, "zstd": format.Zstd, "none": format.Uncompressed}[comp]
			for _, rg := range r.pf.Metadata().RowGroups {
				for _, cc := range rg.Columns {
					if cc.MetaData.Codec != wantCodec {
						t.Fatalf("codec %v, want %v", cc.MetaData.Codec, wantCodec)
					}
				}
			}
			if got := len(r.pf.RowGroups()); got != 2 {
				t.Fatalf("%d row groups, want 2 (300 rows, 200 per group)", got)
			}
			if r.NumRows() != n {
				t.Fatalf("NumRows = %d", r.NumRows())
			}
			res := readAll(t, r)
			if !slices.Equal(res.schema.Fields, fields) {
				t.Fatalf("schema = %v, want %v", res.schema.Fields, fields)
			}
			for i := range fields {
				compareCells(t, fields[i].Name, res.cols[i], want[i])
			}
		})
	}
}

// TestColumnOrder checks that the writer keeps the schema's order, which
// is not the names' sorted order.
func TestColumnOrder(t *testing.T) {
	names := []string{"route", "Zone", "parcel_type", "account", "m", "a"}
	var fields []table.Field
	var cols []table.Column
	for i, name := range names {
		k := kinds[i%len(kinds)]
		fields = append(fields, table.Field{Name: name, Kind: k, Nullable: i%2 == 0})
		cols = append(cols, col(t, k, ownForm(k), sample(k, 5, uint64(i))))
	}
	data := writeCols(t, &table.Schema{Fields: fields}, cols, 5, 5, WriterOptions{})
	r := openBytes(t, "order.parquet", data)
	defer r.Close()
	if got := r.Schema().Names(); !slices.Equal(got, names) {
		t.Fatalf("column order %v, want %v", got, names)
	}
	res := readAll(t, r)
	for i := range names {
		compareCells(t, names[i], res.cols[i], cellsOf(&cols[i], 5))
	}
}

// TestTextParsing writes text columns to numeric and boolean kinds.
func TestTextParsing(t *testing.T) {
	tests := []struct {
		kind table.Kind
		in   []cell
		want []cell
	}{
		{table.Int64, []cell{{text: "12"}, {text: "-3"}, {text: "1e3"}, {text: "4.0"}, {text: ""}, {null: true}},
			[]cell{{text: "12"}, {text: "-3"}, {text: "1000"}, {text: "4"}, {null: true}, {null: true}}},
		{table.Float64, []cell{{text: "2.5"}, {text: "-0.125"}, {text: "1e300"}, {text: "NaN"}, {text: "true"}, {text: ""}},
			[]cell{{text: "2.5"}, {text: "-0.125"}, {text: "1e+300"}, {text: "NaN"}, {text: "1"}, {null: true}}},
		{table.Bool, []cell{{text: "true"}, {text: "0"}, {text: "T"}, {text: "false"}, {text: ""}, {null: true}},
			[]cell{{text: "true"}, {text: "false"}, {text: "true"}, {text: "false"}, {null: true}, {null: true}}},
		{table.String, []cell{{text: "x"}, {text: ""}, {null: true}},
			[]cell{{text: "x"}, {text: ""}, {null: true}}},
	}
	for _, tt := range tests {
		for _, form := range []table.Form{table.FormText, table.FormDict} {
			t.Run(fmt.Sprintf("%v/%d", tt.kind, form), func(t *testing.T) {
				schema := &table.Schema{Fields: []table.Field{{Name: "v", Kind: tt.kind, Nullable: true}}}
				data := writeCols(t, schema, []table.Column{col(t, table.String, form, tt.in)}, len(tt.in), 4, WriterOptions{})
				res := readAll(t, openBytes(t, "parse.parquet", data))
				compareCells(t, "v", res.cols[0], tt.want)
			})
		}
	}
	// Numbers written as text keep their canonical text.
	schema := &table.Schema{Fields: []table.Field{{Name: "s", Kind: table.String}, {Name: "t", Kind: table.String}, {Name: "u", Kind: table.String}}}
	cols := []table.Column{
		{Form: table.FormInt64, Ints: []int64{501, -7}},
		{Form: table.FormFloat64, Floats: []float64{0.1, math.Inf(-1)}},
		{Form: table.FormBool, Bools: []bool{true, false}},
	}
	res := readAll(t, openBytes(t, "text.parquet", writeCols(t, schema, cols, 2, 2, WriterOptions{})))
	compareCells(t, "s", res.cols[0], []cell{{text: "501"}, {text: "-7"}})
	compareCells(t, "t", res.cols[1], []cell{{text: "0.1"}, {text: "-Inf"}})
	compareCells(t, "u", res.cols[2], []cell{{text: "true"}, {text: "false"}})
}

// TestWriteErrors checks the DataError for bad values and nulls in
// non-nullable columns.
func TestWriteErrors(t *testing.T) {
	tests := []struct {
		name     string
		field    table.Field
		in       table.Column
		wantRow  int64
		wantText string
	}{
		{"bad int", table.Field{Name: "weight", Kind: table.Int64}, col(t, table.String, table.FormText, []cell{{text: "1"}, {text: "2"}, {text: "heavy"}}), 12, `"heavy" is not an integer`},
		{"fractional int", table.Field{Name: "weight", Kind: table.Int64}, table.Column{Form: table.FormFloat64, Floats: []float64{1, 2.5, 3}}, 11, "2.5 is not an integer"},
		{"bad float", table.Field{Name: "cost", Kind: table.Float64}, col(t, table.String, table.FormDict, []cell{{text: "x1"}, {text: "1"}, {text: "1"}}), 10, `"x1" is not a number`},
		{"bad bool", table.Field{Name: "late", Kind: table.Bool}, table.Column{Form: table.FormInt64, Ints: []int64{0, 1, 2}}, 12, "2 is not a boolean"},
		{"null in required", table.Field{Name: "route", Kind: table.String}, col(t, table.String, table.FormText, []cell{{text: "a"}, {null: true}, {text: "b"}}), 11, "declared not null"},
		{"empty in required int", table.Field{Name: "n", Kind: table.Int64}, col(t, table.String, table.FormText, []cell{{text: ""}, {text: "1"}, {text: "1"}}), 10, "empty text"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var buf bytes.Buffer
			w, err := NewWriter(&buf, &table.Schema{Fields: []table.Field{tt.field}}, WriterOptions{})
			if err != nil {
				t.Fatal(err)
			}
			err = w.Write(&table.Batch{Rows: 3, FirstRow: 10, Cols: []table.Column{tt.in}})
			var de *table.DataError
			if !errors.As(err, &de) {
				t.Fatalf("Write error %v, want a *table.DataError", err)
			}
			if de.Row != tt.wantRow || de.Column != tt.field.Name || !strings.Contains(de.Error(), tt.wantText) {
				t.Fatalf("error %q (row %d, column %q), want row %d, column %q, %q", de, de.Row, de.Column, tt.wantRow, tt.field.Name, tt.wantText)
			}
			if err2 := w.Write(&table.Batch{Rows: 0, Cols: []table.Column{{}}}); err2 == nil {
				t.Fatal("Write after a failed Write succeeded")
			}
			if err := w.Close(); err == nil {
				t.Fatal("Close after a failed Write reported success")
			}
		})
	}
	// Misshapen batches and bad options.
	var buf bytes.Buffer
	schema := &table.Schema{Fields: []table.Field{{Name: "a", Kind: table.Int64}}}
	if _, err := NewWriter(&buf, schema, WriterOptions{Compression: "lz9"}); err == nil || !strings.Contains(err.Error(), "lz9") {
		t.Fatalf("unknown compression: %v", err)
	}
	if _, err := NewWriter(&buf, &table.Schema{Fields: []table.Field{{Name: "a"}, {Name: "a"}}}, WriterOptions{}); err == nil {
		t.Fatal("duplicate column names accepted")
	}
	w, _ := NewWriter(&buf, schema, WriterOptions{})
	if err := w.Write(&table.Batch{Rows: 2, Cols: []table.Column{{Form: table.FormInt64, Ints: []int64{1}}}}); err == nil {
		t.Fatal("column shorter than the batch accepted")
	}
	if err := w.Write(&table.Batch{Rows: 1}); err == nil {
		t.Fatal("batch without columns accepted")
	}
}

// closeRecorder is an io.Writer that records whether it was closed.
type closeRecorder struct {
	bytes.Buffer
	closed bool
}

func (c *closeRecorder) Close() error { c.closed = true; return nil }

func TestWriterLeavesOutputOpen(t *testing.T) {
	var out closeRecorder
	w, err := NewWriter(&out, &table.Schema{Fields: []table.Field{{Name: "a", Kind: table.Int64}}}, WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(&table.Batch{Rows: 1, Cols: []table.Column{{Form: table.FormInt64, Ints: []int64{5}}}}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if out.closed {
		t.Fatal("writer closed the underlying output")
	}
	if !bytes.HasSuffix(out.Bytes(), []byte("PAR1")) {
		t.Fatal("output does not end with the Parquet magic")
	}
}

// TestWriterCopiesInput overwrites the batch's buffers after each Write:
// the file must hold the values as they were at the Write.
func TestWriterCopiesInput(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{{Name: "s", Kind: table.String, Nullable: true}, {Name: "i", Kind: table.Int64}}}
	var buf bytes.Buffer
	w, err := NewWriter(&buf, schema, WriterOptions{RowGroupRows: 5})
	if err != nil {
		t.Fatal(err)
	}
	var want []cell
	data := make([]byte, 4)
	ints := make([]int64, 4)
	for b := 0; b < 4; b++ {
		offs := []int32{0, 1, 2, 3, 4}
		for i := range data {
			data[i] = byte('a' + b*4 + i)
			ints[i] = int64(b*4 + i)
			want = append(want, cell{text: string(data[i : i+1])})
		}
		if err := w.Write(&table.Batch{Rows: 4, Cols: []table.Column{{Form: table.FormText, Data: data, Offsets: offs}, {Form: table.FormInt64, Ints: ints}}}); err != nil {
			t.Fatal(err)
		}
		for i := range data {
			data[i], ints[i] = '!', -1
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	res := readAll(t, openBytes(t, "copy.parquet", buf.Bytes()))
	compareCells(t, "s", res.cols[0], want)
	for i, c := range res.cols[1] {
		if c.text != strconv.Itoa(i) {
			t.Fatalf("i row %d = %v", i+1, c)
		}
	}
}

// TestEmptyTable writes a schema and no rows.
func TestEmptyTable(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{{Name: "s", Kind: table.String, Nullable: true}, {Name: "f", Kind: table.Float64}}}
	data := writeCols(t, schema, []table.Column{{Form: table.FormText, Offsets: []int32{0}}, {Form: table.FormFloat64}}, 0, 1, WriterOptions{})
	r := openBytes(t, "empty.parquet", data)
	if r.NumRows() != 0 || !slices.Equal(r.Schema().Fields, schema.Fields) {
		t.Fatalf("NumRows %d, schema %v", r.NumRows(), r.Schema().Fields)
	}
	if _, err := r.Next(); err != io.EOF {
		t.Fatalf("Next = %v, want io.EOF", err)
	}
}

// dictFile writes a text column of n rows over levels levels, in row
// groups of rg rows.
func dictFile(t testing.TB, n, levels, rg int) ([]byte, []cell) {
	cells := make([]cell, n)
	for i := range cells {
		cells[i] = cell{text: "postcode-" + strconv.Itoa((i*7919)%levels)}
		if i%1000 == 999 {
			cells[i] = cell{null: true}
		}
	}
	schema := &table.Schema{Fields: []table.Field{{Name: "postcode", Kind: table.String, Nullable: true}}}
	data := writeCols(t, schema, []table.Column{col(t, table.String, table.FormText, cells)}, n, 4096, WriterOptions{RowGroupRows: rg})
	return data, cells
}

// TestDictionaryForm checks that a dictionary-encoded column comes in
// dictionary form, with one ID per column chunk.
func TestDictionaryForm(t *testing.T) {
	defer func(old int64) { batchRows = old }(batchRows)
	batchRows = 3000
	data, cells := dictFile(t, 20000, 300, 10000)
	r := openBytes(t, "dict.parquet", data)
	defer r.Close()
	var ids []uint64
	var got []cell
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		c := &b.Cols[0]
		if c.Form != table.FormDict {
			t.Fatalf("batch at row %d in form %d, want dictionary form", b.FirstRow, c.Form)
		}
		if c.Dict.Len() != 300 {
			t.Fatalf("dictionary has %d entries, want 300", c.Dict.Len())
		}
		ids = append(ids, c.Dict.ID)
		got = append(got, cellsOf(c, b.Rows)...)
	}
	compareCells(t, "postcode", got, cells)
	// Row groups of 10000 rows in batches of at most 3000: 4 batches each.
	if len(ids) != 8 {
		t.Fatalf("%d batches, want 8", len(ids))
	}
	for i := range ids {
		sameChunk := ids[i] == ids[i/4*4]
		if !sameChunk {
			t.Fatalf("dictionary IDs %v: batches of one row group differ", ids)
		}
	}
	if ids[0] == ids[4] {
		t.Fatalf("dictionary IDs %v: two row groups share an ID", ids)
	}
}

// TestDictionaryFallback reads a chunk whose dictionary overflowed, so that
// its first pages are dictionary encoded and the rest PLAIN, with batches
// small enough to be all-dictionary or all-PLAIN and with batches that mix
// the two kinds of page.
func TestDictionaryFallback(t *testing.T) {
	defer func(old int64) { batchRows = old }(batchRows)
	defer func(old int) { chunkRows = old }(chunkRows)
	chunkRows = 100
	withGeometry(t, 2000, 1<<17, 4000)
	data, cells := dictFile(t, 5000, 5000, 5000)
	r := openBytes(t, "fallback.parquet", data)
	// Check that the file really mixes the two kinds of page.
	var kinds []bool
	eachPage(t, r, 0, 0, func(p parquet.Page) { kinds = append(kinds, p.Dictionary() != nil) })
	r.Close()
	if len(kinds) < 3 || !kinds[0] || kinds[len(kinds)-1] {
		t.Fatalf("pages dictionary-encoded: %v, want dictionary pages first and PLAIN ones last", kinds)
	}
	for _, br := range []int64{100, 700, 5000} {
		batchRows = br
		r := openBytes(t, "fallback.parquet", data)
		res := readAll(t, r)
		r.Close()
		compareCells(t, fmt.Sprintf("batches of %d", br), res.cols[0], cells)
		if br == 100 && (!slices.Contains(res.forms[0], table.FormDict) || !slices.Contains(res.forms[0], table.FormText)) {
			t.Fatalf("forms %v, want both dictionary batches and text batches", res.forms[0])
		}
		if br == 5000 && !slices.Equal(res.forms[0], []table.Form{table.FormText}) {
			t.Fatalf("forms %v, want one text batch", res.forms[0])
		}
	}
}

// TestDictionaryProbe checks that a row group of nearly unique text gives
// up its dictionary after dictProbe values, and that one of few levels
// keeps it to the end; both read back unchanged.
func TestDictionaryProbe(t *testing.T) {
	const n = 3 * (1 << 14)
	cases := []struct {
		name           string
		levels         int
		dictLo, dictHi int64 // values in dictionary-encoded pages
	}{
		// The dictProbe-th value falls back; the nulls among the first
		// ones (one in 1000) come with them.
		{"unique", n, dictProbe - 1, dictProbe + dictProbe/1000},
		{"2000 levels", 2000, n, n},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			data, cells := dictFile(t, n, tc.levels, n)
			r := openBytes(t, "probe.parquet", data)
			var inDict int64
			eachPage(t, r, 0, 0, func(p parquet.Page) {
				if p.Dictionary() != nil {
					inDict += p.NumValues()
				}
			})
			res := readAll(t, r)
			r.Close()
			if inDict < tc.dictLo || inDict > tc.dictHi {
				t.Errorf("%d values in dictionary pages, want %d to %d", inDict, tc.dictLo, tc.dictHi)
			}
			compareCells(t, tc.name, res.cols[0], cells)
		})
	}
}

// countingReaderAt records the byte ranges read.
type countingReaderAt struct {
	r     io.ReaderAt
	reads [][2]int64
}

func (c *countingReaderAt) ReadAt(p []byte, off int64) (int, error) {
	n, err := c.r.ReadAt(p, off)
	c.reads = append(c.reads, [2]int64{off, off + int64(n)})
	return n, err
}

// TestSelectSkipsColumns checks that the chunks of unselected columns are
// never read.
func TestSelectSkipsColumns(t *testing.T) {
	const n = 20000
	var fields []table.Field
	var cols []table.Column
	var want [][]cell
	for i, k := range kinds {
		cells := sample(k, n, uint64(i+5))
		fields = append(fields, table.Field{Name: "c" + strconv.Itoa(i), Kind: k, Nullable: true})
		cols = append(cols, col(t, k, ownForm(k), cells))
		want = append(want, cells)
	}
	data := writeCols(t, &table.Schema{Fields: fields}, cols, n, 5000, WriterOptions{RowGroupRows: 8000})
	cr := &countingReaderAt{r: bytes.NewReader(data)}
	r, err := openReaderAt("select.parquet", cr, int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if err := r.Select([]int{3, 1}); err != nil {
		t.Fatal(err)
	}
	if got := r.Schema().Names(); !slices.Equal(got, []string{"c3", "c1"}) {
		t.Fatalf("selected schema %v", got)
	}
	cr.reads = nil
	res := readAll(t, r)
	compareCells(t, "c3", res.cols[0], want[3])
	compareCells(t, "c1", res.cols[1], want[1])
	if err := r.Select([]int{0}); err == nil {
		t.Fatal("Select after Next accepted")
	}
	for _, rg := range r.pf.Metadata().RowGroups {
		for ci, cc := range rg.Columns {
			start := cc.MetaData.DataPageOffset
			if d := cc.MetaData.DictionaryPageOffset; d > 0 && d < start {
				start = d
			}
			end := start + cc.MetaData.TotalCompressedSize
			for _, rd := range cr.reads {
				overlap := rd[0] < end && rd[1] > start
				if overlap && ci != 3 && ci != 1 {
					t.Fatalf("read [%d,%d) overlaps column %d's chunk [%d,%d)", rd[0], rd[1], ci, start, end)
				}
			}
		}
	}
	if len(cr.reads) == 0 {
		t.Fatal("no reads recorded")
	}
	// Bad selections.
	r2 := openBytes(t, "select.parquet", data)
	for _, sel := range [][]int{{4}, {-1}, {1, 1}} {
		if err := r2.Select(sel); err == nil {
			t.Fatalf("Select(%v) accepted", sel)
		}
	}
}

// TestCorruptFiles checks truncated and damaged files: errors wrap
// table.ErrCorrupt and name the file, and nothing panics.
func TestCorruptFiles(t *testing.T) {
	var fields []table.Field
	var cols []table.Column
	for i, k := range kinds {
		fields = append(fields, table.Field{Name: "c" + strconv.Itoa(i), Kind: k, Nullable: true})
		cols = append(cols, col(t, k, ownForm(k), sample(k, 100, uint64(i))))
	}
	data := writeCols(t, &table.Schema{Fields: fields}, cols, 100, 100, WriterOptions{Compression: "none", RowGroupRows: 60})
	const name = "damaged-shipments.parquet"

	if _, err := openReaderAt(name, bytes.NewReader(nil), 0); !errors.Is(err, table.ErrEmpty) {
		t.Fatalf("empty file: %v, want ErrEmpty", err)
	}
	// Every truncation loses the footer.
	for cut := 1; cut < len(data); cut++ {
		_, err := openReaderAt(name, bytes.NewReader(data[:cut]), int64(cut))
		if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), name) {
			t.Fatalf("truncated to %d bytes: %v, want ErrCorrupt naming the file", cut, err)
		}
	}
	for _, junk := range []string{"PAR1", "PAR1PAR1", "PAR1\x00\x00\x00\x00PAR1", "PAR1\xff\xff\xff\x7fPAR1", "not parquet at all"} {
		if _, err := openReaderAt(name, strings.NewReader(junk), int64(len(junk))); !errors.Is(err, table.ErrCorrupt) {
			t.Fatalf("%q: %v, want ErrCorrupt", junk, err)
		}
	}
	// Damage each byte of the pages in turn (and a few of the footer):
	// reading must end in success or in an ErrCorrupt naming the file and
	// a column, never in a panic.
	failures := 0
	for pos := 4; pos < len(data)-8; pos++ {
		bad := slices.Clone(data)
		bad[pos] ^= 0x5a
		r, err := openReaderAt(name, bytes.NewReader(bad), int64(len(bad)))
		if err != nil {
			if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), name) {
				t.Fatalf("byte %d damaged: open: %v", pos, err)
			}
			failures++
			continue
		}
		for {
			_, err := r.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), name) || !strings.Contains(err.Error(), "column") {
					t.Fatalf("byte %d damaged: Next: %v", pos, err)
				}
				if _, err2 := r.Next(); err2 == nil || err2 == io.EOF {
					t.Fatalf("byte %d damaged: Next after an error: %v", pos, err2)
				}
				failures++
				break
			}
		}
		r.Close()
	}
	if failures == 0 {
		t.Fatal("no damaged file was reported")
	}
}

// TestDictionaryIndexOutOfRange hand-damages a dictionary index so that it
// points past the dictionary while staying within the page's bit width, so
// that only the index check can catch it (the page's CRC is made to
// match).
func TestDictionaryIndexOutOfRange(t *testing.T) {
	var cells []cell
	for _, v := range []string{"a", "b", "c", "a", "b", "c", "a", "b"} {
		cells = append(cells, cell{text: v})
	}
	schema := &table.Schema{Fields: []table.Field{{Name: "s", Kind: table.String}}}
	data := writeCols(t, schema, []table.Column{col(t, table.String, table.FormText, cells)}, 8, 8, WriterOptions{Compression: "none"})
	// The data page (v1, no levels for a required column) holds the indices
	// 0 1 2 0 1 2 0 1 at bit width 2 as one bit-packed run: header 0x03 (one
	// group of 8, low bit set), then the values packed from the least
	// significant bit up, 0x24 0x49 (layout from the Parquet format's
	// RLE/bit-packing hybrid encoding, Encodings.md; bytes computed by hand).
	body := []byte{0x02, 0x03, 0x24, 0x49}
	at := bytes.Index(data, body)
	if at < 0 {
		t.Fatal("data page layout not found")
	}
	bad := slices.Clone(data)
	bad[at+2] = 0xE4 // the fourth index becomes 3; the dictionary has 3 entries
	bad = rebuild(t, bad, func(_, _, _ int, h *format.PageHeader, body []byte) []byte { return withCRC(h, body) }, nil)
	r := openBytes(t, "index.parquet", bad)
	_, err := r.Next()
	r.Close()
	if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), `"s"`) || !strings.Contains(err.Error(), "dictionary index") {
		t.Fatalf("Next: %v, want ErrCorrupt naming column s and the bad index", err)
	}
	// The undamaged file reads back.
	r = openBytes(t, "index.parquet", data)
	res := readAll(t, r)
	r.Close()
	compareCells(t, "undamaged", res.cols[0], cells)
}

func TestOpenMissingFile(t *testing.T) {
	_, err := Open("/nonexistent/route-plan.parquet")
	if err == nil || !strings.Contains(err.Error(), "route-plan.parquet") {
		t.Fatalf("Open: %v", err)
	}
}

// TestWriteAllocations checks that writing numeric columns does not
// allocate per row.
func TestWriteAllocations(t *testing.T) {
	const n = 1 << 14
	schema := &table.Schema{Fields: []table.Field{{Name: "i", Kind: table.Int64, Nullable: true}, {Name: "f", Kind: table.Float64}, {Name: "b", Kind: table.Bool}}}
	b := &table.Batch{Rows: n, Cols: []table.Column{
		{Form: table.FormInt64, Ints: make([]int64, n), Nulls: make([]bool, n)},
		{Form: table.FormFloat64, Floats: make([]float64, n)},
		{Form: table.FormBool, Bools: make([]bool, n)},
	}}
	for i := 0; i < n; i++ {
		b.Cols[0].Ints[i] = int64(i * 31)
		b.Cols[0].Nulls[i] = i%9 == 0
		b.Cols[1].Floats[i] = float64(i) / 3
		b.Cols[2].Bools[i] = i%3 == 0
	}
	w, err := NewWriter(io.Discard, schema, WriterOptions{RowGroupRows: 1 << 30})
	if err != nil {
		t.Fatal(err)
	}
	w.Write(b) // warm up the column buffers
	allocs := testing.AllocsPerRun(5, func() {
		if err := w.Write(b); err != nil {
			t.Fatal(err)
		}
	})
	if perRow := allocs / n; perRow > 0.01 {
		t.Fatalf("%.0f allocations for %d rows (%.3f per row)", allocs, n, perRow)
	}
	t.Logf("%.0f allocations per Write of %d rows", allocs, n)
}

// withGeometry makes the writer's pages end at pageBytes bytes or
// pageVals values and its dictionaries at dictMax bytes until the test
// ends.
func withGeometry(t testing.TB, pageB, pageVals, dictMax int) {
	oldB, oldV, oldD := pageBytes, pageValues, dictMaxBytes
	pageBytes, pageValues, dictMaxBytes = pageB, pageVals, dictMax
	t.Cleanup(func() { pageBytes, pageValues, dictMaxBytes = oldB, oldV, oldD })
}

// TestNumberDictionary checks the dictionary of int64 and float64 columns:
// few distinct values stay in dictionary pages to the end of the row
// group, nearly unique ones give up after dictProbe values, and either way
// every value reads back with its exact bit pattern (-0 stays -0, a NaN
// keeps its payload) and the chunk's minimum and maximum are those of the
// values (NaN left out; Parquet format, statistics of floating-point
// columns).
func TestNumberDictionary(t *testing.T) {
	const n = 3 * (1 << 14)
	const batch = 4096
	nan := math.Float64frombits(0x7ff8000000000123)
	five := []float64{-1.5, 0, math.Copysign(0, -1), nan, 2.5}
	cases := []struct {
		name           string
		kind           table.Kind
		value          func(i int) uint64 // bit pattern of row i
		dictLo, dictHi int64              // values (nulls included) in dictionary pages
		min, max       uint64
	}{
		{"constant int", table.Int64, func(int) uint64 { return 42 }, n, n, 42, 42},
		{"2000 ints", table.Int64, func(i int) uint64 { return uint64((i * 7919) % 2000) }, n, n, 0, 1999},
		{"five floats", table.Float64, func(i int) uint64 { return math.Float64bits(five[i%5]) }, n, n,
			math.Float64bits(-1.5), math.Float64bits(2.5)},
		// The probe ends the dictionary at the end of the batch that
		// reaches dictProbe values.
		{"unique floats", table.Float64, func(i int) uint64 { return math.Float64bits(float64(i) * 1.1) }, dictProbe, dictProbe + batch,
			// A zero minimum is written as -0 (the format's rule for
			// float statistics).
			math.Float64bits(math.Copysign(0, -1)), math.Float64bits(float64(n-1) * 1.1)},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := table.Column{Form: table.FormInt64, Nulls: make([]bool, n)}
			if tc.kind == table.Float64 {
				c.Form = table.FormFloat64
			}
			for i := 0; i < n; i++ {
				b := tc.value(i)
				if tc.kind == table.Int64 {
					c.Ints = append(c.Ints, int64(b))
				} else {
					c.Floats = append(c.Floats, math.Float64frombits(b))
				}
				c.Nulls[i] = i%1000 == 999
			}
			schema := &table.Schema{Fields: []table.Field{{Name: "x", Kind: tc.kind, Nullable: true}}}
			data := writeCols(t, schema, []table.Column{c}, n, batch, WriterOptions{RowGroupRows: n})
			r := openBytes(t, "numbers.parquet", data)
			defer r.Close()
			var inDict int64
			eachPage(t, r, 0, 0, func(p parquet.Page) {
				if p.Dictionary() != nil {
					inDict += p.NumValues()
				}
			})
			if inDict < tc.dictLo || inDict > tc.dictHi {
				t.Errorf("%d values in dictionary pages, want %d to %d", inDict, tc.dictLo, tc.dictHi)
			}
			st := r.pf.Metadata().RowGroups[0].Columns[0].MetaData.Statistics
			if got := binary.LittleEndian.Uint64(st.MinValue); got != tc.min {
				t.Errorf("min_value %#x, want %#x", got, tc.min)
			}
			if got := binary.LittleEndian.Uint64(st.MaxValue); got != tc.max {
				t.Errorf("max_value %#x, want %#x", got, tc.max)
			}
			row := 0
			if err := table.ForEach(r, func(b *table.Batch) error {
				col := &b.Cols[0]
				for i := 0; i < b.Rows; i++ {
					want := tc.value(row)
					switch {
					case col.IsNull(i) != (row%1000 == 999):
						return fmt.Errorf("row %d: null %v", row, col.IsNull(i))
					case col.IsNull(i):
					case tc.kind == table.Int64 && uint64(col.Ints[i]) != want:
						return fmt.Errorf("row %d reads back as %d, want %d", row, col.Ints[i], int64(want))
					case tc.kind == table.Float64 && math.Float64bits(col.Floats[i]) != want:
						return fmt.Errorf("row %d reads back as bits %#x, want %#x", row, math.Float64bits(col.Floats[i]), want)
					}
					row++
				}
				return nil
			}); err != nil {
				t.Fatal(err)
			}
			if row != n {
				t.Fatalf("read %d rows, wrote %d", row, n)
			}
		})
	}
}
