package pqio

import (
	"bytes"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/deprecated"

	"manyfold/io/table"
)

// typedRow covers the physical and logical types the reader maps, and a
// list and a nested group, which it leaves out.
type typedRow struct {
	Code    [3]byte          `parquet:"code"`         // FIXED_LEN_BYTE_ARRAY(3)
	U32     uint32           `parquet:"u32"`          // INT32, unsigned
	I32Dict int32            `parquet:"i32d,dict"`    // INT32, dictionary pages
	F32     *float32         `parquet:"f32,optional"` // FLOAT
	F64Dict float64          `parquet:"f64d,dict"`    // DOUBLE, dictionary pages
	Day     int32            `parquet:"day,date"`     // INT32 DATE: ISO 8601 text
	Micros  int64            `parquet:"ts,timestamp(microsecond)"`
	Legacy  deprecated.Int96 `parquet:"legacy"`    // INT96 timestamp
	Tags    []string         `parquet:"tags,list"` // a list: left out
	Addr    struct {
		Zip string `parquet:"zip"`
	} `parquet:"addr"` // a group: left out
	Flag  *bool   `parquet:"flag,optional"`
	Route *string `parquet:"route,optional,dict"`
}

// TestReadTypes reads a file written by parquet-go's own struct writer
// with each type the reader maps.
func TestReadTypes(t *testing.T) {
	f32 := float32(1.5)
	tru := true
	route := "north-7"
	rows := []typedRow{
		{Code: [3]byte{'A', 'B', 'C'}, U32: 4_000_000_000, I32Dict: -5, F32: &f32, F64Dict: 0.25, Day: 19000, Micros: 1_700_000_000_000_000,
			// Julian day 2440589 is 1970-01-02; plus 5 ns of the day.
			Legacy: deprecated.Int96{5, 0, 2440589}, Tags: []string{"x"}, Flag: &tru, Route: &route},
		{Code: [3]byte{'x', 'y', 'z'}, U32: 7, I32Dict: -5, F64Dict: 0.25, Day: -1, Micros: -1, Legacy: deprecated.Int96{0, 0, 2440588}},
	}
	var buf bytes.Buffer
	w := parquet.NewGenericWriter[typedRow](&buf)
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r := openBytes(t, "types.parquet", buf.Bytes())
	defer r.Close()
	wantFields := []table.Field{
		{Name: "code", Kind: table.String},
		{Name: "u32", Kind: table.Int64},
		{Name: "i32d", Kind: table.Int64},
		{Name: "f32", Kind: table.Float64, Nullable: true},
		{Name: "f64d", Kind: table.Float64},
		{Name: "day", Kind: table.String},
		{Name: "ts", Kind: table.String},
		{Name: "legacy", Kind: table.String},
		{Name: "flag", Kind: table.Bool, Nullable: true},
		{Name: "route", Kind: table.String, Nullable: true},
	}
	got := r.Schema().Fields
	if len(got) != len(wantFields) {
		t.Fatalf("schema %v, want %v", got, wantFields)
	}
	for i := range wantFields {
		if got[i] != wantFields[i] {
			t.Fatalf("field %d = %+v, want %+v", i, got[i], wantFields[i])
		}
	}
	// The dict tags must really give dictionary pages.
	for _, name := range []string{"i32d", "f64d", "route"} {
		i := r.Schema().Index(name)
		pages := r.pf.RowGroups()[0].ColumnChunks()[r.leaves[i].index].Pages()
		p, err := pages.ReadPage()
		if err != nil {
			t.Fatal(err)
		}
		if p.Dictionary() == nil {
			t.Fatalf("column %s: first page is not dictionary encoded", name)
		}
		parquet.Release(p)
		pages.Close()
	}
	res := readAll(t, r)
	want := [][]cell{
		{{text: "ABC"}, {text: "xyz"}},
		{{text: "4000000000"}, {text: "7"}},
		{{text: "-5"}, {text: "-5"}},
		{{text: "1.5"}, {null: true}},
		{{text: "0.25"}, {text: "0.25"}},
		{{text: "2022-01-08"}, {text: "1969-12-31"}},                               // day 19000 (Python's datetime.date(1970,1,1)+timedelta(days=19000)), day -1
		{{text: "2023-11-14T22:13:20Z"}, {text: "1969-12-31T23:59:59.999999Z"}},    // 1.7e15 µs; -1 µs
		{{text: "1970-01-02T00:00:00.000000005Z"}, {text: "1970-01-01T00:00:00Z"}}, // computed from the INT96 layout: 1 day in ns, plus 5
		{{text: "true"}, {null: true}},
		{{text: "north-7"}, {null: true}},
	}
	for i := range want {
		compareCells(t, wantFields[i].Name, res.cols[i], want[i])
	}
}

// unsignedRow holds unsigned 64-bit integers, PLAIN and dictionary
// encoded, one of them optional.
type unsignedRow struct {
	U64  uint64  `parquet:"u64"`
	Dict uint64  `parquet:"u64d,dict"`
	Opt  *uint64 `parquet:"u64o,optional"`
}

// TestReadUnsigned64 reads unsigned 64-bit integers up to 2^64-1: each
// comes as the text of its unsigned decimal, the text a CSV file of the
// same numbers holds, whatever its encoding.
func TestReadUnsigned64(t *testing.T) {
	vals := []uint64{1 << 63, 1<<64 - 1, 0, 5, 1<<63 - 1, 1<<63 + 1}
	var rows []unsignedRow
	for i, v := range vals {
		row := unsignedRow{U64: v, Dict: v}
		if i%3 != 2 {
			row.Opt = &vals[i]
		}
		rows = append(rows, row)
	}
	var buf bytes.Buffer
	w := parquet.NewGenericWriter[unsignedRow](&buf)
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r := openBytes(t, "unsigned.parquet", buf.Bytes())
	defer r.Close()
	for i, f := range r.Schema().Fields {
		if f.Kind != table.String {
			t.Fatalf("field %d = %+v, want text", i, f)
		}
	}
	res := readAll(t, r)
	want := []string{"9223372036854775808", "18446744073709551615", "0", "5", "9223372036854775807", "9223372036854775809"}
	for c := range 3 {
		var cells []cell
		for i, v := range want {
			if c == 2 && i%3 == 2 {
				cells = append(cells, cell{null: true})
			} else {
				cells = append(cells, cell{text: v})
			}
		}
		compareCells(t, r.Schema().Fields[c].Name, res.cols[c], cells)
	}
}
