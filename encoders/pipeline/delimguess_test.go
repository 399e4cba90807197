package pipeline_test

import (
	"errors"
	"strings"
	"testing"

	"manyfold/encoders/pipeline"
	"manyfold/internal/param"
	"manyfold/io/csvio"
)

// TestColumnErrorGuessesDelimiter: a ;-separated file read with commas is
// one column; the column the job names is missing, and the message says
// which delimiter was probably meant, on one line, naming the file.
func TestColumnErrorGuessesDelimiter(t *testing.T) {
	for _, tc := range []struct{ data, want string }{
		{"route;late\nR1;1\nR2;0\n", ` (its header is one column: did you mean --delimiter ';'?)`},
		{"route\tlate\nR1\t1\n", ` (its header is one column: did you mean --delimiter tab?)`},
		{"route\nR1\n", ""},
	} {
		r, err := csvio.NewReader(strings.NewReader(tc.data), "t.csv", csvio.Options{})
		if err != nil {
			t.Fatal(err)
		}
		sp := pipeline.DefaultSpec()
		sp.Columns = []string{"route"}
		sp.Target = "late"
		_, err = pipeline.Fit(r, sp, pipeline.FitOptions{File: "t.csv"})
		r.Close()
		var ce *pipeline.ColumnError
		if !errors.As(err, &ce) {
			t.Fatalf("%q: %v, want a ColumnError", tc.data, err)
		}
		msg := ce.Spell(func(n param.Name) string { return "--" + string(n) })
		if !strings.HasPrefix(msg, "t.csv: ") || strings.Contains(msg, "\n") ||
			(tc.want != "" && !strings.HasSuffix(msg, tc.want)) || (tc.want == "" && strings.Contains(msg, "did you mean")) {
			t.Errorf("%q: %q, want one line ending %q", tc.data, msg, tc.want)
		}
	}
}
