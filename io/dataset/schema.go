package dataset

import (
	"fmt"

	"manyfold/io/table"
)

// Part is what Columns takes of one file of a dataset: its path (for
// messages), its columns as its reader found them, and whether it holds
// no rows.
type Part struct {
	Path   string
	Fields []table.Field
	Empty  bool
}

// Columns returns the columns of a dataset of the given parts, by the rule
// New applies: the first part's names, in order, in every part; a column
// of integers in one part and of floats in another is a float column (CSV
// infers each file's kinds from its own values); a part without rows (its
// kinds inferred from nothing) takes the others' kinds; a column is
// nullable where any part's is. A part whose columns differ otherwise is
// an error naming it and the column, wrapping ErrParts.
func Columns(parts []Part) ([]table.Field, error) {
	if len(parts) == 0 {
		return nil, ErrNoFiles
	}
	first := parts[0].Path
	fields := append([]table.Field(nil), parts[0].Fields...)
	kindFrom := make([]int, len(fields)) // the part whose kind a column has
	for i, p := range parts {
		for j, f := range p.Fields {
			if j >= len(fields) {
				return nil, &table.DataError{File: p.Path, Column: f.Name, Err: fmt.Errorf("a column %s does not have (%w)", first, ErrParts)}
			}
			w := &fields[j]
			if f.Name != w.Name {
				return nil, &table.DataError{File: p.Path, Column: f.Name, Err: fmt.Errorf("column %d is %q in %s (%w)", j+1, w.Name, first, ErrParts)}
			}
			w.Nullable = w.Nullable || f.Nullable
			switch k := f.Kind; {
			case k == w.Kind || p.Empty || widens(k, w.Kind):
			case parts[kindFrom[j]].Empty || widens(w.Kind, k):
				w.Kind, kindFrom[j] = k, i
			default:
				return nil, &table.DataError{File: p.Path, Column: f.Name, Err: fmt.Errorf("%s here, %s in %s (%w)", k, w.Kind, parts[kindFrom[j]].Path, ErrParts)}
			}
		}
		if len(p.Fields) < len(fields) {
			return nil, &table.DataError{File: p.Path, Column: fields[len(p.Fields)].Name, Err: fmt.Errorf("missing here, present in %s (%w)", first, ErrParts)}
		}
	}
	// A kind set by a later part is checked against the earlier ones.
	for _, p := range parts {
		for j, f := range p.Fields {
			if w := fields[j]; f.Kind != w.Kind && !p.Empty && !widens(f.Kind, w.Kind) {
				return nil, &table.DataError{File: p.Path, Column: f.Name, Err: fmt.Errorf("%s here, %s in %s (%w)", f.Kind, w.Kind, parts[kindFrom[j]].Path, ErrParts)}
			}
		}
	}
	return fields, nil
}

// widens reports whether a column of kind from in one file and of kind to
// in another is a column of kind to: integers among floats.
func widens(from, to table.Kind) bool { return from == table.Int64 && to == table.Float64 }

// widener reads columns of integers as floats where the dataset's kind is
// float, into buffers of its own, one per column position, reused from
// batch to batch.
type widener struct{ floats [][]float64 }

// conform turns col, at position j, into floats when it holds integers
// and kind is Float64.
func (w *widener) conform(col *table.Column, j int, kind table.Kind) {
	if col.Form != table.FormInt64 || kind != table.Float64 {
		return
	}
	for len(w.floats) <= j {
		w.floats = append(w.floats, nil)
	}
	f := w.floats[j][:0]
	for _, v := range col.Ints {
		f = append(f, float64(v))
	}
	w.floats[j] = f
	col.Form, col.Floats, col.Ints = table.FormFloat64, f, nil
}

// Conform returns a reader of one part of a dataset, r, whose columns are
// fields (those Columns returned; r's own, by name and count): a column
// of integers in r that fields say is of floats is read as floats, and
// Schema gives fields' kinds and nullability. It is how a part read on its
// own (a shard of a distributed run) reads as it does within the dataset.
func Conform(r table.Reader, fields []table.Field) (table.Reader, error) {
	have := r.Schema().Fields
	if len(have) != len(fields) {
		return nil, fmt.Errorf("dataset: a part of %d columns conformed to %d", len(have), len(fields))
	}
	for j := range have {
		if have[j].Name != fields[j].Name {
			return nil, fmt.Errorf("dataset: column %d is %q, conformed to %q", j+1, have[j].Name, fields[j].Name)
		}
	}
	return &conformed{Reader: r, all: table.Schema{Fields: append([]table.Field(nil), fields...)}}, nil
}

type conformed struct {
	table.Reader
	all  table.Schema
	sel  []int
	out  table.Batch
	wide widener
}

func (c *conformed) Schema() *table.Schema { return selected(&c.all, c.sel) }

// selected returns the columns of all at the positions sel (all for a nil
// sel).
func selected(all *table.Schema, sel []int) *table.Schema {
	if sel == nil {
		return all
	}
	s := &table.Schema{}
	for _, i := range sel {
		s.Fields = append(s.Fields, all.Fields[i])
	}
	return s
}

func (c *conformed) Select(cols []int) error {
	if err := c.Reader.Select(cols); err != nil {
		return err
	}
	c.sel = append([]int{}, cols...)
	return nil
}

func (c *conformed) Next() (*table.Batch, error) {
	b, err := c.Reader.Next()
	if err != nil {
		return nil, err
	}
	out := &c.out
	cols := out.Cols[:0] // the conformed reader's own, not b's
	*out = *b
	out.Cols = append(cols, b.Cols...)
	for j := range out.Cols {
		pos := j
		if c.sel != nil {
			pos = c.sel[j]
		}
		c.wide.conform(&out.Cols[j], j, c.all.Fields[pos].Kind)
	}
	return out, nil
}

// Unwrap returns the part's own reader, for inspection only.
func (c *conformed) Unwrap() table.Reader { return c.Reader }
