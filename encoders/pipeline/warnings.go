package pipeline

import (
	"fmt"

	"manyfold/encoders/method"
	"manyfold/io/table"
)

// numericLevels is the number of distinct values past which a numeric
// column looks like a measurement rather than a category (the rule scan
// suggests "numeric" by).
const numericLevels = 1000

// Warnings returns what a user would want to be told about the fit, one
// line each: each encoding's own (method.Warner: a hash with far too few
// buckets for the levels, a target mean on a column of nearly all
// singletons), and a numeric column with more than numericLevels distinct
// values encoded as categories.
func (m *Model) Warnings() []string {
	var out []string
	for i, c := range m.Cols {
		if (c.Kind == table.Int64 || c.Kind == table.Float64) && m.Levels(i) > numericLevels {
			out = append(out, fmt.Sprintf("column %q is %s with %d distinct values, encoded as categories: a measurement is better used as a number", c.Name, c.Kind, m.Levels(i)))
		}
		for _, f := range c.Fits {
			if w, ok := f.(method.Warner); ok {
				for _, s := range w.Warnings() {
					out = append(out, fmt.Sprintf("column %q: %s", c.Name, s))
				}
			}
		}
	}
	return out
}
