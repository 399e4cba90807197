package ndjson

import (
	"bytes"
	"encoding/json"
	"errors"
	"testing"
	"unicode/utf8"

	"manyfold/io/table"
)

// FuzzReader holds the reader against the standard library's
// encoding/json on the same input. A read that fails must fail with a
// *table.DataError naming a line (or ErrEmpty, or a type error from the
// options). A read that succeeds must give, for every non-blank line, what
// encoding/json decodes from it: an object (its values compared when the
// line is valid UTF-8, which encoding/json would otherwise repair) whose
// values are strings, numbers as written, booleans or nulls, each key once, and every
// other key of the table null. The small sample (2 lines) makes the later
// lines meet the key and kind checks; a line limit of a few bytes is tried
// too.
func FuzzReader(f *testing.F) {
	seeds := []string{
		`{"a":1,"b":"x"}` + "\n" + `{"b":"y","a":-2.5e3}`,
		`{"a":true}` + "\r\n\r\n" + `{"a":false}` + "\n" + `{"a":null}`,
		`{"s":"\u00fc\ud83d\ude9a\n\"\\\/"}`,
		`{"a":{"b":1}}`,
		`{"a":[1]}`,
		`{"a":1}{"a":2}`,
		`{"a":1,"a":2}`,
		`{"a":1}` + "\n" + `{"a":1}` + "\n" + `{"c":1}`,
		`{"a":1}` + "\n" + `{"a":2}` + "\n" + `{"a":"x"}`,
		`{"a":01}`,
		`{"a":1e999}`,
		`{"a":99999999999999999999}`,
		"\xef\xbb\xbf{\"a\":\"\xff\"}",
		`{"a":"\ud800"}`,
		`{}`,
		`[1,2]`,
		`{"a":"unclosed}`,
		"  \n\t\n",
		`{"a": 1 , "b" : "x" }   `,
	}
	for i, s := range seeds {
		f.Add([]byte(s), uint8(i))
	}
	f.Fuzz(func(t *testing.T, data []byte, mode uint8) {
		opts := Options{SampleRows: 2, BatchRows: int(mode%5) + 1}
		if mode&8 != 0 {
			opts.MaxLineBytes = int(mode>>4) + 1
		}
		got, err := readAll(string(data), opts)
		if err != nil {
			var de *table.DataError
			if !errors.As(err, &de) {
				t.Fatalf("error %v is not a DataError", err)
			}
			if de.Line == 0 && !errors.Is(err, table.ErrEmpty) {
				t.Fatalf("error names no line: %v", err)
			}
			if errors.Is(err, ErrLineSize) && (opts.MaxLineBytes == 0 || !longLine(data, opts.MaxLineBytes)) {
				t.Fatalf("line limit %d refused, but no line is longer: %v", opts.MaxLineBytes, err)
			}
			return
		}
		if opts.MaxLineBytes > 0 && longLine(data, opts.MaxLineBytes) {
			t.Fatalf("a line longer than %d bytes accepted", opts.MaxLineBytes)
		}
		row := 0
		for i, ln := range bytes.Split(bytes.TrimPrefix(data, []byte("\xef\xbb\xbf")), []byte("\n")) {
			if len(bytes.Trim(ln, " \t\r\n")) == 0 {
				continue
			}
			if got.lines[row] != int64(i+1) {
				t.Fatalf("row %d from line %d, want %d", row+1, got.lines[row], i+1)
			}
			dec := json.NewDecoder(bytes.NewReader(ln))
			dec.UseNumber()
			var obj map[string]any
			if err := dec.Decode(&obj); err != nil || obj == nil {
				t.Fatalf("line %d accepted, but encoding/json: %v, %v", i+1, obj, err)
			}
			for c, fl := range got.fields {
				if !utf8.Valid(ln) {
					break // encoding/json repairs keys and strings
				}
				v, ok := obj[fl.Name]
				g := got.rows[row][c]
				switch v := v.(type) {
				case nil:
					if g != null {
						t.Fatalf("line %d key %q: %q, encoding/json null (present %v)", i+1, fl.Name, g, ok)
					}
				case string:
					if g != v {
						t.Fatalf("line %d key %q: %q, encoding/json %q", i+1, fl.Name, g, v)
					}
				case json.Number:
					if g != string(v) {
						t.Fatalf("line %d key %q: %q, encoding/json %q", i+1, fl.Name, g, v)
					}
				case bool:
					if (g == "true") != v || (g != "true" && g != "false") {
						t.Fatalf("line %d key %q: %q, encoding/json %v", i+1, fl.Name, g, v)
					}
				default:
					t.Fatalf("line %d key %q: nested value %v accepted", i+1, fl.Name, v)
				}
			}
			if len(obj) > len(got.fields) {
				t.Fatalf("line %d: %d keys, the table %d", i+1, len(obj), len(got.fields))
			}
			row++
		}
		if row != len(got.rows) {
			t.Fatalf("%d rows, %d non-blank lines", len(got.rows), row)
		}
	})
}

// longLine reports whether a line of data, without its line end, is longer
// than limit bytes.
func longLine(data []byte, limit int) bool {
	for _, ln := range bytes.Split(data, []byte("\n")) {
		if len(bytes.TrimSuffix(ln, []byte("\r"))) > limit {
			return true
		}
	}
	return false
}
