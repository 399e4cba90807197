package arrowio

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/array"
	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"

	"manyfold/io/table"
)

// cell is the expected content of one row of one column: null, or the
// canonical text of the value.
type cell struct {
	null bool
	text string
}

func (c cell) String() string {
	if c.null {
		return "<null>"
	}
	return strconv.Quote(c.text)
}

// batchData gives one record batch: values per column (nil is a null; a
// dictionary column holds indices) and the entries of dictionary columns.
type batchData struct {
	vals  [][]any
	dicts map[int][]string
}

// buildArray makes an Arrow array of type dt from vals with Arrow's own
// builders, and returns the cells manyfold should read back.
func buildArray(t testing.TB, mem memory.Allocator, dt arrow.DataType, vals []any, dict []string) (arrow.Array, []cell) {
	t.Helper()
	cells := make([]cell, len(vals))
	if dt, ok := dt.(*arrow.DictionaryType); ok {
		sb := array.NewStringBuilder(mem)
		defer sb.Release()
		sb.AppendValues(dict, nil)
		entries := sb.NewArray()
		defer entries.Release()
		ib := array.NewBuilder(mem, dt.IndexType)
		defer ib.Release()
		for i, v := range vals {
			if v == nil {
				ib.AppendNull()
				cells[i].null = true
				continue
			}
			k := v.(int)
			cells[i].text = dict[k]
			switch b := ib.(type) {
			case *array.Int8Builder:
				b.Append(int8(k))
			case *array.Uint16Builder:
				b.Append(uint16(k))
			case *array.Int32Builder:
				b.Append(int32(k))
			case *array.Int64Builder:
				b.Append(int64(k))
			default:
				t.Fatalf("index builder %T", ib)
			}
		}
		idx := ib.NewArray()
		defer idx.Release()
		return array.NewDictionaryArray(dt, idx, entries), cells
	}
	b := array.NewBuilder(mem, dt)
	defer b.Release()
	for i, v := range vals {
		if v == nil {
			b.AppendNull()
			cells[i].null = true
			continue
		}
		switch b := b.(type) {
		case *array.StringBuilder:
			b.Append(v.(string))
			cells[i].text = v.(string)
		case *array.LargeStringBuilder:
			b.Append(v.(string))
			cells[i].text = v.(string)
		case *array.BinaryBuilder:
			b.Append([]byte(v.(string)))
			cells[i].text = v.(string)
		case *array.Int32Builder:
			b.Append(int32(v.(int)))
			cells[i].text = strconv.Itoa(v.(int))
		case *array.Uint64Builder:
			b.Append(uint64(v.(int)))
			cells[i].text = strconv.Itoa(v.(int))
		case *array.TimestampBuilder:
			b.Append(arrow.Timestamp(v.(int)))
			// eventSchema's timestamps: milliseconds of no zone, a wall
			// clock time (ISO 8601 without Z), from the standard library.
			cells[i].text = time.UnixMilli(int64(v.(int))).UTC().Format("2006-01-02T15:04:05.999999999")
		case *array.Float32Builder:
			b.Append(float32(num(v)))
			cells[i].text = string(table.AppendFloat(nil, float64(float32(num(v)))))
		case *array.Float64Builder:
			b.Append(num(v))
			cells[i].text = string(table.AppendFloat(nil, num(v)))
		case *array.BooleanBuilder:
			b.Append(v.(bool))
			cells[i].text = strconv.FormatBool(v.(bool))
		default:
			t.Fatalf("builder %T", b)
		}
	}
	return b.NewArray(), cells
}

// num returns an int or float64 test value as float64.
func num(v any) float64 {
	if i, ok := v.(int); ok {
		return float64(i)
	}
	return v.(float64)
}

