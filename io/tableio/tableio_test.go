package tableio

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/array"
	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"

	"manyfold/io/table"
)

func TestDetect(t *testing.T) {
	cases := []struct {
		name string
		head []byte
		want Format
		err  error
	}{
		{"parquet magic", []byte("PAR1\x15\x04\x15"), Parquet, nil},
		{"arrow file magic", []byte("ARROW1\x00\x00\xff\xff\xff\xff"), Arrow, nil},
		{"arrow stream marker", []byte{0xff, 0xff, 0xff, 0xff, 0x78, 0, 0, 0}, Arrow, nil},
		{"csv text", []byte("shipment,postcode,late\nS-1,PC-10452,true\n"), CSV, nil},
		{"text with tabs and CRLF", []byte("route\tcost\r\nR-1\t4.5\r\n"), CSV, nil},
		{"utf-8 text", []byte("depot\nZ\xc3\xbcrich-Nord\n"), CSV, nil},
		{"gzip magic", []byte{0x1f, 0x8b, 0x08, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x03}, CSV, nil},
		{"zstd magic", []byte{0x28, 0xb5, 0x2f, 0xfd, 0x04, 0x00}, CSV, nil},
		{"binary junk with NUL", []byte{'P', 'K', 0x03, 0x04, 0x00, 0x00}, "", table.ErrUnknownFormat},
		{"binary junk with control byte", []byte("route\x01cost\n"), "", table.ErrUnknownFormat},
		{"empty", nil, "", table.ErrEmpty},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got, err := Detect(tc.head)
			if got != tc.want || !errors.Is(err, tc.err) || (tc.err == nil && err != nil) {
				t.Errorf("Detect = %q, %v; want %q, %v", got, err, tc.want, tc.err)
			}
		})
	}
}

func TestFormatOf(t *testing.T) {
	cases := []struct {
		path string
		want Format
	}{
		{"out/shipments.csv", CSV},
		{"shipments.TSV", CSV},
		{"shipments.txt", CSV},
		{"shipments.parquet", Parquet},
		{"shipments.PQ", Parquet},
		{"shipments.arrow", Arrow},
		{"shipments.ipc", Arrow},
		{"shipments.feather", Arrow},
		{"shipments.csv.gz", CSV},
		{"shipments.TSV.zst", CSV},
		{"shipments.csv.zstd", CSV},
		{"shipments.parquet.gz", ""}, // only CSV is compressed whole
		{"shipments.gz", ""},
		{"shipments.json", ""},
		{"shipments", ""},
		{"dir.parquet/shipments", ""},
	}
	for _, tc := range cases {
		if got := FormatOf(tc.path); got != tc.want {
			t.Errorf("FormatOf(%q) = %q, want %q", tc.path, got, tc.want)
		}
	}
}

// cell is one expected value: null, or its canonical text.
type cell struct {
	null bool
	text string
}

func (c cell) String() string {
	if c.null {
		return "<null>"
	}
	return fmt.Sprintf("%q", c.text)
}

// testSchema and testBatch: a small shipment table with every kind and
// nulls at the first, a middle and the last row.
var testSchema = &table.Schema{Fields: []table.Field{
	{Name: "postcode", Kind: table.String, Nullable: true},
	{Name: "parcels", Kind: table.Int64, Nullable: true},
	{Name: "cost", Kind: table.Float64, Nullable: true},
	{Name: "late", Kind: table.Bool, Nullable: true},
}}

var testWant = [][]cell{
	{{null: true}, {text: "PC-10452"}, {text: ""}, {text: "PC-00501"}, {text: "PC-7, rear"}},
	{{text: "3"}, {null: true}, {text: "-12"}, {text: "0"}, {null: true}},
	{{text: "4.25"}, {text: "0.1"}, {null: true}, {text: "-7.5"}, {text: "1e+21"}},
	{{text: "true"}, {text: "false"}, {text: "true"}, {null: true}, {null: true}},
}

func testBatch() *table.Batch {
	n := len(testWant[0])
	b := &table.Batch{Rows: n, FirstRow: 1, Cols: make([]table.Column, len(testWant))}
	post := table.Column{Form: table.FormText, Offsets: []int32{0}, Nulls: make([]bool, n)}
	for i, c := range testWant[0] {
		post.Data = append(post.Data, c.text...)
		post.Offsets = append(post.Offsets, int32(len(post.Data)))
		post.Nulls[i] = c.null
	}
	b.Cols[0] = post
	b.Cols[1] = table.Column{Form: table.FormInt64, Ints: []int64{3, 0, -12, 0, 0}, Nulls: []bool{false, true, false, false, true}}
	b.Cols[2] = table.Column{Form: table.FormFloat64, Floats: []float64{4.25, 0.1, 0, -7.5, 1e21}, Nulls: []bool{false, false, true, false, false}}
	b.Cols[3] = table.Column{Form: table.FormBool, Bools: []bool{true, false, true, false, false}, Nulls: []bool{false, false, false, true, true}}
	return b
}

