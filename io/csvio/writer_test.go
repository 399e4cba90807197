package csvio

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"reflect"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"manyfold/io/table"
)

// textCol builds a text column; null cells are given as the null marker.
func textCol(vals ...string) table.Column {
	c := table.Column{Form: table.FormText, Offsets: []int32{0}}
	for i, v := range vals {
		if v == null {
			if c.Nulls == nil {
				c.Nulls = make([]bool, len(vals))
			}
			c.Nulls[i] = true
			v = ""
		}
		c.Data = append(c.Data, v...)
		c.Offsets = append(c.Offsets, int32(len(c.Data)))
	}
	return c
}

func writeAll(t *testing.T, schema *table.Schema, opts WriterOptions, batches ...*table.Batch) string {
	t.Helper()
	var buf bytes.Buffer
	w, err := NewWriter(&buf, schema, opts)
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range batches {
		if err := w.Write(b); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.String()
}

func schemaOf(names ...string) *table.Schema {
	s := &table.Schema{}
	for _, n := range names {
		s.Fields = append(s.Fields, table.Field{Name: n})
	}
	return s
}

func TestWriterQuoting(t *testing.T) {
	tests := []struct {
		name  string
		delim byte
		vals  []string
		want  string // the data line
	}{
		{"plain", 0, []string{"R1", "00501"}, "R1,00501"},
		{"delimiter", 0, []string{"R1, North", "x"}, `"R1, North",x`},
		// RFC 4180 section 2, rule 7: a quote is escaped by doubling it.
		{"quote", 0, []string{`say "hi"`, `"`}, `"say ""hi""",""""`},
		{"newlines", 0, []string{"a\nb", "a\r\nb"}, "\"a\nb\",\"a\r\nb\""},
		{"bare CR", 0, []string{"a\rb", "x"}, "\"a\rb\",x"},
		{"leading and trailing space", 0, []string{" a", "b\t"}, `" a","b` + "\t\""},
		{"inner space", 0, []string{"a b", "c"}, "a b,c"},
		{"null and empty", 0, []string{null, ""}, `,""`},
		{"other delimiter not quoted", ';', []string{"1,5", "x;y"}, `1,5;"x;y"`},
		{"tab", '\t', []string{"a b", "a\tb"}, "a b\t\"a\tb\""},
		{"pipe", '|', []string{"a|b", "c"}, `"a|b"|c`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			b := &table.Batch{Rows: 1, Cols: []table.Column{textCol(tc.vals[0]), textCol(tc.vals[1])}}
			got := writeAll(t, schemaOf("a", "b"), WriterOptions{Delimiter: tc.delim}, b)
			d := string(rune(tc.delim))
			if tc.delim == 0 {
				d = ","
			}
			if want := "a" + d + "b\n" + tc.want + "\n"; got != want {
				t.Errorf("got %q, want %q", got, want)
			}
		})
	}
}

func TestWriterForms(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{
		{Name: "id", Kind: table.Int64}, {Name: "cost", Kind: table.Float64}, {Name: "late", Kind: table.Bool},
		{Name: "parcel type"}, {Name: "route, depot"},
	}}
	dict := &table.Dict{Data: []byte("smalllarge"), Offsets: []int32{0, 5, 10}}
	b := &table.Batch{Rows: 4, Cols: []table.Column{
		{Form: table.FormInt64, Ints: []int64{1, -9223372036854775808, 0, 7}, Nulls: []bool{false, false, true, false}},
		{Form: table.FormFloat64, Floats: []float64{0.1, 1e21, math.NaN(), math.Inf(-1)}},
		{Form: table.FormBool, Bools: []bool{true, false, true, false}, Nulls: []bool{false, false, false, true}},
		{Form: table.FormDict, Dict: dict, Indices: []int32{1, 0, -1, 0}, Nulls: []bool{false, false, true, false}},
		textCol("R1", "R2, Harbour", null, ""),
	}}
	got := writeAll(t, schema, WriterOptions{}, b)
	// Floats as table.AppendFloat prints them: shortest round-trip form.
	want := "id,cost,late,parcel type,\"route, depot\"\n" +
		"1,0.1,true,large,R1\n" +
		"-9223372036854775808,1e+21,false,small,\"R2, Harbour\"\n" +
		",NaN,true,,\n" +
		"7,-Inf,,small,\"\"\n"
	if got != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
}