// writeArrow writes batches with Arrow's own IPC writer (file or stream
// format) and returns the bytes and the expected cells per batch.
func writeArrow(t testing.TB, schema *arrow.Schema, batches []batchData, stream bool, opts ...ipc.Option) ([]byte, [][][]cell) {
	t.Helper()
	mem := memory.NewGoAllocator()
	path := filepath.Join(t.TempDir(), "x.arrow")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	opts = append(opts, ipc.WithSchema(schema), ipc.WithAllocator(mem))
	var (
		write func(arrow.Record) error
		close func() error
	)
	if stream {
		w := ipc.NewWriter(f, opts...)
		write, close = w.Write, w.Close
	} else {
		w, err := ipc.NewFileWriter(f, opts...)
		if err != nil {
			t.Fatal(err)
		}
		write, close = w.Write, w.Close
	}
	var want [][][]cell
	for _, bd := range batches {
		cols := make([]arrow.Array, len(bd.vals))
		wantCols := make([][]cell, len(bd.vals))
		for i, vals := range bd.vals {
			cols[i], wantCols[i] = buildArray(t, mem, schema.Field(i).Type, vals, bd.dicts[i])
		}
		rec := array.NewRecord(schema, cols, int64(len(bd.vals[0])))
		if err := write(rec); err != nil {
			t.Fatal(err)
		}
		rec.Release()
		for _, c := range cols {
			c.Release()
		}
		want = append(want, wantCols)
	}
	if err := close(); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return data, want
}

// readAll reads every batch of r, checks each column's cells against want
// and returns the dictionary IDs seen per batch for each dictionary column.
func readAll(t *testing.T, r table.Reader, want [][][]cell, forms []table.Form) map[int][]uint64 {
	t.Helper()
	ids := map[int][]uint64{}
	var row int64 = 1
	for bi := 0; ; bi++ {
		b, err := r.Next()
		if err == io.EOF {
			if bi != len(want) {
				t.Fatalf("got %d batches, want %d", bi, len(want))
			}
			return ids
		}
		if err != nil {
			t.Fatalf("batch %d: %v", bi, err)
		}
		if bi >= len(want) {
			t.Fatalf("more than %d batches", len(want))
		}
		if b.FirstRow != row {
			t.Errorf("batch %d: FirstRow %d, want %d", bi, b.FirstRow, row)
		}
		if len(b.Cols) != len(want[bi]) {
			t.Fatalf("batch %d: %d columns, want %d", bi, len(b.Cols), len(want[bi]))
		}
		for ci := range b.Cols {
			col := &b.Cols[ci]
			wc := want[bi][ci]
			if b.Rows != len(wc) || col.Len() != len(wc) {
				t.Fatalf("batch %d col %d: %d rows (column %d), want %d", bi, ci, b.Rows, col.Len(), len(wc))
			}
			if col.Form != forms[ci] {
				t.Errorf("batch %d col %d: form %d, want %d", bi, ci, col.Form, forms[ci])
			}
			anyNull := false
			for i, w := range wc {
				anyNull = anyNull || w.null
				got := cell{null: col.IsNull(i), text: string(col.AppendText(nil, i))}
				if got != w {
					t.Errorf("batch %d col %d row %d: got %v, want %v", bi, ci, i, got, w)
				}
			}
			if !anyNull && col.Nulls != nil {
				t.Errorf("batch %d col %d: Nulls not nil for a column without nulls", bi, ci)
			}
			if col.Form == table.FormDict {
				if col.Dict.ID == 0 {
					t.Errorf("batch %d col %d: dictionary ID 0", bi, ci)
				}
				ids[ci] = append(ids[ci], col.Dict.ID)
			}
		}
		row += int64(b.Rows)
	}
}

// The schema shared by the reading tests: a parcel-delivery event table.
var eventSchema = arrow.NewSchema([]arrow.Field{
	{Name: "route", Type: &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int8, ValueType: arrow.BinaryTypes.String}, Nullable: true},
	{Name: "postcode", Type: arrow.BinaryTypes.String, Nullable: true},
	{Name: "sender", Type: arrow.BinaryTypes.LargeString, Nullable: true},
	{Name: "parcels", Type: arrow.PrimitiveTypes.Int32, Nullable: true},
	{Name: "weight_kg", Type: arrow.PrimitiveTypes.Float32, Nullable: true},
	{Name: "late", Type: arrow.FixedWidthTypes.Boolean, Nullable: true},
	{Name: "cost", Type: arrow.PrimitiveTypes.Float64, Nullable: false},
	{Name: "picked_at", Type: &arrow.TimestampType{Unit: arrow.Millisecond}, Nullable: true},
	{Name: "seq", Type: arrow.PrimitiveTypes.Uint64, Nullable: true},
	{Name: "parcel_type", Type: &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Uint16, ValueType: arrow.BinaryTypes.String}, Nullable: true},
	{Name: "label", Type: arrow.BinaryTypes.Binary, Nullable: true},
}, nil)

