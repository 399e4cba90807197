package csvio

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"

	"manyfold/io/table"
)

// null stands for a null cell in expected rows.
const null = "∅"

// result is everything a read yields, flattened for comparison.
type result struct {
	names []string
	kinds []table.Kind
	rows  [][]string
	lines []int64
	first []int64 // FirstRow of each batch
	sizes []int   // Rows of each batch
}

// readAll reads in to the end. It returns the rows read before an error
// together with the error.
func readAll(in []byte, opts Options, sel []int) (result, error) {
	var res result
	r, err := NewReader(bytes.NewReader(in), "shipments.csv", opts)
	if err != nil {
		return res, err
	}
	defer r.Close()
	if sel != nil {
		if err := r.Select(sel); err != nil {
			return res, err
		}
	}
	for _, f := range r.Schema().Fields {
		res.names = append(res.names, f.Name)
		res.kinds = append(res.kinds, f.Kind)
	}
	for {
		b, err := r.Next()
		if err == io.EOF {
			return res, nil
		}
		if err != nil {
			return res, err
		}
		res.first = append(res.first, b.FirstRow)
		res.sizes = append(res.sizes, b.Rows)
		if len(b.Lines) != b.Rows {
			return res, errors.New("len(Lines) != Rows")
		}
		res.lines = append(res.lines, b.Lines...)
		for i := 0; i < b.Rows; i++ {
			row := make([]string, len(b.Cols))
			for j := range b.Cols {
				c := &b.Cols[j]
				if c.Form != table.FormText || c.Len() != b.Rows {
					return res, errors.New("column not in text form or wrong length")
				}
				if c.IsNull(i) {
					row[j] = null
				} else {
					row[j] = string(c.Bytes(i))
				}
			}
			res.rows = append(res.rows, row)
		}
	}
}

// readBoth reads in with the normal buffer and with a tiny one (so that
// every record straddles refills) and fails the test if they differ.
func readBoth(t *testing.T, in []byte, opts Options, sel []int) (result, error) {
	t.Helper()
	res, err := readAll(in, opts, sel)
	old := bufSize
	bufSize = 8
	res2, err2 := readAll(in, opts, sel)
	bufSize = old
	if !reflect.DeepEqual(res, res2) || errText(err) != errText(err2) {
		t.Fatalf("tiny buffer read differs:\n%+v %v\n%+v %v", res, err, res2, err2)
	}
	return res, err
}

func errText(err error) string {
	if err == nil {
		return ""
	}
	return err.Error()
}

func rows(rs ...[]string) [][]string { return rs }
func row(vs ...string) []string      { return vs }

