package csvio

import (
	"strings"
	"testing"
)

// TestOneColumnHook: Options.OneColumn is called once, with the input's
// name, the header and the guess, for a header read as one column that
// holds another delimiter, and never for a header without one, several
// columns or no header.
func TestOneColumnHook(t *testing.T) {
	for _, tc := range []struct {
		data   string
		opts   Options
		header string
		guess  byte
	}{
		{"a;b;c\n1;2;3\n", Options{}, "a;b;c", ';'},
		{"a\tb\n1\t2\n", Options{}, "a\tb", '\t'},
		{"a|b\n1|2\n", Options{}, "a|b", '|'},
		{"a,b\n1,2\n", Options{Delimiter: ';'}, "a,b", ','},
		{"name\nx\n", Options{}, "", 0},
		{"a,b\n1,2\n", Options{}, "", 0},
		{"a;b\n1;2\n", Options{NoHeader: true}, "", 0},
	} {
		var calls []string
		tc.opts.OneColumn = func(file, header string, guess byte) {
			calls = append(calls, file+"|"+header+"|"+string(guess))
		}
		r, err := NewReader(strings.NewReader(tc.data), "orders.csv", tc.opts)
		if err != nil {
			t.Fatalf("%q: %v", tc.data, err)
		}
		if _, err := readAllRows(r); err != nil {
			t.Fatalf("%q: %v", tc.data, err)
		}
		var want []string
		if tc.guess != 0 {
			want = []string{"orders.csv|" + tc.header + "|" + string(tc.guess)}
		}
		if strings.Join(calls, ",") != strings.Join(want, ",") {
			t.Errorf("%q: calls %q, want %q", tc.data, calls, want)
		}
	}
}
