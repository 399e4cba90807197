package ndjson

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math/rand"
	"strconv"
	"strings"
	"testing"

	"manyfold/io/csvio"
	"manyfold/io/table"
)

// null marks a null value in the rows the tests compare.
const null = "\x00null"

// result is what a read gives: the schema and the rows as text.
type result struct {
	fields []table.Field
	rows   [][]string
	lines  []int64
}

// readAll reads data to the end.
func readAll(data string, opts Options) (*result, error) {
	r, err := NewReader(strings.NewReader(data), "t.ndjson", opts)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	res := &result{fields: r.Schema().Fields}
	for {
		b, err := r.Next()
		if err == io.EOF {
			return res, nil
		}
		if err != nil {
			return res, err
		}
		if b.FirstRow != int64(len(res.rows))+1 {
			return nil, fmt.Errorf("batch FirstRow %d after %d rows", b.FirstRow, len(res.rows))
		}
		for i := 0; i < b.Rows; i++ {
			row := make([]string, len(b.Cols))
			for c := range b.Cols {
				if b.Cols[c].IsNull(i) {
					row[c] = null
				} else {
					row[c] = string(b.Cols[c].Bytes(i))
				}
			}
			res.rows = append(res.rows, row)
			res.lines = append(res.lines, b.Lines[i])
		}
	}
}

// TestRoundTrip writes rows of every JSON type (strings with escapes, in
// many scripts, numbers, booleans, nulls and missing keys at every
// position) with encoding/json, one object a line, and reads them back.
func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewSource(1))
	strs := []string{"", "PC-10452", "00501", "12", "tab\there", "quote\"back\\slash", "line\nend\r\n",
		"Zürich-Nord", "東京", "emoji \U0001F69A", "\u2028", "</script>", "true"}
	const n = 300
	keys := []string{"postcode", "parcels", "cost", "late", "empty", "codes"}
	want := make([][]string, n)
	var sb strings.Builder
	for i := 0; i < n; i++ {
		vals := []any{strs[rng.Intn(len(strs))], rng.Int63n(2000) - 1000, float64(rng.Intn(1e6))/64 - 5000.5, rng.Intn(2) == 0, nil,
			strconv.Itoa(rng.Intn(100))}
		texts := []string{vals[0].(string), strconv.FormatInt(vals[1].(int64), 10), "", strconv.FormatBool(vals[3].(bool)), null, vals[5].(string)}
		row := make([]string, len(keys))
		sb.WriteString("{")
		first := true
		for k, key := range keys {
			switch {
			case (i+k)%7 == 0 && k != 4: // missing: null
				row[k] = null
				continue
			case (i+k)%5 == 0 && k != 4: // explicit null
				row[k] = null
				vals[k] = nil
			default:
				row[k] = texts[k]
			}
			kb, _ := json.Marshal(key)
			vb, _ := json.Marshal(vals[k])
			if k == 2 && vals[k] != nil {
				row[k] = string(vb)
			}
			if !first {
				sb.WriteString(", ")
			}
			first = false
			sb.Write(kb)
			sb.WriteString(":")
			sb.Write(vb)
		}
		sb.WriteString("}\n")
		if i%50 == 3 {
			sb.WriteString("  \r\n") // blank lines are skipped
		}
		want[i] = row
	}
	for _, batch := range []int{0, 1, 7} {
		got, err := readAll(sb.String(), Options{BatchRows: batch})
		if err != nil {
			t.Fatal(err)
		}
		// The columns come in the order the keys first appear: row 1
		// lacks postcode.
		order := []int{1, 2, 3, 4, 5, 0}
		wantKinds := []table.Kind{table.String, table.Int64, table.Float64, table.Bool, table.String, table.String}
		if len(got.fields) != len(keys) {
			t.Fatalf("fields %v", got.fields)
		}
		for c, k := range order {
			if f := got.fields[c]; f.Name != keys[k] || f.Kind != wantKinds[k] || !f.Nullable {
				t.Errorf("field %d = %+v, want %s %s", c, f, keys[k], wantKinds[k])
			}
		}
		if len(got.rows) != n {
			t.Fatalf("%d rows, want %d", len(got.rows), n)
		}
		for i := range want {
			for c, k := range order {
				if got.rows[i][c] != want[i][k] {
					t.Fatalf("row %d key %s: %q, want %q", i+1, keys[k], got.rows[i][c], want[i][k])
				}
			}
		}
		// Lines count the blank ones.
		if got.lines[0] != 1 || got.lines[4] != 6 || got.lines[n-1] != int64(n+n/50) {
			t.Errorf("lines %d %d %d, want 1 6 %d", got.lines[0], got.lines[4], got.lines[n-1], n+n/50)
		}
	}
}