var eventForms = []table.Form{table.FormDict, table.FormText, table.FormText, table.FormInt64, table.FormFloat64,
	table.FormBool, table.FormFloat64, table.FormText, table.FormInt64, table.FormDict, table.FormText}

var eventKinds = []table.Kind{table.String, table.String, table.String, table.Int64, table.Float64,
	table.Bool, table.Float64, table.String, table.Int64, table.String, table.String}

var routes = []string{"R-North-7", "R-Harbour-2", "R-Ring-11"}
var parcelTypes = []string{"letter", "small", "", "pallet"}

// eventBatches has nulls at the first, a middle and the last row, an empty
// batch, and a batch without nulls in most columns.
var eventBatches = []batchData{
	{
		vals: [][]any{
			{0, 1, nil, 2, 0, nil},
			{nil, "PC-10452", "PC-00501", nil, "", "PC-77"},
			{"S-1", "S-22", "S-333", "", "S-1", "S-4444"},
			{nil, 3, -2, 0, 1 << 30, nil},
			{1.5, nil, 0.25, 12.75, nil, -3},
			{true, nil, false, true, false, nil},
			{4.2, 0.1, negZero, 1e-7, math.Inf(1), 123456.789},
			{nil, 1700000000000, -1, 0, 86400000, nil},
			{1, 1 << 62, nil, 0, 7, 8},
			{3, 0, 1, 2, 3, nil},
			{"a\x00b", nil, "", "\xff", "tag", "z"},
		},
		dicts: map[int][]string{0: routes, 9: parcelTypes},
	},
	{
		vals:  [][]any{{}, {}, {}, {}, {}, {}, {}, {}, {}, {}, {}},
		dicts: map[int][]string{0: routes, 9: parcelTypes},
	},
	{
		vals: [][]any{
			{2, 2, 1, 0},
			{"PC-1", "PC-2", "PC-3", "PC-4"},
			{"S-9", nil, "S-8", nil},
			{5, 6, 7, 8},
			{1.0, 2.0, 3.0, 4.0},
			{false, false, true, true},
			{1, 2, 3, 4.5},
			{10, 20, 30, 40},
			{nil, nil, nil, nil},
			{0, 0, 0, 0},
			{"x", "y", "z", nil},
		},
		dicts: map[int][]string{0: routes, 9: parcelTypes},
	},
}

func TestReadArrowWrittenTables(t *testing.T) {
	dictSchema := arrow.NewSchema([]arrow.Field{
		{Name: "route", Type: &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int32, ValueType: arrow.BinaryTypes.String}, Nullable: true},
	}, nil)
	changing := []batchData{
		{vals: [][]any{{0, 1, nil}}, dicts: map[int][]string{0: {"R-1", "R-2"}}},
		{vals: [][]any{{1, 1}}, dicts: map[int][]string{0: {"R-1", "R-2"}}},             // same: no new dictionary
		{vals: [][]any{{2, nil, 0}}, dicts: map[int][]string{0: {"R-1", "R-2", "R-3"}}}, // delta
		{vals: [][]any{{0, 0}}, dicts: map[int][]string{0: {"R-9"}}},                    // replacement
	}
	cases := []struct {
		name    string
		schema  *arrow.Schema
		batches []batchData
		stream  bool
		opts    []ipc.Option
		forms   []table.Form
		kinds   []table.Kind
		// sameID[i] says whether batch i+1 should carry the dictionary ID
		// of batch i in column 0.
		sameID []bool
	}{
		{"file", eventSchema, eventBatches, false, nil, eventForms, eventKinds, []bool{true, true}},
		{"stream", eventSchema, eventBatches, true, nil, eventForms, eventKinds, []bool{true, true}},
		{"stream with delta and replacement", dictSchema, changing, true, []ipc.Option{ipc.WithDictionaryDeltas(true)},
			[]table.Form{table.FormDict}, []table.Kind{table.String}, []bool{true, false, false}},
		{"stream with replacements", dictSchema, changing, true, nil,
			[]table.Form{table.FormDict}, []table.Kind{table.String}, []bool{true, false, false}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			data, want := writeArrow(t, tc.schema, tc.batches, tc.stream, tc.opts...)
			path := filepath.Join(t.TempDir(), "events.arrow")
			if err := os.WriteFile(path, data, 0o644); err != nil {
				t.Fatal(err)
			}
			open := map[string]func() (table.Reader, error){
				"Open":      func() (table.Reader, error) { return Open(path) },
				"NewReader": func() (table.Reader, error) { return NewReader(io.MultiReader(bytes.NewReader(data)), "stdin") },
			}
			for how, fn := range open {
				r, err := fn()
				if err != nil {
					t.Fatalf("%s: %v", how, err)
				}
				s := r.Schema()
				if len(s.Fields) != tc.schema.NumFields() {
					t.Fatalf("%s: %d fields", how, len(s.Fields))
				}
				for i, f := range s.Fields {
					af := tc.schema.Field(i)
					if f.Name != af.Name || f.Kind != tc.kinds[i] || f.Nullable != af.Nullable {
						t.Errorf("%s: field %d = %+v, want %s %s nullable=%v", how, i, f, af.Name, tc.kinds[i], af.Nullable)
					}
				}
				ids := readAll(t, r, want, tc.forms)
				for i, same := range tc.sameID {
					if got := ids[0][i] == ids[0][i+1]; got != same {
						t.Errorf("%s: dictionary IDs %v: batch %d to %d same=%v, want %v", how, ids[0], i, i+1, got, same)
					}
				}
				if _, err := r.Next(); err != io.EOF {
					t.Errorf("%s: Next after the end: %v, want io.EOF", how, err)
				}
				if err := r.Close(); err != nil {
					t.Errorf("%s: Close: %v", how, err)
				}
			}
		})
	}
}

