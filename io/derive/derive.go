// Package derive computes columns that a table does not hold but a command
// may name wherever it names a column: a cross of columns, origin*destination
// (one categorical whose level is the tuple of the parts' values), and a
// condition on a column, delay>15 (a binary target: 1 where it holds, 0
// where not, null where the column is null). Wrap adds them to a reader's
// schema and computes them batch by batch from the parts it reads.
package derive

import (
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"manyfold/io/table"
)

// column is one derived column: a cross of parts, or a condition on one.
type column struct {
	name  string
	parts []int // positions of the parts in the base schema
	// A condition: the operator and the value it compares with, a number
	// when num, else text (= and != only).
	op   string
	num  bool
	val  float64
	text string
}

// ops are the conditions' operators, the two-character ones first so that
// ">=" is not read as ">" followed by "=".
var ops = []string{">=", "<=", "!=", ">", "<", "="}

// Reader is a table.Reader with derived columns after the base's.
type Reader struct {
	base    table.Reader
	schema  *table.Schema // the base's columns, then the derived ones
	nbase   int
	derived []column
	sel     []int // the positions selected (nil: all)
	baseSel []int // the base positions read, after Select
	at      []int // per base position, its place in the base's batches, or -1
	out     table.Batch
	buf     [][]byte
}

// Wrap returns r with a derived column added for every name of names that
// r's schema does not hold and that is a cross (parts joined by '*', each a
// column of r) or a condition (COL OP VALUE, OP one of >= <= != > < =,
// VALUE a number or, for = and !=, a text). Other names are left for the
// caller to report. Without any derived column Wrap returns r itself.
func Wrap(r table.Reader, names []string) (table.Reader, error) {
	base := r.Schema()
	w := &Reader{base: r, nbase: len(base.Fields), schema: &table.Schema{Fields: slices.Clone(base.Fields)}}
	for _, name := range names {
		if name == "" || base.Index(name) >= 0 || w.schema.Index(name) >= 0 {
			continue
		}
		c, kind, ok, err := parse(name, base)
		if err != nil {
			return nil, err
		}
		if !ok {
			continue
		}
		w.derived = append(w.derived, c)
		w.schema.Fields = append(w.schema.Fields, table.Field{Name: name, Kind: kind, Nullable: true, Derived: true})
	}
	if len(w.derived) == 0 {
		return r, nil
	}
	return w, nil
}

// IsCross reports whether name is written as a cross of columns.
func IsCross(name string) bool { return strings.Contains(name, "*") }

// parse reads a derived column's name against the base schema.
func parse(name string, base *table.Schema) (column, table.Kind, bool, error) {
	if IsCross(name) {
		c := column{name: name}
		for _, p := range strings.Split(name, "*") {
			i := base.Index(strings.TrimSpace(p))
			if i < 0 {
				return column{}, 0, false, fmt.Errorf("cross %q: %q is not a column of the table", name, p)
			}
			c.parts = append(c.parts, i)
		}
		if len(c.parts) < 2 {
			return column{}, 0, false, fmt.Errorf("cross %q: want two columns or more", name)
		}
		return c, table.String, true, nil
	}
	col, op, val, ok := SplitCondition(name)
	i := base.Index(col)
	if !ok || i < 0 {
		return column{}, 0, false, nil
	}
	c := column{name: name, parts: []int{i}, op: op, text: val}
	if v, err := strconv.ParseFloat(val, 64); err == nil && !math.IsNaN(v) {
		c.num, c.val = true, v
	} else if op != "=" && op != "!=" {
		return column{}, 0, false, fmt.Errorf("condition %q: %q is not a number; a text compares with = or != only", name, val)
	}
	return c, table.Int64, true, nil
}

// SplitCondition splits a condition, COL OP VALUE (delay>15), into its
// column, operator and value, spaces around each trimmed, at the first
// operator of >= <= != > < = that name holds; ok is false when it holds
// none or a side is empty. Whether COL is a column is the caller's
// question.
func SplitCondition(name string) (col, op, value string, ok bool) {
	for _, op := range ops {
		col, val, found := strings.Cut(name, op)
		if !found {
			continue
		}
		col, val = strings.TrimSpace(col), strings.TrimSpace(val)
		return col, op, val, col != "" && val != ""
	}
	return "", "", "", false
}