func TestReadRecords(t *testing.T) {
	tests := []struct {
		name  string
		in    string
		opts  Options
		names []string
		rows  [][]string
		lines []int64
	}{
		// RFC 4180 section 2, rule 1: records separated by CRLF.
		{"rfc rule 1", "aaa,bbb,ccc\r\nzzz,yyy,xxx\r\n", Options{NoHeader: true},
			[]string{"col1", "col2", "col3"}, rows(row("aaa", "bbb", "ccc"), row("zzz", "yyy", "xxx")), []int64{1, 2}},
		// RFC 4180 section 2, rule 2: the last record may lack a line break.
		{"rfc rule 2", "aaa,bbb,ccc\r\nzzz,yyy,xxx", Options{NoHeader: true},
			[]string{"col1", "col2", "col3"}, rows(row("aaa", "bbb", "ccc"), row("zzz", "yyy", "xxx")), []int64{1, 2}},
		// RFC 4180 section 2, rule 5: fields may be enclosed in quotes.
		{"rfc rule 5", "\"aaa\",\"bbb\",\"ccc\"\r\nzzz,yyy,xxx", Options{NoHeader: true},
			[]string{"col1", "col2", "col3"}, rows(row("aaa", "bbb", "ccc"), row("zzz", "yyy", "xxx")), []int64{1, 2}},
		// RFC 4180 section 2, rule 6: line breaks inside quotes are data.
		{"rfc rule 6", "\"aaa\",\"b\r\nbb\",\"ccc\"\r\nzzz,yyy,xxx", Options{NoHeader: true},
			[]string{"col1", "col2", "col3"}, rows(row("aaa", "b\r\nbb", "ccc"), row("zzz", "yyy", "xxx")), []int64{1, 3}},
		// RFC 4180 section 2, rule 7: a doubled quote inside quotes is one quote.
		{"rfc rule 7", "\"aaa\",\"b\"\"bb\",\"ccc\"", Options{NoHeader: true},
			[]string{"col1", "col2", "col3"}, rows(row("aaa", "b\"bb", "ccc")), []int64{1}},
		// RFC 4180 section 2, rule 3: an optional header line.
		{"rfc rule 3 header", "name_a,name_b,name_c\r\naaa,bbb,ccc\r\n", Options{},
			[]string{"name_a", "name_b", "name_c"}, rows(row("aaa", "bbb", "ccc")), []int64{2}},
		{"LF and CRLF mixed", "postcode,route\n00501,R1\r\n10115,R2\n", Options{},
			[]string{"postcode", "route"}, rows(row("00501", "R1"), row("10115", "R2")), []int64{2, 3}},
		{"BOM dropped", "\xef\xbb\xbfpostcode,route\n00501,R1\n", Options{},
			[]string{"postcode", "route"}, rows(row("00501", "R1")), []int64{2}},
		{"BOM only at the start", "postcode\n\xef\xbb\xbf1\n", Options{},
			[]string{"postcode"}, rows(row("\xef\xbb\xbf1")), []int64{2}},
		{"nulls and empty strings", "a,b,c\n,\"\",x\n\"\",,\n", Options{},
			[]string{"a", "b", "c"}, rows(row(null, "", "x"), row("", null, null)), []int64{2, 3}},
		{"spaces kept", "a,b\n x , y\n", Options{},
			[]string{"a", "b"}, rows(row(" x ", " y")), []int64{2}},
		{"quoted delimiters and newlines, lines", "id,note\n1,\"ring\nthen\nknock\"\n2,\"a,b\"\n3,\"x\r\ny\"\r\n4,z\n",
			Options{}, []string{"id", "note"},
			rows(row("1", "ring\nthen\nknock"), row("2", "a,b"), row("3", "x\r\ny"), row("4", "z")), []int64{2, 5, 6, 8}},
		{"quoted header names", "\"sender, account\",\"a\"\"b\"\n1,2\n", Options{},
			[]string{"sender, account", "a\"b"}, rows(row("1", "2")), []int64{2}},
		{"blank lines skipped", "\n\na,b\n\n1,2\r\n\r\n3,4\n\n", Options{},
			[]string{"a", "b"}, rows(row("1", "2"), row("3", "4")), []int64{5, 7}},
		{"one column: blank line is null", "a\n1\n\n2\n", Options{},
			[]string{"a"}, rows(row("1"), row(null), row("2")), []int64{2, 3, 4}},
		{"bare CR is data", "a,b\nx\ry,z\r\n", Options{},
			[]string{"a", "b"}, rows(row("x\ry", "z")), []int64{2}},
		{"CR at end of input dropped", "a,b\n1,2\r", Options{},
			[]string{"a", "b"}, rows(row("1", "2")), []int64{2}},
		{"quoted field at end of input", "a,b\n1,\"2\"", Options{},
			[]string{"a", "b"}, rows(row("1", "2")), []int64{2}},
		{"header only", "a,b\n", Options{}, []string{"a", "b"}, nil, nil},
		{"header only no LF", "a,b", Options{}, []string{"a", "b"}, nil, nil},
		{"trailing empty field", "a,b\n1,\n", Options{},
			[]string{"a", "b"}, rows(row("1", null)), []int64{2}},
		{"no header", "1,2\n3,4\n", Options{NoHeader: true},
			[]string{"col1", "col2"}, rows(row("1", "2"), row("3", "4")), []int64{1, 2}},
		{"no header, duplicate values fine", "x,x\n,\n", Options{NoHeader: true},
			[]string{"col1", "col2"}, rows(row("x", "x"), row(null, null)), []int64{1, 2}},
		{"semicolon", "a;b\n1,5;\"x;y\"\n", Options{Delimiter: ';'},
			[]string{"a", "b"}, rows(row("1,5", "x;y")), []int64{2}},
		{"tab", "a\tb\n1\t\"x\ty\"\n", Options{Delimiter: '\t'},
			[]string{"a", "b"}, rows(row("1", "x\ty")), []int64{2}},
		{"pipe", "a|b\n1|2,3\n", Options{Delimiter: '|'},
			[]string{"a", "b"}, rows(row("1", "2,3")), []int64{2}},
		{"utf-8 data", "stadt,route\nMünster,\"Köln, Süd\"\n", Options{},
			[]string{"stadt", "route"}, rows(row("Münster", "Köln, Süd")), []int64{2}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			res, err := readBoth(t, []byte(tc.in), tc.opts, nil)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(res.names, tc.names) {
				t.Errorf("names %q, want %q", res.names, tc.names)
			}
			if !reflect.DeepEqual(res.rows, tc.rows) {
				t.Errorf("rows %q, want %q", res.rows, tc.rows)
			}
			if !reflect.DeepEqual(res.lines, tc.lines) {
				t.Errorf("lines %v, want %v", res.lines, tc.lines)
			}
		})
	}
}

