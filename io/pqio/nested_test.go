package pqio

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/apache/arrow/go/v17/arrow"
	pq "github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// nestedProps is a struct column.
type nestedProps struct {
	A int64   `parquet:"a"`
	B *string `parquet:"b,optional"`
}

// nestedRow has flat columns between a list, a struct, a map and a bare
// repeated column.
type nestedRow struct {
	ID    int64            `parquet:"id"`
	Tags  []string         `parquet:"tags,list"`
	City  string           `parquet:"city"`
	Props nestedProps      `parquet:"props"`
	Attrs map[string]int32 `parquet:"attrs"`
	Y     float64          `parquet:"y"`
	Raw   []int32          `parquet:"raw"`
}

// onlyNested has no flat column.
type onlyNested struct {
	Tags  []string    `parquet:"tags,list"`
	Props nestedProps `parquet:"props"`
}

// writeNested writes rows with parquet-go's writer, Snappy-compressed, in
// row groups of rowGroup rows, to path.
func writeNested[T any](t testing.TB, path string, rows []T, rowGroup int64) {
	t.Helper()
	var buf bytes.Buffer
	w := pq.NewGenericWriter[T](&buf, pq.Compression(&pq.Snappy), pq.MaxRowsPerRowGroup(rowGroup))
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// nestedRows generates n rows with empty, null and long lists and maps.
func nestedRows(n int) []nestedRow {
	rows := make([]nestedRow, n)
	for i := range rows {
		r := &rows[i]
		r.ID, r.City, r.Y = int64(i), "c"+strconv.Itoa(i%37), float64(i)/8
		for k := 0; k < i%5; k++ {
			r.Tags = append(r.Tags, "t"+strconv.Itoa(i*k%11))
			r.Raw = append(r.Raw, int32(i-k))
		}
		r.Props.A = int64(i * 3)
		if i%4 != 0 {
			s := "b" + strconv.Itoa(i%13)
			r.Props.B = &s
		}
		if i%3 != 0 {
			r.Attrs = map[string]int32{"k" + strconv.Itoa(i%7): int32(i)}
		}
	}
	return rows
}

// arrowColumns reads a Parquet file with Arrow's reader and returns each
// column's values as text, row by row, by name, and the column types.
func arrowColumns(t *testing.T, path string) (map[string][]string, map[string]arrow.DataType, []string) {
	t.Helper()
	vals := map[string][]string{}
	types := map[string]arrow.DataType{}
	sch := arrowRead(t, nil, path, nil, func(rec arrow.Record) {
		for i, f := range rec.Schema().Fields() {
			a := rec.Column(i)
			for r := 0; r < a.Len(); r++ {
				vals[f.Name] = append(vals[f.Name], a.ValueStr(r))
			}
		}
	})
	var names []string
	for _, f := range sch.Fields() {
		types[f.Name] = f.Type
		names = append(names, f.Name)
	}
	return vals, types, names
}

// TestNestedColumnsCopied copies a file's flat and nested columns into an
// output that adds a column of its own: the nested columns keep their
// place, their schema and their chunk bytes, and Arrow's reader reads the
// same values from both files.
func TestNestedColumnsCopied(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "in.parquet")
	const n = 1000
	writeNested(t, in, nestedRows(n), 300)

	r, err := Open(in)
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(r.Schema().Names(), ","); got != "id,city,y" {
		t.Fatalf("flat columns %s, want id,city,y", got)
	}
	want := []Nested{{"tags", "list", 1}, {"props", "struct", 2}, {"attrs", "map", 2}, {"raw", "list", 3}}
	if !slices.Equal(r.Nested(), want) {
		t.Fatalf("Nested() = %v, want %v", r.Nested(), want)
	}
	r.Close()

	s, err := OpenSource(in)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	fields := []table.Field{{Name: "id", Kind: table.Int64}, {Name: "city", Kind: table.String}, {Name: "y", Kind: table.Float64}, {Name: "row", Kind: table.Int64}}
	for _, name := range []string{"id", "city", "y", "tags", "props", "attrs", "raw"} {
		if err := s.CanCopy(name); err != nil {
			t.Fatalf("CanCopy(%s): %v", name, err)
		}
	}
	out := filepath.Join(dir, "out.parquet")
	f, err := os.Create(out)
	if err != nil {
		t.Fatal(err)
	}
	w, err := NewWriter(f, &table.Schema{Fields: fields}, WriterOptions{Source: s, Copy: []bool{true, true, true, false}, Nested: want})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < n; i += 256 {
		k := min(256, n-i)
		b := &table.Batch{Rows: k, FirstRow: int64(i + 1), Cols: make([]table.Column, len(fields))}
		rows := make([]int64, k)
		for j := range rows {
			rows[j] = int64(i + j)
		}
		b.Cols[3] = table.Column{Form: table.FormInt64, Ints: rows}
		if err := w.Write(b); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()

	inVals, inTypes, _ := arrowColumns(t, in)
	outVals, outTypes, order := arrowColumns(t, out)
	if got := strings.Join(order, ","); got != "id,tags,city,props,attrs,y,raw,row" {
		t.Fatalf("output columns %s", got)
	}
	for _, name := range []string{"id", "tags", "city", "props", "attrs", "y", "raw"} {
		if !arrow.TypeEqual(inTypes[name], outTypes[name]) {
			t.Errorf("%s: type %v, input %v", name, outTypes[name], inTypes[name])
		}
		if !slices.Equal(inVals[name], outVals[name]) || len(outVals[name]) != n {
			t.Errorf("%s: %d values differ from the input's %d", name, len(outVals[name]), len(inVals[name]))
		}
	}
	if outVals["tags"][3] != `["t0","t3","t6"]` {
		t.Errorf("tags of row 3: %s", outVals["tags"][3])
	}
	// The chunks are the input's bytes.
	ro, err := OpenSource(out)
	if err != nil {
		t.Fatal(err)
	}
	defer ro.Close()
	for _, name := range []string{"tags", "props", "attrs", "raw"} {
		ti, to := s.cols[name], ro.cols[name]
		if len(ti.paths) != len(to.paths) || !slices.EqualFunc(ti.elems, to.elems, func(a, b format.SchemaElement) bool { return a.Name == b.Name }) {
			t.Fatalf("%s: schema subtree differs", name)
		}
		for g := range s.parts[0].meta.RowGroups {
			for l := range ti.paths {
				a, b := chunkBytes(t, s, g, ti.first+l), chunkBytes(t, ro, g, to.first+l)
				if !bytes.Equal(a, b) {
					t.Fatalf("%s: leaf %d of row group %d: chunk bytes differ", name, l, g)
				}
			}
		}
	}
	// Our reader reads the flat columns of the output.
	ro2, err := Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer ro2.Close()
	res := readAll(t, ro2)
	if got := len(res.cols[0]); got != n || res.cols[1][5].text != "c5" || res.cols[3][999].text != "999" {
		t.Fatalf("flat columns read back wrong: %d rows, %v, %v", got, res.cols[1][5], res.cols[3][999])
	}
	if !slices.Equal(ro2.Nested(), []Nested{{"tags", "list", 1}, {"props", "struct", 2}, {"attrs", "map", 2}, {"raw", "list", 3}}) {
		t.Fatalf("output's nested columns: %v", ro2.Nested())
	}
}

// chunkBytes returns the bytes of leaf column col's chunk in row group g.
func chunkBytes(t *testing.T, s *Source, g, col int) []byte {
	t.Helper()
	md := s.parts[0].meta.RowGroups[g].Columns[col].MetaData
	start, size := chunkRange(&md)
	b := make([]byte, size)
	if err := s.parts[0].open(); err != nil {
		t.Fatal(err)
	}
	if _, err := s.parts[0].f.ReadAt(b, start); err != nil {
		t.Fatal(err)
	}
	return b
}

// TestOnlyNestedColumns checks that a file of nested columns only is
// refused as holding no table, naming its columns.
func TestOnlyNestedColumns(t *testing.T) {
	path := filepath.Join(t.TempDir(), "nested.parquet")
	writeNested(t, path, []onlyNested{{Tags: []string{"a"}}, {}}, 10)
	_, err := Open(path)
	if err == nil {
		t.Fatal("opened a file without flat columns")
	}
	msg := err.Error()
	if !errors.Is(err, table.ErrEmpty) || !strings.Contains(msg, "no flat columns") ||
		!strings.Contains(msg, `"tags" (list)`) || !strings.Contains(msg, `"props" (struct)`) {
		t.Fatalf("error %q", msg)
	}
}

// TestTopColumnsBadSchemas: a footer whose child counts do not add up is
// corrupt, never a panic or a runaway recursion.
func TestTopColumnsBadSchemas(t *testing.T) {
	leaf := func(name string) format.SchemaElement {
		return format.SchemaElement{Name: name, Type: thrift.New(format.Int64)}
	}
	group := func(name string, n int32) format.SchemaElement {
		return format.SchemaElement{Name: name, NumChildren: thrift.New(n)}
	}
	deep := []format.SchemaElement{group("root", 1)}
	for i := 0; i < 1000; i++ {
		deep = append(deep, group("g", 1))
	}
	deep = append(deep, leaf("x"))
	for name, sch := range map[string][]format.SchemaElement{
		"empty":            nil,
		"root too many":    {group("root", 3), leaf("a")},
		"root negative":    {group("root", -1), leaf("a")},
		"group cut short":  {group("root", 1), group("g", 5), leaf("a")},
		"elements left":    {group("root", 1), leaf("a"), leaf("b")},
		"too deep":         deep,
		"huge child count": {group("root", 1), group("g", 1<<30)},
	} {
		if _, err := topColumns(sch); !errors.Is(err, table.ErrCorrupt) {
			t.Errorf("%s: %v, want a corrupt file", name, err)
		}
	}
	cols, err := topColumns([]format.SchemaElement{group("root", 2), group("s", 2), leaf("a"), leaf("b"), leaf("c")})
	if err != nil || len(cols) != 2 || cols[0].kind != "struct" || cols[1].kind != "" || cols[1].first != 2 ||
		!slices.Equal(cols[0].paths[1], []string{"s", "b"}) {
		t.Fatalf("topColumns: %+v, %v", cols, err)
	}
}
