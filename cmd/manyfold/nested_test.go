package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"
)

// parcelProps is a struct column of the nested test table.
type parcelProps struct {
	Weight int64   `parquet:"weight"`
	Note   *string `parquet:"note,optional"`
}

// nestedParcel is a row of a Parquet table whose flat columns sit between
// a list, a struct and a map.
type nestedParcel struct {
	ID       int64            `parquet:"id"`
	Tags     []string         `parquet:"tags,list"`
	Postcode string           `parquet:"postcode"`
	Props    parcelProps      `parquet:"props"`
	Late     int64            `parquet:"late"`
	Attrs    map[string]int32 `parquet:"attrs"`
}

// canonical returns the row with empty lists and maps as nil, which a
// reader may give either way.
func (p nestedParcel) canonical() nestedParcel {
	if len(p.Tags) == 0 {
		p.Tags = nil
	}
	if len(p.Attrs) == 0 {
		p.Attrs = nil
	}
	return p
}

// encodedParcel is a row of the encoded output: the input's columns and
// the encoded one.
type encodedParcel struct {
	nestedParcel
	Tmean float64 `parquet:"postcode_tmean"`
}

// keptParcel is a row of the output of --keep id,tags.
type keptParcel struct {
	ID    int64    `parquet:"id"`
	Tags  []string `parquet:"tags,list"`
	Tmean float64  `parquet:"postcode_tmean"`
}

// nestedParcels generates n rows, with empty lists and maps, in row
// groups of 100.
func nestedParcels(t *testing.T, path string, n int) []nestedParcel {
	t.Helper()
	rows := make([]nestedParcel, n)
	for i := range rows {
		r := &rows[i]
		r.ID, r.Postcode, r.Late = int64(i), "PC"+strconv.Itoa(i%9), int64(i%3%2)
		for k := 0; k < i%4; k++ {
			r.Tags = append(r.Tags, "fragile-"+strconv.Itoa((i+k)%5))
		}
		r.Props.Weight = int64(100 + i)
		if i%5 != 0 {
			note := "note " + strconv.Itoa(i%7)
			r.Props.Note = &note
		}
		if i%3 != 0 {
			r.Attrs = map[string]int32{"floor": int32(i % 6), "door": int32(i)}
		}
	}
	writeParquetRows(t, path, rows)
	return rows
}

// writeParquetRows writes rows with parquet-go's writer.
func writeParquetRows[T any](t *testing.T, path string, rows []T) {
	t.Helper()
	var buf bytes.Buffer
	w := parquet.NewGenericWriter[T](&buf, parquet.Compression(&parquet.Snappy), parquet.MaxRowsPerRowGroup(100))
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

// readParquetRows reads every row of a Parquet file with parquet-go's
// reader, by column name.
func readParquetRows[T any](t *testing.T, path string) []T {
	t.Helper()
	rows, err := parquet.ReadFile[T](path)
	if err != nil {
		t.Fatalf("read %s: %v", path, err)
	}
	return rows
}

// topNames returns the top-level column names of a Parquet file.
func topNames(t *testing.T, path string) []string {
	t.Helper()
	var names []string
	meta := footer(t, path)
	for i := 1; i < len(meta.Schema); {
		names = append(names, meta.Schema[i].Name)
		i += subtreeLen(meta.Schema[i:])
	}
	return names
}

// subtreeLen counts the schema elements of the subtree at s[0].
func subtreeLen(s []format.SchemaElement) int {
	n := 1
	children, _ := s[0].NumChildren.Get()
	for k := 0; k < int(children); k++ {
		n += subtreeLen(s[n:])
	}
	return n
}

// TestNestedParquetColumnsKept: encode and apply of a Parquet file with
// list, struct and map columns write them back, in the input's column
// order (or --keep's), with the values the input holds.
func TestNestedParquetColumnsKept(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "parcels.parquet")
	rows := nestedParcels(t, in, 450)
	out, tables := filepath.Join(dir, "enc.parquet"), filepath.Join(dir, "tables")
	mustRun(t, "encode", in, "--target", "late", "--columns", "postcode", "--out", out, "--tables", tables)
	applied := filepath.Join(dir, "applied.parquet")
	mustRun(t, "apply", in, "--tables", tables, "--out", applied)
	for _, path := range []string{out, applied} {
		want := "id,tags,postcode,props,late,attrs,postcode_tmean"
		if got := strings.Join(topNames(t, path), ","); got != want {
			t.Fatalf("%s: columns %s, want %s", filepath.Base(path), got, want)
		}
		got := readParquetRows[encodedParcel](t, path)
		if len(got) != len(rows) {
			t.Fatalf("%s: %d rows, want %d", filepath.Base(path), len(got), len(rows))
		}
		for i := range rows {
			if !reflect.DeepEqual(got[i].nestedParcel.canonical(), rows[i].canonical()) {
				t.Fatalf("%s: row %d is %+v, the input's %+v", filepath.Base(path), i, got[i].nestedParcel, rows[i])
			}
		}
	}
	// The schema subtrees are the input's.
	inMeta, outMeta := footer(t, in), footer(t, out)
	for _, name := range []string{"tags", "props", "attrs"} {
		a, b := subtree(inMeta.Schema, name), subtree(outMeta.Schema, name)
		if !reflect.DeepEqual(a, b) {
			t.Fatalf("%s: schema %+v, the input's %+v", name, b, a)
		}
	}

	kept := filepath.Join(dir, "kept.parquet")
	mustRun(t, "encode", in, "--target", "late", "--columns", "postcode", "--keep", "id,tags", "--out", kept, "--tables", filepath.Join(dir, "t2"))
	if got := strings.Join(topNames(t, kept), ","); got != "id,tags,postcode_tmean" {
		t.Fatalf("--keep id,tags: columns %s", got)
	}
	for i, r := range readParquetRows[keptParcel](t, kept) {
		if r.ID != rows[i].ID || !slices.Equal(r.Tags, rows[i].Tags) {
			t.Fatalf("--keep id,tags: row %d is %+v", i, r)
		}
	}
}