// checkTable reads r to the end and compares its schema and rows.
func checkTable(t *testing.T, r table.Reader, schema *table.Schema, want [][]cell) {
	t.Helper()
	s := r.Schema()
	if len(s.Fields) != len(schema.Fields) {
		t.Fatalf("schema %v, want %v", s.Fields, schema.Fields)
	}
	for i, f := range s.Fields {
		if f.Name != schema.Fields[i].Name || f.Kind != schema.Fields[i].Kind {
			t.Errorf("field %d = %s %s, want %s %s", i, f.Name, f.Kind, schema.Fields[i].Name, schema.Fields[i].Kind)
		}
	}
	row := 0
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		for ci := range b.Cols {
			for i := 0; i < b.Rows; i++ {
				got := cell{null: b.Cols[ci].IsNull(i), text: string(b.Cols[ci].AppendText(nil, i))}
				if row+i >= len(want[ci]) {
					t.Fatalf("more than %d rows", len(want[ci]))
				}
				if got != want[ci][row+i] {
					t.Errorf("column %s row %d: %v, want %v", s.Fields[ci].Name, row+i+1, got, want[ci][row+i])
				}
			}
		}
		row += b.Rows
	}
	if row != len(want[0]) {
		t.Errorf("%d rows, want %d", row, len(want[0]))
	}
}

// dirNames lists the names in dir, sorted.
func dirNames(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	sort.Strings(names)
	return names
}

func TestCreateAbortCommitOpen(t *testing.T) {
	cases := []struct {
		name   string
		file   string
		format Format // WriteOptions.Format
		want   Format // what Detect must see in the output
	}{
		{"csv", "shipments.csv", "", CSV},
		{"parquet", "shipments.parquet", "", Parquet},
		{"arrow", "shipments.arrow", "", Arrow},
		{"arrow by option", "shipments.out", Arrow, Arrow},
		{"parquet by option over a csv name", "shipments.csv", Parquet, Parquet},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, tc.file)
			old := []byte("previous contents\n")
			if err := os.WriteFile(path, old, 0o644); err != nil {
				t.Fatal(err)
			}

			// Abort leaves the target as it was and no temporary file.
			out, err := Create(path, testSchema, WriteOptions{Format: tc.format})
			if err != nil {
				t.Fatal(err)
			}
			if err := out.Write(testBatch()); err != nil {
				t.Fatal(err)
			}
			if got := dirNames(t, dir); len(got) != 2 {
				t.Errorf("while writing the directory holds %v, want the target and one temporary file", got)
			}
			out.Abort()
			if got, _ := os.ReadFile(path); !bytes.Equal(got, old) {
				t.Errorf("after Abort the target holds %q", got)
			}
			if got := dirNames(t, dir); len(got) != 1 || got[0] != tc.file {
				t.Errorf("after Abort the directory holds %v", got)
			}

			// Commit puts the table in place.
			out, err = Create(path, testSchema, WriteOptions{Format: tc.format})
			if err != nil {
				t.Fatal(err)
			}
			if err := out.Write(testBatch()); err != nil {
				t.Fatal(err)
			}
			if got, _ := os.ReadFile(path); !bytes.Equal(got, old) {
				t.Errorf("before Commit the target holds %q", got)
			}
			if err := out.Commit(); err != nil {
				t.Fatal(err)
			}
			if got := dirNames(t, dir); len(got) != 1 || got[0] != tc.file {
				t.Errorf("after Commit the directory holds %v", got)
			}
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if f, err := Detect(data); f != tc.want || err != nil {
				t.Errorf("output detected as %q, %v; want %q", f, err, tc.want)
			}

			// Open reads it back, whatever the name says.
			r, err := Open(path, ReadOptions{})
			if err != nil {
				t.Fatal(err)
			}
			checkTable(t, r, testSchema, testWant)
			if err := r.Close(); err != nil {
				t.Error(err)
			}
		})
	}
}