func TestSelect(t *testing.T) {
	// A list column (nested) sits between two readable columns.
	schema := arrow.NewSchema([]arrow.Field{
		{Name: "route", Type: &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int8, ValueType: arrow.BinaryTypes.String}, Nullable: true},
		{Name: "stops", Type: arrow.ListOf(arrow.PrimitiveTypes.Int32), Nullable: true},
		{Name: "postcode", Type: arrow.BinaryTypes.String, Nullable: true},
		{Name: "parcels", Type: arrow.PrimitiveTypes.Int32, Nullable: true},
	}, nil)
	mem := memory.NewGoAllocator()
	lb := array.NewListBuilder(mem, arrow.PrimitiveTypes.Int32)
	lb.Append(true)
	lb.ValueBuilder().(*array.Int32Builder).AppendValues([]int32{4, 5}, nil)
	lb.AppendNull()
	lb.Append(true)
	stops := lb.NewArray()
	lb.Release()
	route, _ := buildArray(t, mem, schema.Field(0).Type, []any{1, nil, 0}, []string{"R-A", "R-B"})
	post, _ := buildArray(t, mem, schema.Field(2).Type, []any{"PC-1", "PC-2", nil}, nil)
	parcels, _ := buildArray(t, mem, schema.Field(3).Type, []any{7, nil, 9}, nil)
	rec := array.NewRecord(schema, []arrow.Array{route, stops, post, parcels}, 3)
	var buf bytes.Buffer
	w := ipc.NewWriter(&buf, ipc.WithSchema(schema))
	if err := w.Write(rec); err != nil {
		t.Fatal(err)
	}
	w.Close()
	data := buf.Bytes()

	cases := []struct {
		name    string
		sel     []int // nil: no Select call
		selErr  string
		nextErr string
		names   []string
		want    [][]cell
	}{
		{name: "reordered", sel: []int{3, 0}, names: []string{"parcels", "route"},
			want: [][]cell{{{text: "7"}, {null: true}, {text: "9"}}, {{text: "R-B"}, {null: true}, {text: "R-A"}}}},
		{name: "repeated", sel: []int{2, 2}, names: []string{"postcode", "postcode"},
			want: [][]cell{{{text: "PC-1"}, {text: "PC-2"}, {null: true}}, {{text: "PC-1"}, {text: "PC-2"}, {null: true}}}},
		{name: "none", sel: []int{}, names: []string{}, want: [][]cell{}},
		{name: "nested selected", sel: []int{0, 1}, selErr: `column "stops": nested type`},
		{name: "out of range", sel: []int{4}, selErr: "no column 4"},
		{name: "no select with a nested column", nextErr: `column "stops": nested type`},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r, err := NewReader(bytes.NewReader(data), "events.arrows")
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			if tc.sel != nil {
				err := r.Select(tc.sel)
				if tc.selErr != "" {
					if err == nil || !strings.Contains(err.Error(), tc.selErr) {
						t.Fatalf("Select error %v, want one containing %q", err, tc.selErr)
					}
					return
				}
				if err != nil {
					t.Fatal(err)
				}
			}
			if got := r.Schema().Names(); tc.names != nil && fmt.Sprint(got) != fmt.Sprint(tc.names) {
				t.Errorf("schema %v, want %v", got, tc.names)
			}
			b, err := r.Next()
			if tc.nextErr != "" {
				if err == nil || !strings.Contains(err.Error(), tc.nextErr) || !strings.Contains(err.Error(), "events.arrows") {
					t.Fatalf("Next error %v, want one naming the file and containing %q", err, tc.nextErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(b.Cols) != len(tc.want) {
				t.Fatalf("%d columns, want %d", len(b.Cols), len(tc.want))
			}
			for ci, wc := range tc.want {
				for i, w := range wc {
					got := cell{null: b.Cols[ci].IsNull(i), text: string(b.Cols[ci].AppendText(nil, i))}
					if got != w {
						t.Errorf("col %d row %d: %v, want %v", ci, i, got, w)
					}
				}
			}
			if err := r.Select([]int{0}); err == nil {
				t.Error("Select after Next succeeded")
			}
		})
	}
}