// What the writer writes reads back to the same text, nulls and empty
// strings included, and with the kinds of numeric columns.
func TestWriterRoundTrip(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{
		{Name: "shipment_id", Kind: table.Int64}, {Name: "weight_kg", Kind: table.Float64},
		{Name: "late", Kind: table.Bool}, {Name: "postcode"}, {Name: "note"},
	}}
	notes := []string{"ring bell", "", null, "leave with \"neighbour\"", "a,b", "line1\nline2", " padded ", "x\r\ny", "\"", "end"}
	b := &table.Batch{Rows: len(notes), Cols: []table.Column{
		{Form: table.FormInt64, Ints: []int64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}},
		{Form: table.FormFloat64, Floats: []float64{0.5, 1.25, 1e-7, 3, 2.5, math.NaN(), 1e300, -0.125, 7.5, math.Inf(1)}},
		{Form: table.FormBool, Bools: []bool{true, false, true, false, true, false, true, false, true, false}},
		textCol("00501", "10115", null, "99999", "00000", "1", "2", "3", "4", "5"),
		textCol(notes...),
	}}
	for _, delim := range []byte{',', ';', '\t', '|'} {
		out := writeAll(t, schema, WriterOptions{Delimiter: delim}, b, b)
		res, err := readBoth(t, []byte(out), Options{Delimiter: delim}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(res.names, schema.Names()) {
			t.Errorf("names %q", res.names)
		}
		wantKinds := []table.Kind{table.Int64, table.Float64, table.Bool, table.String, table.String}
		if !reflect.DeepEqual(res.kinds, wantKinds) {
			t.Errorf("kinds %v, want %v", res.kinds, wantKinds)
		}
		if len(res.rows) != 2*b.Rows {
			t.Fatalf("%d rows, want %d", len(res.rows), 2*b.Rows)
		}
		for i, got := range res.rows {
			k := i % b.Rows
			for j := range b.Cols {
				c := &b.Cols[j]
				want := string(c.AppendText(nil, k))
				if c.IsNull(k) {
					want = null
				}
				if got[j] != want {
					t.Errorf("delim %q row %d col %d: %q, want %q", delim, i+1, j+1, got[j], want)
				}
			}
		}
	}
}