// Base returns the reader under r's derived columns, or r.
func Base(r table.Reader) table.Reader {
	if w, ok := r.(*Reader); ok {
		return w.base
	}
	return r
}

// Schema returns the base's columns, then the derived ones (or those
// selected).
func (w *Reader) Schema() *table.Schema {
	if w.sel == nil {
		return w.schema
	}
	s := &table.Schema{}
	for _, i := range w.sel {
		s.Fields = append(s.Fields, w.schema.Fields[i])
	}
	return s
}

// Select restricts the columns to cols (positions of the full schema):
// the base reads the base columns among them and the parts of the derived
// ones.
func (w *Reader) Select(cols []int) error {
	need := map[int]bool{}
	for _, c := range cols {
		if c < 0 || c >= len(w.schema.Fields) {
			return fmt.Errorf("derive: column %d out of range", c)
		}
		if c < w.nbase {
			need[c] = true
		} else {
			for _, p := range w.derived[c-w.nbase].parts {
				need[p] = true
			}
		}
	}
	w.baseSel = w.baseSel[:0]
	for i := 0; i < w.nbase; i++ {
		if need[i] {
			w.baseSel = append(w.baseSel, i)
		}
	}
	w.sel = slices.Clone(cols)
	return w.base.Select(w.baseSel)
}

// Next returns the next batch with its derived columns computed.
func (w *Reader) Next() (*table.Batch, error) {
	b, err := w.base.Next()
	if err != nil {
		return nil, err
	}
	if w.at == nil {
		w.at = make([]int, w.nbase)
		for i := range w.at {
			w.at[i] = i
		}
		if w.sel != nil {
			for i := range w.at {
				w.at[i] = -1
			}
			for k, i := range w.baseSel {
				w.at[i] = k
			}
		}
	}
	sel := w.sel
	if sel == nil {
		sel = make([]int, len(w.schema.Fields))
		for i := range sel {
			sel[i] = i
		}
	}
	out := &w.out
	out.Rows, out.FirstRow, out.Lines = b.Rows, b.FirstRow, b.Lines
	if cap(out.Cols) < len(sel) {
		out.Cols = make([]table.Column, len(sel))
	}
	out.Cols = out.Cols[:len(sel)]
	for k, i := range sel {
		if i < w.nbase {
			out.Cols[k] = b.Cols[w.at[i]]
			continue
		}
		if err := w.compute(&w.derived[i-w.nbase], b, &out.Cols[k]); err != nil {
			return nil, err
		}
	}
	return out, nil
}

// compute fills dst with derived column c of batch b.
func (w *Reader) compute(c *column, b *table.Batch, dst *table.Column) error {
	if c.op != "" {
		return w.condition(c, b, dst)
	}
	dst.Form, dst.Data, dst.Offsets, dst.Nulls = table.FormText, dst.Data[:0], append(dst.Offsets[:0], 0), nil
	var scratch []byte
	for r := 0; r < b.Rows; r++ {
		nulls := 0
		for _, p := range c.parts {
			if b.Cols[w.at[p]].IsNull(r) {
				nulls++
			}
		}
		if nulls == len(c.parts) {
			if dst.Nulls == nil {
				dst.Nulls = make([]bool, b.Rows)
			}
			dst.Nulls[r] = true
			dst.Offsets = append(dst.Offsets, int32(len(dst.Data)))
			continue
		}
		dst.Data = append(dst.Data, '[')
		for j, p := range c.parts {
			if j > 0 {
				dst.Data = append(dst.Data, ',')
			}
			col := &b.Cols[w.at[p]]
			if col.IsNull(r) {
				dst.Data = append(dst.Data, "null"...)
				continue
			}
			scratch = col.AppendText(scratch[:0], r)
			dst.Data = strconv.AppendQuote(dst.Data, string(scratch))
		}
		dst.Data = append(dst.Data, ']')
		if len(dst.Data) > math.MaxInt32 {
			return &table.DataError{Row: b.FirstRow + int64(r), Column: c.name, Err: errors.New("the batch's crossed values pass 2 GiB")}
		}
		dst.Offsets = append(dst.Offsets, int32(len(dst.Data)))
	}
	return nil
}