func TestCreateUnknownExtension(t *testing.T) {
	dir := t.TempDir()
	_, err := Create(filepath.Join(dir, "shipments.json"), testSchema, WriteOptions{})
	if err == nil || !strings.Contains(err.Error(), "shipments.json") {
		t.Fatalf("error %v, want one naming the path", err)
	}
	if got := dirNames(t, dir); len(got) != 0 {
		t.Errorf("directory holds %v, want nothing", got)
	}
}

func TestOpenArrowStream(t *testing.T) {
	// A stream written by Arrow's own writer, with a dictionary column.
	schema := arrow.NewSchema([]arrow.Field{
		{Name: "route", Type: &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int16, ValueType: arrow.BinaryTypes.String}, Nullable: true},
		{Name: "parcels", Type: arrow.PrimitiveTypes.Int64, Nullable: true},
	}, nil)
	mem := memory.NewGoAllocator()
	sb := array.NewStringBuilder(mem)
	sb.AppendValues([]string{"R-North-7", "R-Ring-11"}, nil)
	dict := sb.NewArray()
	ib := array.NewInt16Builder(mem)
	ib.AppendValues([]int16{1, 0, 1}, []bool{true, false, true})
	idx := ib.NewArray()
	route := array.NewDictionaryArray(schema.Field(0).Type, idx, dict)
	pb := array.NewInt64Builder(mem)
	pb.AppendValues([]int64{5, 6, 7}, nil)
	parcels := pb.NewArray()
	rec := array.NewRecord(schema, []arrow.Array{route, parcels}, 3)
	var buf bytes.Buffer
	w := ipc.NewWriter(&buf, ipc.WithSchema(schema))
	if err := w.Write(rec); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "routes.arrows")
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path, ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	checkTable(t, r, &table.Schema{Fields: []table.Field{{Name: "route", Kind: table.String}, {Name: "parcels", Kind: table.Int64}}},
		[][]cell{{{text: "R-Ring-11"}, {null: true}, {text: "R-Ring-11"}}, {{text: "5"}, {text: "6"}, {text: "7"}}})
}

func TestOpenErrors(t *testing.T) {
	cases := []struct {
		name string
		data []byte
		want error
	}{
		{"empty", nil, table.ErrEmpty},
		{"binary junk", []byte{0x00, 0x13, 0x37, 0x00, 0x42}, table.ErrUnknownFormat},
		{"truncated arrow file", []byte("ARROW1\x00\x00\xff\xff\xff\xff\x10\x00"), table.ErrCorrupt},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "input.dat")
			if err := os.WriteFile(path, tc.data, 0o644); err != nil {
				t.Fatal(err)
			}
			r, err := Open(path, ReadOptions{})
			if err == nil {
				r.Close()
			}
			if !errors.Is(err, tc.want) || !strings.Contains(fmt.Sprint(err), "input.dat") {
				t.Errorf("error %v, want %v naming the file", err, tc.want)
			}
		})
	}
	if _, err := Open(filepath.Join(t.TempDir(), "missing.csv"), ReadOptions{}); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v, want os.ErrNotExist", err)
	}
}

// TestRowCounts: a Parquet reader knows its rows, a CSV file's reader
// estimates them once it has read some, through Open's wrappers too.
func TestRowCounts(t *testing.T) {
	dir := t.TempDir()
	var sb strings.Builder
	sb.WriteString("route,late\n")
	for i := 0; i < 5000; i++ {
		fmt.Fprintf(&sb, "R%03d,%d\n", i%500, i%2)
	}
	csvPath := filepath.Join(dir, "s.csv")
	if err := os.WriteFile(csvPath, []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := Open(csvPath, ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if _, err := r.Next(); err != nil {
		t.Fatal(err)
	}
	re, ok := r.(table.RowEstimator)
	if !ok {
		t.Fatal("the CSV reader hides its estimate")
	}
	if n := re.EstimateRows(); n < 4900 || n > 5100 {
		t.Errorf("estimate %d, want about 5000", n)
	}
	pqPath := filepath.Join(dir, "s.parquet")
	w, err := Create(pqPath, &table.Schema{Fields: []table.Field{{Name: "x", Kind: table.Int64}}}, WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(&table.Batch{Rows: 3, Cols: []table.Column{{Form: table.FormInt64, Ints: []int64{1, 2, 3}}}}); err != nil {
		t.Fatal(err)
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
	p, err := Open(pqPath, ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	rc, ok := table.ReadAhead(p).(table.RowCounter)
	if !ok || rc.NumRows() != 3 {
		t.Fatalf("Parquet rows through ReadAhead: %v", ok)
	}
}
