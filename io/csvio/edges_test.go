package csvio

import (
	"bytes"
	"errors"
	"io"
	"runtime"
	"slices"
	"strings"
	"testing"

	"manyfold/io/table"
)

// TestBadValueBatchLines: when a value past the sample does not read as its
// column's kind, the batch of the rows before it carries as many line
// numbers as rows.
func TestBadValueBatchLines(t *testing.T) {
	r, err := NewReader(strings.NewReader("a\n0\n1\nA\n"), "s.csv", Options{SampleRows: 2, BatchRows: 10})
	if err != nil {
		t.Fatal(err)
	}
	b, err := r.Next()
	if err != nil {
		t.Fatal(err)
	}
	if b.Rows != 2 || len(b.Lines) != b.Rows {
		t.Fatalf("batch of %d rows with %d lines, want 2 and 2", b.Rows, len(b.Lines))
	}
	var de *table.DataError
	var ke *KindError
	if _, err := r.Next(); !errors.As(err, &de) || de.Line != 4 || de.Column != "a" || !errors.As(err, &ke) ||
		ke.Value != "A" || ke.Want != table.Int64 || ke.Is != table.String {
		t.Errorf("second Next: %v, want the bad value A (text, not int) at line 4, column a", err)
	}
}

// TestBareCRHeader: a file whose lines end in CR alone reads as one long
// header; the reader says so instead of complaining of its names.
func TestBareCRHeader(t *testing.T) {
	for _, in := range []string{
		"a,b,c\r1,x,y\r2,x,y\r", // would be "named twice" (x)
		"id,route\r1,R1\r2,R2\r",
		"id,\"route\"\r1,R1\r",
	} {
		_, err := readBoth(t, []byte(in), Options{}, nil)
		var de *table.DataError
		if !errors.As(err, &de) || de.Line != 1 || !errors.Is(err, errBareCR) || !strings.Contains(err.Error(), "carriage return") {
			t.Errorf("%q: %v, want a bare-CR error on line 1", in, err)
		}
	}
	// CRLF and a CR inside a quoted data field stay fine.
	res, err := readBoth(t, []byte("id,route\r\n1,\"R\r1\"\r\n"), Options{}, nil)
	if err != nil || len(res.rows) != 1 || res.rows[0][1] != "R\r1" {
		t.Errorf("CRLF file: %v %q", err, res.rows)
	}
}

// TestNULAnywhere: a NUL byte is refused wherever it is, past the first
// 512 bytes too, in a column not selected, and in a quoted field.
func TestNULAnywhere(t *testing.T) {
	var head strings.Builder
	head.WriteString("id,note,route\n")
	for i := 0; i < 100; i++ {
		head.WriteString("1,fine,R1\n")
	}
	tests := []struct {
		name string
		in   string
		sel  []int
		msg  string
	}{
		{"unquoted", head.String() + "2,ab\x00c,R2\n",
			nil, `s.csv:102: column "note": byte 5: NUL byte (0x00): the file looks binary, not CSV text`},
		{"quoted", head.String() + "2,\"a\nb\x00\",R2\n",
			nil, `s.csv:103: column "note": byte 2: NUL byte (0x00): the file looks binary, not CSV text`},
		{"not selected", head.String() + "2,ab\x00c,R2\n",
			[]int{0, 2}, `s.csv:102: column "note": byte 5: NUL byte (0x00): the file looks binary, not CSV text`},
		{"header", "id,no\x00te\n1,2\n",
			nil, `s.csv:1: header field 2: byte 6: NUL byte (0x00): the file looks binary, not CSV text`},
		{"last byte", head.String() + "2,x,R2\n\x00",
			nil, `s.csv:103: column "id": byte 1: NUL byte (0x00): the file looks binary, not CSV text`},
	}
	for _, tc := range tests {
		for _, size := range []int{1 << 20, 8} {
			old := bufSize
			bufSize = size
			_, err := readAllNamed([]byte(tc.in), "s.csv", Options{SampleRows: 10}, tc.sel)
			bufSize = old
			if err == nil || err.Error() != tc.msg {
				t.Errorf("%s (buffer %d): %v\nwant %s", tc.name, size, err, tc.msg)
			}
			var de *table.DataError
			if !errors.As(err, &de) {
				t.Errorf("%s: %T is not a *table.DataError", tc.name, err)
			}
		}
	}
}

// readAllNamed is readAll with the input named name.
func readAllNamed(in []byte, name string, opts Options, sel []int) (int, error) {
	r, err := NewReader(bytes.NewReader(in), name, opts)
	if err != nil {
		return 0, err
	}
	defer r.Close()
	if sel != nil {
		if err := r.Select(sel); err != nil {
			return 0, err
		}
	}
	return countRows(r)
}