// A one-column table with nulls and empty strings round-trips too: nulls
// are blank lines.
func TestWriterRoundTripOneColumn(t *testing.T) {
	vals := []string{"a", null, "", null, "b"}
	out := writeAll(t, schemaOf("note"), WriterOptions{}, &table.Batch{Rows: len(vals), Cols: []table.Column{textCol(vals...)}})
	if out != "note\na\n\n\"\"\n\nb\n" {
		t.Errorf("wrote %q", out)
	}
	res, err := readBoth(t, []byte(out), Options{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, r := range res.rows {
		got = append(got, r[0])
	}
	if !reflect.DeepEqual(got, vals) {
		t.Errorf("read back %q, want %q", got, vals)
	}
}

func TestWriterHeaderOnlyAndClose(t *testing.T) {
	var buf bytes.Buffer
	w, err := NewWriter(&buf, schemaOf("id", "route"), WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if buf.Len() != 0 {
		t.Error("header written before Close: output is not buffered")
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if buf.String() != "id,route\n" {
		t.Errorf("got %q", buf.String())
	}
	if err := w.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
	if err := w.Write(&table.Batch{}); err == nil {
		t.Error("Write after Close accepted")
	}
	c := &closeCounter{}
	w, _ = NewWriter(c, schemaOf("id"), WriterOptions{})
	w.Close()
	if c.closed {
		t.Error("Close closed the underlying writer")
	}
}

type closeCounter struct {
	bytes.Buffer
	closed bool
}

func (c *closeCounter) Close() error { c.closed = true; return nil }

func TestWriterErrors(t *testing.T) {
	if _, err := NewWriter(&bytes.Buffer{}, schemaOf(), WriterOptions{}); err == nil {
		t.Error("empty schema accepted")
	}
	if _, err := NewWriter(&bytes.Buffer{}, schemaOf("a"), WriterOptions{Delimiter: '\n'}); err == nil {
		t.Error("newline delimiter accepted")
	}
	bad := []*table.Batch{
		{Rows: 1, Cols: []table.Column{textCol("a"), textCol("b")}},                                         // column count
		{Rows: 2, Cols: []table.Column{textCol("a")}},                                                       // too few values
		{Rows: 1, Cols: []table.Column{{Form: table.FormText, Data: []byte("ab"), Offsets: []int32{0, 3}}}}, // offset past data
		{Rows: 1, Cols: []table.Column{{Form: table.FormDict, Indices: []int32{0}}}},                        // no dictionary
		{Rows: 1, Cols: []table.Column{{Form: table.FormDict, Dict: &table.Dict{Offsets: []int32{0}}, Indices: []int32{0}}}},
		{Rows: 1, Cols: []table.Column{{Form: table.FormInt64}}},
		{Rows: 2, Cols: []table.Column{{Form: table.FormInt64, Ints: []int64{1, 2}, Nulls: []bool{true}}}},
	}
	for i, b := range bad {
		w, _ := NewWriter(&bytes.Buffer{}, schemaOf("a"), WriterOptions{})
		if err := w.Write(b); err == nil {
			t.Errorf("bad batch %d accepted", i)
		}
	}
	w, _ := NewWriter(failWriter{}, schemaOf("a"), WriterOptions{})
	if err := w.Close(); err == nil || !strings.Contains(err.Error(), "disk full") {
		t.Errorf("Close error %v, want the write error", err)
	}
}

type failWriter struct{}

func (failWriter) Write([]byte) (int, error) { return 0, errors.New("disk full") }

// Writing a batch allocates nothing once the row buffer has grown.
func TestWriterNoAlloc(t *testing.T) {
	b := &table.Batch{Rows: 3, Cols: []table.Column{
		textCol("a,b", "x", null), {Form: table.FormFloat64, Floats: []float64{1.5, 2, 3}},
	}}
	var buf bytes.Buffer
	w, _ := NewWriter(&buf, schemaOf("a", "b"), WriterOptions{})
	w.Write(b)
	allocs := testing.AllocsPerRun(100, func() {
		buf.Reset()
		w.Write(b)
	})
	if allocs > 0 {
		t.Errorf("%.1f allocations per batch", allocs)
	}
}

// A batch large enough to be formatted in parts gives the same bytes
// whatever the number of parts, and the same as row-sized batches.
func TestWriterPartsSameBytes(t *testing.T) {
	const n = 5*minPartRows + 17
	var cells []string
	floats := make([]float64, n)
	for i := 0; i < n; i++ {
		cells = append(cells, fmt.Sprintf("PC %d,\"%d\"", i%97, i))
		floats[i] = float64(i) / 7
	}
	big := &table.Batch{Rows: n, Cols: []table.Column{textCol(cells...), {Form: table.FormFloat64, Floats: floats}}}
	write := func(procs int, rowsPerBatch int) string {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		var buf bytes.Buffer
		w, _ := NewWriter(&buf, schemaOf("a", "b"), WriterOptions{})
		for lo := 0; lo < n; lo += rowsPerBatch {
			hi := min(lo+rowsPerBatch, n)
			b := &table.Batch{Rows: hi - lo, Cols: []table.Column{textCol(cells[lo:hi]...), {Form: table.FormFloat64, Floats: floats[lo:hi]}}}
			if rowsPerBatch == n {
				b = big
			}
			if err := w.Write(b); err != nil {
				t.Fatal(err)
			}
		}
		w.Close()
		return buf.String()
	}
	one := write(1, n)
	for _, c := range []struct{ procs, batch int }{{2, n}, {3, n}, {8, n}, {2, 1}, {4, 3000}} {
		if got := write(c.procs, c.batch); got != one {
			t.Fatalf("%d procs, batches of %d rows: output differs", c.procs, c.batch)
		}
	}
	if strings.Count(one, "\n") != n+1 {
		t.Fatalf("%d lines, want %d", strings.Count(one, "\n"), n+1)
	}
}

// Every float field reads as strconv's shortest text of its value, with
// the remembered texts in play: values that repeat, values that share a
// cache entry, the special values, and numbers as long as a float's text
// gets, over batches formatted in one part and in several.
func TestWriterFloatTexts(t *testing.T) {
	vals := []float64{0, math.Copysign(0, -1), 1, -1, 0.1, 1e21, 1e-7, math.MaxFloat64, -math.SmallestNonzeroFloat64,
		-2.2250738585072014e-308, math.NaN(), math.Inf(1), math.Inf(-1), 0.2094, 1.0 / 3}
	// A repeating mix of few values (as an encoded column has) and many
	// distinct ones, which evict each other from the cache's entries.
	for i := 0; i < 4*minPartRows; i++ {
		switch i % 3 {
		case 0:
			vals = append(vals, float64(i%5)/7)
		default:
			vals = append(vals, float64(i)*1.0000001e-3-float64(i%11))
		}
	}
	for _, rows := range []int{len(vals), 7} {
		var batches []*table.Batch
		for lo := 0; lo < len(vals); lo += rows {
			hi := min(lo+rows, len(vals))
			batches = append(batches, &table.Batch{Rows: hi - lo, Cols: []table.Column{{Form: table.FormFloat64, Floats: vals[lo:hi]}}})
		}
		lines := strings.Split(strings.TrimSuffix(writeAll(t, schemaOf("v"), WriterOptions{}, batches...), "\n"), "\n")[1:]
		if len(lines) != len(vals) {
			t.Fatalf("batches of %d rows: %d lines, want %d", rows, len(lines), len(vals))
		}
		for i, v := range vals {
			// The texts of strconv (shortest round trip) and of
			// table.AppendFloat for the special values.
			want := strconv.FormatFloat(v, 'g', -1, 64)
			switch {
			case math.IsNaN(v):
				want = "NaN"
			case math.IsInf(v, 1):
				want = "+Inf"
			}
			if lines[i] != want {
				t.Fatalf("batches of %d rows: row %d reads %q, want %q", rows, i, lines[i], want)
			}
		}
	}
}