// TestKinds: the kinds follow csvio's inference on the JSON numbers and
// booleans; a JSON string is text whatever it holds.
func TestKinds(t *testing.T) {
	data := `{"i":1,"f":1,"s":"1","b":true,"big":1,"mix":1,"n":null,"e":-0}
{"i":-20,"f":2.5,"s":"2","b":false,"big":99999999999999999999,"mix":"x","n":null,"e":1e400}
`
	got, err := readAll(data, Options{})
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]table.Kind{"i": table.Int64, "f": table.Float64, "s": table.String, "b": table.Bool,
		"big": table.String, "mix": table.String, "n": table.String, "e": table.String}
	for _, f := range got.fields {
		if f.Kind != want[f.Name] {
			t.Errorf("%s: %s, want %s", f.Name, f.Kind, want[f.Name])
		}
	}
	if got.rows[1][4] != "99999999999999999999" {
		t.Errorf("big integer read as %q, want as written", got.rows[1][4])
	}
	got, err = readAll(data, Options{Types: map[string]table.Kind{"s": table.Int64}, TypesIfPresent: map[string]table.Kind{"i": table.Float64, "zz": table.Int64}})
	if err != nil {
		t.Fatal(err)
	}
	if got.fields[2].Kind != table.Int64 || got.fields[0].Kind != table.Float64 {
		t.Errorf("overridden kinds %v", got.fields)
	}
	if _, err := readAll(data, Options{Types: map[string]table.Kind{"zz": table.Int64}}); !errors.Is(err, csvio.ErrTypeColumn) {
		t.Errorf("a type for a missing key: %v, want ErrTypeColumn", err)
	}
}

// TestBadInput: each bad line is a *table.DataError naming its line (and
// its key where there is one), after the rows before it.
func TestBadInput(t *testing.T) {
	good := `{"a":1,"b":"x"}` + "\n"
	cases := []struct {
		name, data string
		opts       Options
		is         error
		line       int64
		key        string
		rowsBefore int
		msg        string
	}{
		{"nested object", good + `{"a":2,"b":{"c":1}}`, Options{}, ErrNested, 2, "b", 1, "an object"},
		{"array", good + "\n" + `{"a":[1,2],"b":"y"}`, Options{}, ErrNested, 3, "a", 1, "an array"},
		{"key after the sample", good + good + `{"a":3,"c":"new"}`, Options{SampleRows: 2}, ErrNewKey, 3, "c", 2, "first 2 lines"},
		{"duplicate key", good + `{"a":1,"a":2}`, Options{}, ErrSyntax, 2, "a", 1, "twice"},
		{"not an object", good + `[1,2]`, Options{}, ErrSyntax, 2, "", 1, "does not start with {"},
		{"two objects on a line", good + `{"a":1}{"a":2}`, Options{}, ErrSyntax, 2, "", 1, "text after the object"},
		{"unclosed string", good + `{"a":1,"b":"x}`, Options{}, ErrSyntax, 2, "b", 1, "not closed"},
		{"bare word", good + `{"a":yes}`, Options{}, ErrSyntax, 2, "a", 1, "want a value"},
		{"leading zero", good + `{"a":01}`, Options{}, ErrSyntax, 2, "a", 1, "bad number"},
		{"raw newline escape missing", good + "{\"b\":\"x\ty\"}", Options{}, ErrSyntax, 2, "b", 1, "control byte"},
		{"bad escape", good + `{"b":"\q"}`, Options{}, ErrSyntax, 2, "b", 1, "bad escape"},
		{"line too long", good + `{"a":1,"b":"` + strings.Repeat("x", 100) + `"}`, Options{MaxLineBytes: 50}, ErrLineSize, 2, "", 1, "line too long: longer than max field bytes (50 bytes)"},
		{"kind past the sample", good + good + `{"a":"z"}`, Options{SampleRows: 2}, nil, 3, "a", 2, "not an integer"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got, err := readAll(tc.data, tc.opts)
			var de *table.DataError
			if !errors.As(err, &de) || (tc.is != nil && !errors.Is(err, tc.is)) {
				t.Fatalf("error %v, want a DataError wrapping %v", err, tc.is)
			}
			if de.Line != tc.line || de.Column != tc.key || de.File != "t.ndjson" {
				t.Errorf("error at %s line %d key %q, want line %d key %q: %v", de.File, de.Line, de.Column, tc.line, tc.key, err)
			}
			if !strings.Contains(err.Error(), tc.msg) || strings.Contains(err.Error(), "\n") {
				t.Errorf("message %q, want one line holding %q", err, tc.msg)
			}
			if got == nil || len(got.rows) != tc.rowsBefore {
				t.Errorf("rows before the error: %v, want %d", got, tc.rowsBefore)
			}
		})
	}
	for _, data := range []string{"", "\n  \n", "\xef\xbb\xbf\n"} {
		if _, err := readAll(data, Options{}); !errors.Is(err, table.ErrEmpty) {
			t.Errorf("%q: %v, want ErrEmpty", data, err)
		}
	}
	var ke *csvio.KindError
	if _, err := readAll(good+good+`{"a":"z"}`, Options{SampleRows: 2}); !errors.As(err, &ke) || ke.Want != table.Int64 {
		t.Errorf("kind error %v, want a csvio.KindError for int", err)
	}
}