// TestFieldLimit: a field may hold Options.MaxFieldBytes bytes as written
// (quotes included); one byte more is an error naming the line and column.
func TestFieldLimit(t *testing.T) {
	const limit = 100
	ok := strings.Repeat("x", limit)
	tests := []struct {
		name, in, msg string
		rows          int
	}{
		{"unquoted at the limit", "id,note\n1," + ok + "\n", "", 1},
		{"quoted at the limit", "id,note\n1,\"" + ok[2:] + "\"\n", "", 1},
		{"unquoted over", "id,note\n1,a\n2," + ok + "y\n3,b\n",
			`s.csv:3: column "note": byte 3: field longer than 100 bytes (the limit; raise it with max field bytes)`, 1},
		{"quoted over", "id,note\n1,a\n2,\"" + ok[1:] + "\"\n",
			`s.csv:3: column "note": byte 3: field longer than 100 bytes (the limit; raise it with max field bytes)`, 1},
		{"quoted over, doubled quotes", "id,note\n1,a\n2,\"" + strings.Repeat(`""`, 50) + "\"\n",
			`s.csv:3: column "note": byte 3: field longer than 100 bytes (the limit; raise it with max field bytes)`, 1},
		{"header", "id," + ok + "z\n1,2\n",
			`s.csv:1: header field 2: byte 4: field longer than 100 bytes (the limit; raise it with max field bytes)`, 0},
	}
	for _, tc := range tests {
		for _, size := range []int{1 << 20, 8} {
			old := bufSize
			bufSize = size
			rows, err := readAllNamed([]byte(tc.in), "s.csv", Options{MaxFieldBytes: limit, SampleRows: 1}, nil)
			bufSize = old
			if errText(err) != tc.msg || rows != tc.rows {
				t.Errorf("%s (buffer %d): %d rows, %v\nwant %d rows, %s", tc.name, size, rows, err, tc.rows, tc.msg)
			}
		}
	}
}

// endless is a CSV header and one row whose second field goes on for n
// bytes, generated as it is read.
type endless struct {
	head []byte
	n    int
}

func (e *endless) Read(p []byte) (int, error) {
	if len(e.head) > 0 {
		k := copy(p, e.head)
		e.head = e.head[k:]
		return k, nil
	}
	if e.n == 0 {
		return 0, io.EOF
	}
	k := min(len(p), e.n)
	for i := range p[:k] {
		p[i] = 'x'
	}
	e.n -= k
	return k, nil
}

// TestFieldLimitMemory: a field far longer than the limit is refused after
// reading little more than the limit, so memory stays bounded.
func TestFieldLimitMemory(t *testing.T) {
	const limit = 64 << 10
	for _, quoted := range []bool{false, true} {
		head := "id,note\n1,"
		if quoted {
			head += "\""
		}
		src := &endless{head: []byte(head), n: 256 << 20}
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		_, err := readAllReader(src, Options{MaxFieldBytes: limit})
		runtime.ReadMemStats(&after)
		var de *table.DataError
		if !errors.As(err, &de) || de.Line != 2 || de.Column != "note" || !strings.Contains(err.Error(), "field longer than 65536 bytes") {
			t.Errorf("quoted %v: %v, want a field-size error at line 2, column note", quoted, err)
		}
		if alloc := after.TotalAlloc - before.TotalAlloc; alloc > 8<<20 {
			t.Errorf("quoted %v: %d bytes allocated for a field limited to %d", quoted, alloc, limit)
		}
		if read := 256<<20 - src.n; read > 4<<20 {
			t.Errorf("quoted %v: read %d bytes of the field before refusing it", quoted, read)
		}
	}
}

// readAllReader reads every batch of a CSV read from src and returns the
// rows read.
func readAllReader(src io.Reader, opts Options) (int, error) {
	r, err := NewReader(src, "s.csv", opts)
	if err != nil {
		return 0, err
	}
	defer r.Close()
	return countRows(r)
}

// TestBigIntegersAreText: integers beyond int64 would collapse into one
// float; their column is text, and the texts come back as written.
func TestBigIntegersAreText(t *testing.T) {
	tests := []struct {
		in   string
		kind table.Kind
	}{
		{"id\n18446744073709551615\n18446744073709551614\n", table.String},
		{"id\n-9223372036854775809\n1\n", table.String},
		{"id\n1\n99999999999999999999\n", table.String},
		{"id\n1.5\n99999999999999999999\n", table.String},
		{"id\n9223372036854775807\n-9223372036854775808\n", table.Int64},
		{"id\n1.5\n1e30\n", table.Float64},
		{"id\n1.5\n99999999999999999999.0\n", table.Float64},
	}
	for _, tc := range tests {
		res, err := readBoth(t, []byte(tc.in), Options{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if res.kinds[0] != tc.kind {
			t.Errorf("%q: kind %v, want %v", tc.in, res.kinds[0], tc.kind)
		}
		want := strings.Split(strings.TrimSpace(tc.in), "\n")[1:]
		if len(res.rows) != len(want) || res.rows[0][0] != want[0] || res.rows[1][0] != want[1] {
			t.Errorf("%q: rows %q", tc.in, res.rows)
		}
	}
}

// TestTypesIfPresent: kinds given for the columns a header may have are
// used instead of inference, a name the header lacks is ignored, and Types
// wins over them.
func TestTypesIfPresent(t *testing.T) {
	opts := Options{
		Types:          map[string]table.Kind{"late": table.Int64},
		TypesIfPresent: map[string]table.Kind{"pc": table.String, "late": table.Bool, "gone": table.Float64},
	}
	res, err := readBoth(t, []byte("pc,late,cost\n501,1,2\n502,0,3\n"), opts, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := []table.Kind{table.String, table.Int64, table.Int64}
	if !slices.Equal(res.kinds, want) || res.rows[0][0] != "501" {
		t.Errorf("kinds %v, rows %q; want %v", res.kinds, res.rows, want)
	}
}

// countRows reads r to its end and returns the rows of its batches, or the
// rows read before the first error and that error.
func countRows(r *Reader) (int, error) {
	rows := 0
	for {
		b, err := r.Next()
		if err == io.EOF {
			return rows, nil
		}
		if err != nil {
			return rows, err
		}
		rows += b.Rows
	}
}