// TestWriter writes columns in every form with manyfold's writer and reads
// them back with Arrow's own file reader, then with manyfold's reader.
func TestWriter(t *testing.T) {
	nulls := []bool{true, false, false, true, false, true} // first, middle, last
	textCol := func(vals ...string) table.Column {
		// Offsets start past a prefix to exercise rebasing.
		c := table.Column{Form: table.FormText, Data: []byte("prefix"), Offsets: []int32{6}}
		for _, v := range vals {
			c.Data = append(c.Data, v...)
			c.Offsets = append(c.Offsets, int32(len(c.Data)))
		}
		return c
	}
	withNulls := func(c table.Column) table.Column { c.Nulls = nulls; return c }
	dict := &table.Dict{Data: []byte("R-NorthR-South"), Offsets: []int32{0, 7, 14}, ID: 1}
	cases := []struct {
		name  string
		field table.Field
		col   table.Column
		want  []cell // from the column's canonical text
	}{
		{"text from text", table.Field{Name: "postcode", Kind: table.String, Nullable: true},
			withNulls(textCol("", "PC-1", "PC-22", "", "", "")),
			[]cell{{null: true}, {text: "PC-1"}, {text: "PC-22"}, {null: true}, {text: ""}, {null: true}}},
		{"text from dictionary", table.Field{Name: "route", Kind: table.String, Nullable: true},
			withNulls(table.Column{Form: table.FormDict, Dict: dict, Indices: []int32{1, 0, 1, 0, 1, 0}}),
			[]cell{{null: true}, {text: "R-North"}, {text: "R-South"}, {null: true}, {text: "R-South"}, {null: true}}},
		{"text from int", table.Field{Name: "zone", Kind: table.String, Nullable: false},
			table.Column{Form: table.FormInt64, Ints: []int64{501, -1, 0, 7, 8, 9}},
			[]cell{{text: "501"}, {text: "-1"}, {text: "0"}, {text: "7"}, {text: "8"}, {text: "9"}}},
		{"int from int", table.Field{Name: "parcels", Kind: table.Int64, Nullable: true},
			withNulls(table.Column{Form: table.FormInt64, Ints: []int64{0, math.MaxInt64, math.MinInt64, 0, 3, 0}}),
			[]cell{{null: true}, {text: "9223372036854775807"}, {text: "-9223372036854775808"}, {null: true}, {text: "3"}, {null: true}}},
		{"int from text", table.Field{Name: "parcels", Kind: table.Int64, Nullable: true},
			withNulls(textCol("junk", "+12", "-9223372036854775808", "junk", "1e3", "")),
			[]cell{{null: true}, {text: "12"}, {text: "-9223372036854775808"}, {null: true}, {text: "1000"}, {null: true}}},
		{"int from float", table.Field{Name: "parcels", Kind: table.Int64, Nullable: false},
			table.Column{Form: table.FormFloat64, Floats: []float64{1, -2, 0, 3e9, 5, 6}},
			[]cell{{text: "1"}, {text: "-2"}, {text: "0"}, {text: "3000000000"}, {text: "5"}, {text: "6"}}},
		{"float from float", table.Field{Name: "cost", Kind: table.Float64, Nullable: true},
			withNulls(table.Column{Form: table.FormFloat64, Floats: []float64{0, 0.1, math.Inf(-1), 0, negZero, 0}}),
			[]cell{{null: true}, {text: "0.1"}, {text: "-Inf"}, {null: true}, {text: "-0"}, {null: true}}},
		{"float from text", table.Field{Name: "cost", Kind: table.Float64, Nullable: true},
			withNulls(textCol("x", "2.5", "NaN", "x", "1e-300", "")),
			[]cell{{null: true}, {text: "2.5"}, {text: "NaN"}, {null: true}, {text: "1e-300"}, {null: true}}},
		{"bool from bool", table.Field{Name: "late", Kind: table.Bool, Nullable: true},
			withNulls(table.Column{Form: table.FormBool, Bools: []bool{true, true, false, true, true, true}}),
			[]cell{{null: true}, {text: "true"}, {text: "false"}, {null: true}, {text: "true"}, {null: true}}},
		{"bool from text", table.Field{Name: "late", Kind: table.Bool, Nullable: false},
			textCol("TRUE", "0", "false", "True", "1", "FALSE"),
			[]cell{{text: "true"}, {text: "false"}, {text: "false"}, {text: "true"}, {text: "true"}, {text: "false"}}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			schema := &table.Schema{Fields: []table.Field{tc.field}}
			var out bytes.Buffer // not seekable
			w, err := NewWriter(&out, schema)
			if err != nil {
				t.Fatal(err)
			}
			// Two batches of the same rows.
			for i := 0; i < 2; i++ {
				if err := w.Write(&table.Batch{Rows: len(tc.want), Cols: []table.Column{tc.col}}); err != nil {
					t.Fatal(err)
				}
			}
			if err := w.Close(); err != nil {
				t.Fatal(err)
			}
			data := out.Bytes()
			if !bytes.HasPrefix(data, []byte("ARROW1")) || !bytes.HasSuffix(data, []byte("ARROW1")) {
				t.Fatal("output is not in the IPC file format")
			}

			// Arrow's own reader as the independent check.
			fr, err := ipc.NewFileReader(bytes.NewReader(data))
			if err != nil {
				t.Fatal(err)
			}
			defer fr.Close()
			af := fr.Schema().Field(0)
			wantType := map[table.Kind]arrow.Type{table.String: arrow.STRING, table.Int64: arrow.INT64, table.Float64: arrow.FLOAT64, table.Bool: arrow.BOOL}[tc.field.Kind]
			if af.Name != tc.field.Name || af.Type.ID() != wantType || af.Nullable != tc.field.Nullable {
				t.Errorf("arrow field %v, want %s %v nullable=%v", af, tc.field.Name, wantType, tc.field.Nullable)
			}
			if fr.NumRecords() != 2 {
				t.Fatalf("%d record batches, want 2", fr.NumRecords())
			}
			for ri := 0; ri < 2; ri++ {
				rec, err := fr.Record(ri)
				if err != nil {
					t.Fatal(err)
				}
				arr := rec.Column(0)
				if arr.Len() != len(tc.want) {
					t.Fatalf("%d rows", arr.Len())
				}
				for i, w := range tc.want {
					got := cell{null: arr.IsNull(i)}
					if !got.null {
						got.text = arrowText(arr, i)
					}
					if got != w {
						t.Errorf("arrow reader, batch %d row %d: %v, want %v", ri, i, got, w)
					}
				}
			}

			// And back through manyfold's reader.
			r, err := NewReader(bytes.NewReader(data), "out.arrow")
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			form := map[table.Kind]table.Form{table.String: table.FormText, table.Int64: table.FormInt64, table.Float64: table.FormFloat64, table.Bool: table.FormBool}[tc.field.Kind]
			readAll(t, r, [][][]cell{{tc.want}, {tc.want}}, []table.Form{form})
		})
	}
}