func TestNullsNilWhenNone(t *testing.T) {
	r, err := NewReader(strings.NewReader("a,b\n1,\n2,3\n"), "s.csv", Options{})
	if err != nil {
		t.Fatal(err)
	}
	b, err := r.Next()
	if err != nil {
		t.Fatal(err)
	}
	if b.Cols[0].Nulls != nil {
		t.Errorf("column a has no nulls but Nulls = %v", b.Cols[0].Nulls)
	}
	if !reflect.DeepEqual(b.Cols[1].Nulls, []bool{true, false}) {
		t.Errorf("column b Nulls = %v", b.Cols[1].Nulls)
	}
}

func compress(t *testing.T, kind string, data []byte) []byte {
	t.Helper()
	var buf bytes.Buffer
	switch kind {
	case "gzip":
		w := gzip.NewWriter(&buf)
		w.Write(data)
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
	case "zstd":
		w, err := zstd.NewWriter(&buf)
		if err != nil {
			t.Fatal(err)
		}
		w.Write(data)
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
	}
	return buf.Bytes()
}

func TestCompressed(t *testing.T) {
	plain := []byte("\xef\xbb\xbfshipment_id,postcode\n1,00501\n2,\"10115\"\n")
	want := rows(row("1", "00501"), row("2", "10115"))
	for _, kind := range []string{"gzip", "zstd"} {
		t.Run(kind, func(t *testing.T) {
			res, err := readBoth(t, compress(t, kind, plain), Options{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(res.rows, want) || res.names[1] != "postcode" {
				t.Errorf("got %q %q", res.names, res.rows)
			}
		})
	}
	t.Run("truncated gzip", func(t *testing.T) {
		big := shipmentsCSV(200 << 10)
		z := compress(t, "gzip", big)
		_, err := readAll(z[:len(z)/2], Options{}, nil)
		if !errors.Is(err, table.ErrCorrupt) || !strings.HasPrefix(err.Error(), "shipments.csv:") {
			t.Errorf("err = %v, want ErrCorrupt naming the file", err)
		}
	})
}

func TestInference(t *testing.T) {
	tests := []struct {
		name string
		in   string
		opts Options
		want []table.Kind
	}{
		{"int float bool text", "id,w,late,pc\n1,2.5,true,x\n-7,3,False,y\n", Options{},
			[]table.Kind{table.Int64, table.Float64, table.Bool, table.String}},
		{"leading zero makes text", "pc,pc2\n00501,1\n10115,0.5\n", Options{},
			[]table.Kind{table.String, table.Float64}},
		{"zero itself is int", "n\n0\n-0\n10\n", Options{}, []table.Kind{table.Int64}},
		{"leading zero float is text", "w\n1.5\n01.5\n", Options{}, []table.Kind{table.String}},
		{"plus sign is not int", "n\n+5\n6\n", Options{}, []table.Kind{table.Float64}},
		// An integer beyond int64 would lose digits as a float: text.
		{"int64 range", "a,b\n9223372036854775807,9223372036854775808\n-9223372036854775808,1\n", Options{},
			[]table.Kind{table.Int64, table.String}},
		{"nulls ignored", "a,b\n,\n3,\n", Options{}, []table.Kind{table.Int64, table.String}},
		{"quoted empty is text", "a\n1\n\"\"\n", Options{}, []table.Kind{table.String}},
		{"quoted number is a number", "a\n\"12\"\n", Options{}, []table.Kind{table.Int64}},
		{"float forms", "a\n1e5\n-.5\n5.\nNaN\n+Inf\n2E-3\n", Options{}, []table.Kind{table.Float64}},
		{"float overflow is text", "a\n1e999\n", Options{}, []table.Kind{table.String}},
		{"not floats", "a,b,c\n1e,0x10,1_000\n", Options{}, []table.Kind{table.String, table.String, table.String}},
		{"spaces make text", "a\n 1\n", Options{}, []table.Kind{table.String}},
		{"bool with yes is text", "a\ntrue\nyes\n", Options{}, []table.Kind{table.String}},
		{"sample limit", "a\n1\n2\nx\n", Options{SampleRows: 2}, []table.Kind{table.Int64}},
		{"beyond sample still delivered", "a\n1\nx\n", Options{SampleRows: 1}, []table.Kind{table.Int64}},
		{"override", "pc,id\n501,1\n", Options{Types: map[string]table.Kind{"pc": table.String, "id": table.Float64}},
			[]table.Kind{table.String, table.Float64}},
		{"sample stops at bad row", "a,b\n1,x\n2\n", Options{}, []table.Kind{table.Int64, table.String}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r, err := NewReader(strings.NewReader(tc.in), "s.csv", tc.opts)
			if err != nil {
				t.Fatal(err)
			}
			var got []table.Kind
			for _, f := range r.Schema().Fields {
				got = append(got, f.Kind)
				if !f.Nullable {
					t.Errorf("column %s not nullable", f.Name)
				}
			}
			if !reflect.DeepEqual(got, tc.want) {
				t.Errorf("kinds %v, want %v", got, tc.want)
			}
		})
	}
}

// The sampled rows are delivered again, in order, whatever SampleRows and
// BatchRows are.
func TestSampleReplay(t *testing.T) {
	var b strings.Builder
	b.WriteString("id,route\n")
	var want [][]string
	for i := 0; i < 50; i++ {
		id := strings.Repeat("7", i%5+1)
		b.WriteString(id + ",\"R\n" + id + "\"\n")
		want = append(want, row(id, "R\n"+id))
	}
	for _, sample := range []int{1, 3, 49, 50, 51, 1000} {
		for _, batch := range []int{1, 3, 7, 50, 100} {
			res, err := readBoth(t, []byte(b.String()), Options{SampleRows: sample, BatchRows: batch}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(res.rows, want) {
				t.Fatalf("sample %d batch %d: rows differ", sample, batch)
			}
			for i, l := range res.lines {
				if l != int64(2+2*i) {
					t.Fatalf("sample %d batch %d: row %d on line %d, want %d", sample, batch, i+1, l, 2+2*i)
				}
			}
		}
	}
}

func TestBatchBoundaries(t *testing.T) {
	in := "id,note\n1,a\n2,\"b\nb\"\n3,c\n4,\"d\"\"\"\n5,e\n6,f\n7,\"g\r\n\"\n"
	res, err := readBoth(t, []byte(in), Options{BatchRows: 3}, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := rows(row("1", "a"), row("2", "b\nb"), row("3", "c"), row("4", "d\""), row("5", "e"), row("6", "f"), row("7", "g\r\n"))
	if !reflect.DeepEqual(res.rows, want) {
		t.Errorf("rows %q", res.rows)
	}
	if !reflect.DeepEqual(res.sizes, []int{3, 3, 1}) || !reflect.DeepEqual(res.first, []int64{1, 4, 7}) {
		t.Errorf("batch sizes %v first rows %v, want [3 3 1] [1 4 7]", res.sizes, res.first)
	}
	if wantLines := []int64{2, 3, 5, 6, 7, 8, 9}; !reflect.DeepEqual(res.lines, wantLines) {
		t.Errorf("lines %v, want %v", res.lines, wantLines)
	}
}

func TestSelect(t *testing.T) {
	in := "id,postcode,route,late\n1,00501,\"R1, North\",true\n2,,R2,false\n"
	tests := []struct {
		sel   []int
		names []string
		rows  [][]string
	}{
		{[]int{2, 0}, []string{"route", "id"}, rows(row("R1, North", "1"), row("R2", "2"))},
		{[]int{1}, []string{"postcode"}, rows(row("00501"), row(null))},
		{[]int{3, 2, 1, 0}, []string{"late", "route", "postcode", "id"},
			rows(row("true", "R1, North", "00501", "1"), row("false", "R2", null, "2"))},
		{[]int{}, nil, rows([]string{}, []string{})},
	}
	for _, tc := range tests {
		res, err := readBoth(t, []byte(in), Options{}, tc.sel)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(res.names, tc.names) || !reflect.DeepEqual(res.rows, tc.rows) {
			t.Errorf("Select(%v): %q %q, want %q %q", tc.sel, res.names, res.rows, tc.names, tc.rows)
		}
	}
	if res, _ := readAll([]byte(in), Options{}, []int{0}); res.kinds[0] != table.Int64 {
		t.Errorf("selected kind %v, want int", res.kinds[0])
	}
	// A bad row is still found in columns that are not selected.
	if _, err := readAll([]byte("a,b,c\n1,2\n"), Options{}, []int{0}); err == nil ||
		err.Error() != "shipments.csv:2: 2 fields, header has 3" {
		t.Errorf("err = %v", err)
	}
	for _, bad := range [][]int{{4}, {-1}, {0, 0}} {
		if _, err := readAll([]byte(in), Options{}, bad); err == nil {
			t.Errorf("Select(%v) accepted", bad)
		}
	}
	r, _ := NewReader(strings.NewReader(in), "s.csv", Options{})
	r.Next()
	if err := r.Select([]int{0}); err == nil {
		t.Error("Select after Next accepted")
	}
}

func TestErrors(t *testing.T) {
	tests := []struct {
		name string
		in   string
		opts Options
		msg  string
		line int64
		col  string
		rows int // rows delivered before the error
	}{
		{"too few fields", "a,b,c,d,e,f,g,h\n1,2,3,4,5,6,7,8\n1,2,3,4,5,6,7\n", Options{},
			"shipments.csv:3: 7 fields, header has 8", 3, "", 1},
		{"too many fields", "a,b\n1,2,3\n", Options{}, "shipments.csv:2: 3 fields, header has 2", 2, "", 0},
		{"ragged after quoted newline", "a,b\n\"x\ny\",1\n2\n", Options{}, "shipments.csv:4: 1 fields, header has 2", 4, "", 1},
		{"ragged no header", "1,2\n3\n", Options{NoHeader: true}, "shipments.csv:2: 1 fields, first row has 2", 2, "", 1},
		{"bad first row, no header", "1,x\"\n", Options{NoHeader: true},
			`shipments.csv:1: column "col2": byte 4: " inside an unquoted field (quote the whole field and double the ")`, 1, "col2", 0},
		{"unterminated quote", "id,route\n1,R1\n2,\"R2\n3,R3\n", Options{},
			`shipments.csv:3: column "route": quote opened here is never closed`, 3, "route", 1},
		{"unterminated quote after doubled", "id,route\n1,\"R\"\"", Options{},
			`shipments.csv:2: column "route": quote opened here is never closed`, 2, "route", 0},
		{"unterminated quote in header", "id,\"route\n", Options{},
			`shipments.csv:1: header field 2: quote opened here is never closed`, 1, "", 0},
		{"bare quote", "id,route\n1,R\"1\n", Options{},
			`shipments.csv:2: column "route": byte 4: " inside an unquoted field (quote the whole field and double the ")`, 2, "route", 0},
		{"quote after spaces", "id,route\n1, \"R1\"\n", Options{},
			`shipments.csv:2: column "route": byte 4: " inside an unquoted field (quote the whole field and double the ")`, 2, "route", 0},
		{"stray after closing quote", "id,route\n1,\"R1\"x\n", Options{},
			`shipments.csv:2: column "route": byte 7: unexpected 'x' after a closing quote (a quoted field must end at a delimiter or line end)`, 2, "route", 0},
		{"space after closing quote", "id,route\n\"1\" ,R1\n", Options{},
			`shipments.csv:2: column "id": byte 4: unexpected ' ' after a closing quote (a quoted field must end at a delimiter or line end)`, 2, "id", 0},
		{"stray on a later line of a record", "id,route\n1,\"R\n1\"2\n", Options{},
			`shipments.csv:3: column "route": byte 3: unexpected '2' after a closing quote (a quoted field must end at a delimiter or line end)`, 3, "route", 0},
		{"CR after closing quote", "id,route\n1,\"R1\"\rx\n", Options{},
			`shipments.csv:2: column "route": byte 7: unexpected byte 0x0d after a closing quote (a quoted field must end at a delimiter or line end)`, 2, "route", 0},
		{"stray in extra field", "a\n\"1\",\"2\"x\n", Options{},
			`shipments.csv:2: field 2: byte 8: unexpected 'x' after a closing quote (a quoted field must end at a delimiter or line end)`, 2, "", 0},
		{"duplicate header", "field_name,field_name,field_name\r\n", Options{},
			`shipments.csv:1: column "field_name": named twice in the header, columns 1 and 2`, 1, "field_name", 0},
		{"empty header name", "id,,route\n", Options{}, "shipments.csv:1: header column 2 has an empty name", 1, "", 0},
		{"blank header name", "id,\" \"\n", Options{}, "shipments.csv:1: header column 2 has an empty name", 1, "", 0},
		{"header after blank lines", "\n\nid,id\n", Options{},
			`shipments.csv:3: column "id": named twice in the header, columns 1 and 2`, 3, "id", 0},
		{"type for missing column", "id\n1\n", Options{Types: map[string]table.Kind{"route": table.String}},
			`shipments.csv: column "route": a type is given for a column the header lacks`, 0, "route", 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			res, err := readBoth(t, []byte(tc.in), tc.opts, nil)
			if err == nil {
				t.Fatal("no error")
			}
			if err.Error() != tc.msg {
				t.Errorf("error\n%s\nwant\n%s", err, tc.msg)
			}
			var de *table.DataError
			if !errors.As(err, &de) {
				t.Fatalf("%T is not a *table.DataError", err)
			}
			if de.File != "shipments.csv" || de.Line != tc.line || de.Column != tc.col {
				t.Errorf("File %q Line %d Column %q, want shipments.csv %d %q", de.File, de.Line, de.Column, tc.line, tc.col)
			}
			if len(res.rows) != tc.rows {
				t.Errorf("%d rows before the error, want %d", len(res.rows), tc.rows)
			}
		})
	}
}

func TestRecordLimit(t *testing.T) {
	old, oldBuf := maxRecordBytes, bufSize
	maxRecordBytes, bufSize = 64, 16
	defer func() { maxRecordBytes, bufSize = old, oldBuf }()
	long := strings.Repeat("x", 1000)
	tests := []struct{ in, msg string }{
		{"id,note\n1,ok\n2,\"" + long + "\"\n", `shipments.csv:3: column "note": quote opened here is not closed within 64 bytes`},
		{"id,note\n1,ok\n2," + long + "\n", "shipments.csv:3: record longer than 64 bytes"},
	}
	if _, err := readAll([]byte("id,\""+long), Options{}, nil); err == nil ||
		err.Error() != "shipments.csv:1: field 2: quote opened here is not closed within 64 bytes" {
		t.Errorf("long header: err = %v", err)
	}
	for _, tc := range tests {
		res, err := readAll([]byte(tc.in), Options{SampleRows: 1}, nil)
		if err == nil || err.Error() != tc.msg || len(res.rows) != 1 {
			t.Errorf("err = %v after %d rows, want %s after 1", err, len(res.rows), tc.msg)
		}
	}
}

func TestErrorIsSticky(t *testing.T) {
	r, err := NewReader(strings.NewReader("a,b\n1,2\n3\n4,5\n"), "s.csv", Options{})
	if err != nil {
		t.Fatal(err)
	}
	if b, err := r.Next(); err != nil || b.Rows != 1 {
		t.Fatalf("first Next: %v", err)
	}
	_, err1 := r.Next()
	_, err2 := r.Next()
	if err1 == nil || err1 != err2 {
		t.Errorf("errors %v then %v, want the same error twice", err1, err2)
	}
}

func TestEmpty(t *testing.T) {
	for _, in := range []string{"", "\xef\xbb\xbf", "\n\n", " \t\r\n ", "\xef\xbb\xbf\r\n"} {
		_, err := NewReader(strings.NewReader(in), "shipments.csv", Options{})
		if !errors.Is(err, table.ErrEmpty) || err.Error() != "shipments.csv: file is empty" {
			t.Errorf("%q: err = %v, want ErrEmpty naming the file", in, err)
		}
	}
	gz := compress(t, "gzip", nil)
	if _, err := NewReader(bytes.NewReader(gz), "shipments.csv.gz", Options{}); !errors.Is(err, table.ErrEmpty) {
		t.Errorf("empty gzip: err = %v, want ErrEmpty", err)
	}
}

func TestBadOptions(t *testing.T) {
	if _, err := NewReader(strings.NewReader("a\n"), "s.csv", Options{Delimiter: '"'}); err == nil {
		t.Error("quote delimiter accepted")
	}
	if _, err := NewReader(strings.NewReader("a\n"), "s.csv", Options{Types: map[string]table.Kind{"a": 9}}); err == nil {
		t.Error("unknown kind accepted")
	}
}

// A one-byte-at-a-time source reads the same as an in-memory one.
func TestSlowSource(t *testing.T) {
	data := shipmentsCSV(64 << 10)
	want, err := readAll(data, Options{BatchRows: 100}, nil)
	if err != nil {
		t.Fatal(err)
	}
	old := bufSize
	bufSize = 64
	defer func() { bufSize = old }()
	r, err := NewReader(oneByteReader{bytes.NewReader(data)}, "shipments.csv", Options{BatchRows: 100})
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		for i := 0; i < b.Rows; i++ {
			if got := string(b.Cols[3].Bytes(i)); got != want.rows[n][3] {
				t.Fatalf("row %d route %q, want %q", n+1, got, want.rows[n][3])
			}
			n++
		}
	}
	if n != len(want.rows) || n < 500 {
		t.Errorf("%d rows, want %d", n, len(want.rows))
	}
}

type oneByteReader struct{ r io.Reader }

func (o oneByteReader) Read(p []byte) (int, error) {
	if len(p) == 0 {
		return 0, nil
	}
	return o.r.Read(p[:1])
}

// Reading a batch allocates nothing once the buffers have grown.
func TestNoAllocPerBatch(t *testing.T) {
	data := shipmentsCSV(4 << 20)
	r, err := NewReader(bytes.NewReader(data), "s.csv", Options{BatchRows: 1000})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 5; i++ {
		r.Next()
	}
	allocs := testing.AllocsPerRun(20, func() {
		if _, err := r.Next(); err != nil {
			t.Fatal(err)
		}
	})
	if allocs > 0.5 {
		t.Errorf("%.1f allocations per batch of 1000 rows", allocs)
	}
}

// TestValuesCheckedAgainstKind: every value of an int, float or bool
// column must read as that kind, forced or inferred, past the inference
// sample too; the rows before a bad value are delivered first.
func TestValuesCheckedAgainstKind(t *testing.T) {
	cases := []struct {
		name   string
		text   string
		opts   Options
		rows   int    // rows delivered before the error
		line   int64  // line of the error, 0 for none
		column string // column of the error
	}{
		{"forced int", "pc,late\n1,0\n007,1\n3.0,0\nPC1,1\n2,0\n", Options{Types: map[string]table.Kind{"pc": table.Int64}}, 3, 5, "pc"},
		{"forced float", "cost\n1.5\n-2e3\nNaN\n1;5\n", Options{Types: map[string]table.Kind{"cost": table.Float64}}, 3, 5, "cost"},
		{"forced bool", "late\ntrue\n0\nT\nmaybe\n", Options{Types: map[string]table.Kind{"late": table.Bool}}, 3, 5, "late"},
		{"inferred, bad past the sample", "w,id\n" + strings.Repeat("1,a\n", 50) + "heavy,b\n", Options{SampleRows: 10}, 50, 52, "w"},
		{"all good", "w\n1\n\n2\n", Options{Types: map[string]table.Kind{"w": table.Int64}}, 3, 0, ""},
	}
	for _, c := range cases {
		r, err := NewReader(strings.NewReader(c.text), "s.csv", c.opts)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		rows := 0
		var last error
		for {
			b, err := r.Next()
			if err != nil {
				last = err
				break
			}
			rows += b.Rows
		}
		if rows != c.rows {
			t.Errorf("%s: %d rows before the error, want %d", c.name, rows, c.rows)
		}
		var de *table.DataError
		if c.line == 0 {
			if last != io.EOF {
				t.Errorf("%s: %v, want EOF", c.name, last)
			}
			continue
		}
		if !errors.As(last, &de) || de.Line != c.line || de.Column != c.column || de.File != "s.csv" {
			t.Errorf("%s: %v, want a data error at line %d, column %s", c.name, last, c.line, c.column)
		}
	}
}

// TestEstimateRows: an uncompressed file's rows are estimated from its size
// once rows have been read; other inputs give 0.
func TestEstimateRows(t *testing.T) {
	var sb strings.Builder
	sb.WriteString("shipment_id,dest_postcode\n")
	for i := 0; i < 20000; i++ {
		fmt.Fprintf(&sb, "S%07d,PC%d\n", i, i%97)
	}
	path := filepath.Join(t.TempDir(), "s.csv")
	if err := os.WriteFile(path, []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r, err := NewReader(f, path, Options{BatchRows: 1000})
	if err != nil {
		t.Fatal(err)
	}
	if n := r.EstimateRows(); n != 0 {
		t.Errorf("estimate before any row: %d, want 0", n)
	}
	if _, err := r.Next(); err != nil {
		t.Fatal(err)
	}
	// Rows of nearly equal length: within 2% of the truth.
	if n := r.EstimateRows(); n < 19600 || n > 20400 {
		t.Errorf("estimate %d, want about 20000", n)
	}
	sr, err := NewReader(strings.NewReader(sb.String()), "stdin", Options{})
	if err != nil {
		t.Fatal(err)
	}
	sr.Next()
	if n := sr.EstimateRows(); n != 0 {
		t.Errorf("estimate of a stream: %d, want 0", n)
	}
}