// subtree returns the schema elements of the top-level column name.
func subtree(s []format.SchemaElement, name string) []format.SchemaElement {
	for i := 1; i < len(s); {
		n := subtreeLen(s[i:])
		if s[i].Name == name {
			return s[i : i+n]
		}
		i += n
	}
	return nil
}

// TestScanListsNestedColumns: scan names the nested columns, with their
// kinds, as not encodable, in text and JSON.
func TestScanListsNestedColumns(t *testing.T) {
	in := filepath.Join(t.TempDir(), "parcels.parquet")
	nestedParcels(t, in, 50)
	res := mustRun(t, "scan", in)
	for _, w := range []string{"tags  [list]  a nested column: not encodable", "props  [struct]", "attrs  [map]", "postcode  [text]"} {
		if !strings.Contains(res.stdout, w) {
			t.Errorf("scan output lacks %q:\n%s", w, res.stdout)
		}
	}
	res = mustRun(t, "scan", in, "--json")
	var doc struct {
		Columns      []map[string]any    `json:"columns"`
		NotEncodable []map[string]string `json:"not_encodable"`
	}
	if err := json.Unmarshal([]byte(res.stdout), &doc); err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, n := range doc.NotEncodable {
		got = append(got, n["name"]+":"+n["type"])
	}
	if strings.Join(got, ",") != "tags:list,props:struct,attrs:map" || len(doc.Columns) != 3 {
		t.Fatalf("scan --json: not encodable %v, %d columns", got, len(doc.Columns))
	}
}

// onlyNestedParcel has no flat column.
type onlyNestedParcel struct {
	Tags  []string    `parquet:"tags,list"`
	Props parcelProps `parquet:"props"`
}

func TestBadNested(t *testing.T) {
	nested := func(t *testing.T, dir string) string {
		p := filepath.Join(dir, "parcels.parquet")
		nestedParcels(t, p, 30)
		return p
	}
	enc := func(dir, in, out string, flags ...string) []string {
		return append([]string{"encode", in, "--target", "late", "--out", filepath.Join(dir, "out", out), "--tables", filepath.Join(dir, "out", "tables")}, flags...)
	}
	cases := []badCase{
		{"nested kept in a CSV output", func(t *testing.T, dir string) []string {
			return enc(dir, nested(t, dir), "enc.csv", "--columns", "postcode")
		}, exitUsage, []string{inPlaceholder, `columns "tags" (list), "props" (struct), "attrs" (map) are kept`, "CSV output cannot hold them", "(the columns to write back: --keep id,postcode,late)"}},
		{"nested kept in an Arrow output", func(t *testing.T, dir string) []string {
			return enc(dir, nested(t, dir), "enc.arrow", "--columns", "postcode", "--keep", "id,props")
		}, exitUsage, []string{inPlaceholder, `column "props" (struct) is kept`, "Arrow output cannot hold it: leave it out with --keep", "(the columns to write back: --keep id)"}},
		{"apply with nested to CSV", func(t *testing.T, dir string) []string {
			in := nested(t, dir)
			tables := filepath.Join(dir, "tables")
			mustRun(t, "encode", in, "--target", "late", "--columns", "postcode", "--keep", "none", "--out", filepath.Join(dir, "e.csv"), "--tables", tables)
			return []string{"apply", in, "--tables", tables, "--out", filepath.Join(dir, "out", "applied.csv")}
		}, exitUsage, []string{inPlaceholder, `"attrs" (map)`, "written back by apply", "write a Parquet output"}},
		{"encode a nested column", func(t *testing.T, dir string) []string {
			return enc(dir, nested(t, dir), "enc.parquet", "--columns", "postcode,tags")
		}, exitUsage, []string{inPlaceholder, `--columns "tags" is a nested Parquet column (list): only flat columns can be encoded`}},
		{"nested target", func(t *testing.T, dir string) []string {
			return append(enc(dir, nested(t, dir), "enc.parquet", "--columns", "postcode"), "--target", "props")
		}, exitUsage, []string{`--target "props" is a nested Parquet column (struct)`}},
		{"compare a nested column", func(t *testing.T, dir string) []string {
			return []string{"compare", nested(t, dir), "--target", "late", "--columns", "postcode,props"}
		}, exitUsage, []string{inPlaceholder, `--columns "props" is a nested Parquet column (struct): only flat columns can be encoded`}},
		{"scan a nested column", func(t *testing.T, dir string) []string {
			return []string{"scan", nested(t, dir), "--columns", "attrs"}
		}, exitUsage, []string{inPlaceholder, `--columns "attrs" is a nested Parquet column (map)`}},
		{"encode a file of nested columns only", func(t *testing.T, dir string) []string {
			p := filepath.Join(dir, "nested.parquet")
			writeParquetRows(t, p, []onlyNestedParcel{{Tags: []string{"a"}}, {}})
			return enc(dir, p, "enc.parquet", "--columns", "tags")
		}, exitInput, []string{inPlaceholder, `no flat columns`, `"tags" (list), "props" (struct)`}},
		{"scan a file of nested columns only", func(t *testing.T, dir string) []string {
			p := filepath.Join(dir, "nested.parquet")
			writeParquetRows(t, p, []onlyNestedParcel{{Tags: []string{"a"}}, {}})
			return []string{"scan", p}
		}, exitInput, []string{inPlaceholder, `no flat columns`}},
	}
	runBad(t, cases)
}