// arrowText formats a value from an Arrow array as manyfold's canonical text.
func arrowText(arr arrow.Array, i int) string {
	switch a := arr.(type) {
	case *array.String:
		return a.Value(i)
	case *array.Int64:
		return strconv.FormatInt(a.Value(i), 10)
	case *array.Float64:
		return string(table.AppendFloat(nil, a.Value(i)))
	case *array.Boolean:
		return strconv.FormatBool(a.Value(i))
	}
	return fmt.Sprintf("unexpected %T", arr)
}

// noClose fails the test if the writer closes its output.
type noClose struct {
	bytes.Buffer
	t *testing.T
}

func (n *noClose) Close() error { n.t.Error("the writer closed its output"); return nil }

func TestWriterEmptyAndNotClosing(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{{Name: "route", Kind: table.String, Nullable: true}, {Name: "late", Kind: table.Bool}}}
	out := &noClose{t: t}
	w, err := NewWriter(out, schema)
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := w.Write(&table.Batch{}); err == nil {
		t.Error("Write after Close succeeded")
	}
	r, err := NewReader(bytes.NewReader(out.Bytes()), "empty.arrow")
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if got := r.Schema().Fields; fmt.Sprint(got) != fmt.Sprint(schema.Fields) {
		t.Errorf("schema %v, want %v", got, schema.Fields)
	}
	if _, err := r.Next(); err != io.EOF {
		t.Errorf("Next: %v, want io.EOF", err)
	}
}