// condition fills dst with 1 where c holds, 0 where not, null where its
// column is null.
func (w *Reader) condition(c *column, b *table.Batch, dst *table.Column) error {
	col := &b.Cols[w.at[c.parts[0]]]
	vals := dst.ResetInts(b.Rows)
	var scratch []byte
	for r := 0; r < b.Rows; r++ {
		if col.IsNull(r) {
			if dst.Nulls == nil {
				dst.Nulls = make([]bool, b.Rows)
			}
			dst.Nulls[r] = true
			vals[r] = 0
			continue
		}
		var holds bool
		if c.num {
			v, _, err := col.Float(r)
			if err != nil {
				e := &table.DataError{Row: b.FirstRow + int64(r), Column: w.schema.Fields[c.parts[0]].Name, Err: fmt.Errorf("%s: not a number: %w", c.name, err)}
				if b.Lines != nil {
					e.Line = b.Lines[r]
				}
				return e
			}
			holds = compare(v, c.op, c.val)
		} else {
			scratch = col.AppendText(scratch[:0], r)
			holds = (string(scratch) == c.text) == (c.op == "=")
		}
		vals[r] = 0
		if holds {
			vals[r] = 1
		}
	}
	return nil
}

// compare reports whether v op x holds.
func compare(v float64, op string, x float64) bool {
	switch op {
	case ">":
		return v > x
	case ">=":
		return v >= x
	case "<":
		return v < x
	case "<=":
		return v <= x
	case "=":
		return v == x
	}
	return v != x
}

// Close closes the base.
func (w *Reader) Close() error { return w.base.Close() }

// Expand returns the columns that patterns name in schema, in the
// patterns' order: a name as it is, a glob (filepath.Match: dest_*) every
// matching column in schema order not named already, and !PATTERN removes the
// columns it matches from those named before it. never lists columns a
// pattern never selects (the target, the fold column); a condition among
// them (delay>15) keeps its column out too, as encoding it would leak the
// label. A plain name is kept as given, for the caller to report if the
// table lacks it.
func Expand(patterns []string, schema *table.Schema, never ...string) ([]string, error) {
	never = withSources(never)
	var out []string
	for _, p := range patterns {
		if neg, ok := strings.CutPrefix(p, "!"); ok {
			if _, err := filepath.Match(neg, ""); err != nil {
				return nil, fmt.Errorf("pattern %q: %v", p, err)
			}
			out = slices.DeleteFunc(out, func(n string) bool { ok, _ := filepath.Match(neg, n); return ok })
			continue
		}
		if glob := strings.ContainsAny(p, "?[") || (strings.Contains(p, "*") && isGlob(p, schema)); !glob {
			out = append(out, p) // named twice stays twice, for the caller to report
			continue
		}
		matched := false
		for _, f := range schema.Fields {
			if f.Derived || slices.Contains(never, f.Name) {
				continue
			}
			if ok, err := filepath.Match(p, f.Name); err != nil {
				return nil, fmt.Errorf("pattern %q: %v", p, err)
			} else if ok {
				matched = true
				if !slices.Contains(out, f.Name) {
					out = append(out, f.Name)
				}
			}
		}
		if !matched {
			return nil, fmt.Errorf("pattern %q matches no column", p)
		}
	}
	return out, nil
}

// withSources returns names with the column of each condition among them
// added (delay for delay>15).
func withSources(names []string) []string {
	out := slices.Clip(names)
	for _, n := range names {
		out = append(out, Sources(n)...)
	}
	return out
}

// Sources returns the columns the derived target name is computed from:
// the column of a condition (delay for delay>15), none for a plain name.
func Sources(name string) []string {
	if col, _, _, ok := SplitCondition(name); ok {
		return []string{col}
	}
	return nil
}

// isGlob tells a glob with '*' (dest_*) from a cross (a*b): a name whose
// '*'-separated parts are all columns is a cross.
func isGlob(p string, schema *table.Schema) bool {
	for _, part := range strings.Split(p, "*") {
		if schema.Index(strings.TrimSpace(part)) < 0 {
			return true
		}
	}
	return false
}

var _ table.Reader = (*Reader)(nil)