// TestLineLimitBoundsMemory: a line far longer than the limit is refused
// without being held: the reader's line buffer stays near the limit.
func TestLineLimitBoundsMemory(t *testing.T) {
	long := `{"a":"` + strings.Repeat("x", 8<<20) + `"}`
	r, err := NewReader(strings.NewReader(`{"a":"y"}`+"\n"+long), "t.ndjson", Options{MaxLineBytes: 1000, SampleRows: 1})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := r.Next(); err != nil {
		t.Fatal(err)
	}
	if _, err := r.Next(); !errors.Is(err, ErrLineSize) {
		t.Fatalf("%v, want ErrLineSize", err)
	}
	if c := cap(r.buf); c > 1000+128<<10 {
		t.Errorf("line buffer grew to %d bytes for a limit of 1000", c)
	}
}

// TestSelect: the selected columns only, in the order asked; a key of an
// unselected column is still checked against the sample's.
func TestSelect(t *testing.T) {
	data := "{\"a\":1,\"b\":\"x\",\"c\":true}\n{\"c\":false,\"a\":2}\n"
	r, err := NewReader(strings.NewReader(data), "t", Options{})
	if err != nil {
		t.Fatal(err)
	}
	if err := r.Select([]int{2, 0}); err != nil {
		t.Fatal(err)
	}
	b, err := r.Next()
	if err != nil {
		t.Fatal(err)
	}
	if s := r.Schema(); len(s.Fields) != 2 || s.Fields[0].Name != "c" || s.Fields[1].Name != "a" {
		t.Fatalf("schema %v", s.Fields)
	}
	if got := string(b.Cols[0].Bytes(1)) + string(b.Cols[1].Bytes(1)); got != "false2" {
		t.Errorf("row 2: %q", got)
	}
	if err := r.Select([]int{0}); err == nil {
		t.Error("Select after Next accepted")
	}
}

// TestUnicodeEscapes: \u escapes, surrogate pairs, and a lone surrogate
// read as U+FFFD, as encoding/json reads them.
func TestUnicodeEscapes(t *testing.T) {
	for _, s := range []string{`"\u00fc\u6771"`, `"\ud83d\ude9a"`, `"\ud83d x"`, `"\ude9a"`, `"a\/b\b\f\n\r\t"`} {
		got, err := readAll(`{"a":`+s+`}`, Options{})
		if err != nil {
			t.Fatal(err)
		}
		var want string
		if err := json.Unmarshal([]byte(s), &want); err != nil {
			t.Fatal(err)
		}
		if got.rows[0][0] != want {
			t.Errorf("%s: %q, want %q", s, got.rows[0][0], want)
		}
	}
}

// TestWideSparseBatchBounded: many keys in the first line, then empty
// objects: each batch holds at most maxBatchCells cells, however few bytes
// its lines have.
func TestWideSparseBatchBounded(t *testing.T) {
	const keys = 2000
	old := maxBatchCells
	maxBatchCells = 1 << 12
	defer func() { maxBatchCells = old }()
	var sb strings.Builder
	sb.WriteString("{")
	for i := 0; i < keys; i++ {
		if i > 0 {
			sb.WriteString(",")
		}
		fmt.Fprintf(&sb, `"k%d":1`, i)
	}
	sb.WriteString("}\n")
	sb.WriteString(strings.Repeat("{}\n", 200))
	r, err := NewReader(strings.NewReader(sb.String()), "t", Options{})
	if err != nil {
		t.Fatal(err)
	}
	total := 0
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if b.Rows*keys > maxBatchCells {
			t.Fatalf("a batch of %d rows by %d columns", b.Rows, keys)
		}
		total += b.Rows
	}
	if total != 201 {
		t.Errorf("%d rows, want 201", total)
	}
}