func TestWriterBadValues(t *testing.T) {
	text := func(vals ...string) table.Column {
		c := table.Column{Form: table.FormText, Offsets: []int32{0}}
		for _, v := range vals {
			c.Data = append(c.Data, v...)
			c.Offsets = append(c.Offsets, int32(len(c.Data)))
		}
		return c
	}
	cases := []struct {
		name     string
		field    table.Field
		col      table.Column
		firstRow int64
		wantRow  int64
		wantMsg  string
	}{
		{"int from text", table.Field{Name: "parcels", Kind: table.Int64}, text("1", "2", "12x"), 0, 3, `"12x" is not an integer`},
		{"int from fraction", table.Field{Name: "parcels", Kind: table.Int64}, table.Column{Form: table.FormFloat64, Floats: []float64{1.5}}, 0, 1, "1.5 is not an integer"},
		{"int too large", table.Field{Name: "parcels", Kind: table.Int64}, text("9223372036854775808"), 0, 1, "not an integer"},
		{"float from text", table.Field{Name: "cost", Kind: table.Float64}, text("1", "abc"), 40, 41, `"abc" is not a number`},
		{"bool from text", table.Field{Name: "late", Kind: table.Bool}, text("maybe"), 0, 1, `"maybe" is not a boolean`},
		{"bool from int", table.Field{Name: "late", Kind: table.Bool}, table.Column{Form: table.FormInt64, Ints: []int64{0, 1, 2}}, 0, 3, "2 is not a boolean"},
		{"null in non-nullable", table.Field{Name: "route", Kind: table.String, Nullable: false},
			table.Column{Form: table.FormText, Offsets: []int32{0, 0, 0}, Nulls: []bool{false, true}}, 10, 11, "not nullable"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			out := &noClose{t: t}
			w, err := NewWriter(out, &table.Schema{Fields: []table.Field{tc.field}})
			if err != nil {
				t.Fatal(err)
			}
			err = w.Write(&table.Batch{Rows: tc.col.Len(), Cols: []table.Column{tc.col}, FirstRow: tc.firstRow})
			var de *table.DataError
			if !errors.As(err, &de) {
				t.Fatalf("error %v, want a *table.DataError", err)
			}
			if de.Row != tc.wantRow || de.Column != tc.field.Name || !strings.Contains(de.Error(), tc.wantMsg) {
				t.Errorf("error %q (row %d, column %q), want row %d, column %q, containing %q", de, de.Row, de.Column, tc.wantRow, tc.field.Name, tc.wantMsg)
			}
			w.Close()
		})
	}
}

// readErr opens data as a file and reads it to the end, returning the
// first error other than io.EOF.
func readErr(t *testing.T, data []byte) error {
	t.Helper()
	path := filepath.Join(t.TempDir(), "cut.arrow")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path)
	if err != nil {
		return err
	}
	defer r.Close()
	for {
		_, err := r.Next()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
	}
}

