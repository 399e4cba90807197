package csvio

import (
	"errors"
	"strings"
	"testing"

	"manyfold/io/table"
)

// TestDelimiterGuess: a header read as one column that holds ;, tab, | or
// , gives the guess, and a row with another field count says "did you mean
// delimiter ...?" in a one-line error naming the file and line.
func TestDelimiterGuess(t *testing.T) {
	cases := []struct {
		data  string
		opts  Options
		guess byte
		hint  string // in the error of the read, "" when it reads fine
	}{
		{"a;b;c\n1;2;3\n4,5;6;7\n", Options{}, ';', "did you mean delimiter ';'?"},
		{"a;b\n1;2\n3;4\n", Options{}, ';', ""},
		{"a\tb|c\n1\t2\n", Options{}, '\t', ""},
		{"a|b|c\n1|2|3\n", Options{}, '|', ""},
		{"a,b,c\n1,2,3\n", Options{Delimiter: ';'}, ',', ""},
		{"a|b\n1|2\n3|4,\"x\"\n", Options{}, '|', "did you mean delimiter '|'?"},
		{"a\tb\n1\t2\n5,6\t7\n", Options{}, '\t', "did you mean delimiter tab?"},
		{"name\nx\n", Options{}, 0, ""},
		{"a;b\n1;2\n", Options{NoHeader: true}, 0, ""},
		{"a;b,c\n1;2,3\n4\n", Options{}, 0, "1 fields, header has 2\n"}, // two columns: no guess
	}
	for _, tc := range cases {
		r, err := NewReader(strings.NewReader(tc.data), "orders.csv", tc.opts)
		if err != nil {
			t.Fatalf("%q: %v", tc.data, err)
		}
		if g := r.DelimiterGuess(); g != tc.guess {
			t.Errorf("%q: guess %q, want %q", tc.data, g, tc.guess)
		}
		_, err = readAllRows(r)
		switch {
		case tc.hint == "" && err != nil:
			t.Errorf("%q: %v", tc.data, err)
		case strings.HasSuffix(tc.hint, "\n"):
			if err == nil || strings.Contains(err.Error(), "did you mean") {
				t.Errorf("%q: %v, want an error with no guess", tc.data, err)
			}
		case tc.hint != "":
			var de *table.DataError
			if !errors.As(err, &de) || !strings.HasPrefix(err.Error(), "orders.csv:3: ") ||
				!strings.HasSuffix(err.Error(), tc.hint+")") || strings.Contains(err.Error(), "\n") {
				t.Errorf("%q: %v, want one line at orders.csv:3 ending %q", tc.data, err, tc.hint)
			}
		}
	}
}

// readAllRows reads r to the end and returns its rows.
func readAllRows(r table.Reader) (int, error) {
	n := 0
	err := table.ForEach(r, func(b *table.Batch) error { n += b.Rows; return nil })
	return n, err
}