func TestCorruptInput(t *testing.T) {
	file, _ := writeArrow(t, eventSchema, eventBatches, false)
	stream, _ := writeArrow(t, eventSchema, eventBatches, true)
	cases := []struct {
		name string
		data []byte
		want error
	}{
		{"empty", nil, table.ErrEmpty},
		{"file without its last byte", file[:len(file)-1], table.ErrCorrupt},
		{"file cut in half", file[:len(file)/2], table.ErrCorrupt},
		{"file magic only", file[:8], table.ErrCorrupt},
		{"file footer length wrong", append(append([]byte{}, file[:len(file)-10]...), 0xff, 0xff, 0, 0, 'A', 'R', 'R', 'O', 'W', '1'), table.ErrCorrupt},
		{"stream cut in a message", stream[:len(stream)/2+3], table.ErrCorrupt},
		{"stream cut in the schema", stream[:12], table.ErrCorrupt},
		{"not arrow", []byte("route,postcode\nR-1,PC-1\n"), table.ErrUnknownFormat},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			err := readErr(t, tc.data)
			if !errors.Is(err, tc.want) {
				t.Fatalf("error %v, want %v", err, tc.want)
			}
			if !strings.Contains(err.Error(), "cut.arrow") {
				t.Errorf("error %q does not name the file", err)
			}
		})
	}
}

// TestDamagedBytes overwrites bytes throughout a file and a stream: reading
// must return data or an error, never panic.
func TestDamagedBytes(t *testing.T) {
	file, _ := writeArrow(t, eventSchema, eventBatches, false)
	stream, _ := writeArrow(t, eventSchema, eventBatches, true)
	dir := t.TempDir()
	for _, src := range [][]byte{file, stream} {
		for pos := 0; pos < len(src); pos += 2 {
			// Lengths and offsets are little-endian: 0xff and 0x7f in a high
			// byte make huge or negative claims, 0x00 shortens them.
			for _, v := range []byte{[]byte{0xff, 0x00, 0x7f}[pos/2%3]} {
				data := append([]byte{}, src...)
				data[pos] = v
				path := filepath.Join(dir, "damaged.arrow")
				if err := os.WriteFile(path, data, 0o644); err != nil {
					t.Fatal(err)
				}
				func() {
					defer func() {
						if p := recover(); p != nil {
							t.Fatalf("byte %d set to %#x: panic %v", pos, v, p)
						}
					}()
					r, err := Open(path)
					if err != nil {
						return
					}
					defer r.Close()
					for {
						b, err := r.Next()
						if err != nil {
							return
						}
						// Touch every value as a consumer would.
						for ci := range b.Cols {
							for i := 0; i < b.Rows; i++ {
								b.Cols[ci].AppendText(nil, i)
							}
						}
					}
				}()
			}
		}
	}
}

func TestUint64OutOfRange(t *testing.T) {
	schema := arrow.NewSchema([]arrow.Field{{Name: "seq", Type: arrow.PrimitiveTypes.Uint64, Nullable: true}}, nil)
	mem := memory.NewGoAllocator()
	b := array.NewUint64Builder(mem)
	b.AppendValues([]uint64{1, math.MaxUint64}, nil)
	arr := b.NewArray()
	rec := array.NewRecord(schema, []arrow.Array{arr}, 2)
	var buf bytes.Buffer
	w := ipc.NewWriter(&buf, ipc.WithSchema(schema))
	if err := w.Write(rec); err != nil {
		t.Fatal(err)
	}
	w.Close()
	r, err := NewReader(&buf, "seq.arrows")
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	_, err = r.Next()
	var de *table.DataError
	if !errors.As(err, &de) || de.Row != 2 || de.Column != "seq" {
		t.Fatalf("error %v, want a DataError at row 2 of seq", err)
	}
}

// negZero is -0.0 (the literal -0.0 is +0 in Go constant arithmetic).
var negZero = math.Copysign(0, -1)

func TestWriterBadDictionaryIndex(t *testing.T) {
	w, err := NewWriter(io.Discard, &table.Schema{Fields: []table.Field{{Name: "route", Kind: table.String, Nullable: true}}})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	dict := &table.Dict{Data: []byte("R-1"), Offsets: []int32{0, 3}, ID: 1}
	// Index 5 on a null row is ignored; index 2 on a value row is an error.
	col := table.Column{Form: table.FormDict, Dict: dict, Indices: []int32{0, 5, 2}, Nulls: []bool{false, true, false}}
	err = w.Write(&table.Batch{Rows: 3, Cols: []table.Column{col}})
	if err == nil || !strings.Contains(err.Error(), "index 2 out of range") || !strings.Contains(err.Error(), `"route"`) {
		t.Fatalf("error %v, want an index out of range naming the column", err)
	}
}
