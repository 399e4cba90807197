package pqio

import (
	"fmt"
	"strconv"

	"github.com/parquet-go/parquet-go/deprecated"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// Nested describes a nested top-level column of a Parquet file: a list, a
// map or a struct (a group), which manyfold cannot read as a table column.
// Such a column is never decoded, but a writer given a Source copies it
// whole (see WriterOptions.Nested).
type Nested struct {
	// Name is the column's top-level name.
	Name string
	// Kind is "list", "map" or "struct".
	Kind string
	// Before is the position of the flat column it precedes: in
	// Reader.Nested, among the reader's full schema; in
	// WriterOptions.Nested, among the writer's schema. len(fields) places
	// it after the last.
	Before int
}

// topColumn is one top-level column of a Parquet schema, flat or nested,
// with its schema elements and its leaf columns.
type topColumn struct {
	name   string
	kind   string                 // "" for a flat column, else "list", "map" or "struct"
	elems  []format.SchemaElement // its subtree, in schema order
	first  int                    // index of its first leaf column in the file
	paths  [][]string             // the path in the schema of each leaf column
	maxRep int                    // repetition levels of its deepest leaf
}

// maxSchemaDepth bounds the nesting of a schema, so that a hostile footer
// cannot recurse without end.
const maxSchemaDepth = 256

// topColumns splits a file's flattened schema (the root first) into its
// top-level columns. It fails on a schema whose child counts do not add up.
func topColumns(sch []format.SchemaElement) ([]topColumn, error) {
	if len(sch) == 0 {
		return nil, fmt.Errorf("%w: no schema", table.ErrCorrupt)
	}
	n, _ := sch[0].NumChildren.Get()
	if n < 0 || int(n) >= len(sch) {
		return nil, fmt.Errorf("%w: the schema's root has %d children in %d elements", table.ErrCorrupt, n, len(sch))
	}
	var cols []topColumn
	pos, leaves := 1, 0
	for k := 0; k < int(n); k++ {
		if pos >= len(sch) { // the children before took every element
			return nil, fmt.Errorf("%w: the schema's root has %d children, but its elements end after %d", table.ErrCorrupt, n, k)
		}
		t := topColumn{name: sch[pos].Name, first: leaves}
		end, err := t.walk(sch, pos, nil, 0, 0)
		if err != nil {
			return nil, err
		}
		t.elems = sch[pos:end]
		t.kind = nestedKind(&sch[pos])
		leaves += len(t.paths)
		cols = append(cols, t)
		pos = end
	}
	if pos != len(sch) {
		return nil, fmt.Errorf("%w: %d schema elements after the root's last child", table.ErrCorrupt, len(sch)-pos)
	}
	return cols, nil
}

// walk records the leaves of the subtree at sch[pos] (reached by path with
// rep repeated ancestors) and returns the position after it.
func (t *topColumn) walk(sch []format.SchemaElement, pos int, path []string, rep, depth int) (int, error) {
	if pos >= len(sch) || depth > maxSchemaDepth {
		return 0, fmt.Errorf("%w: the schema of column %q is cut short or too deep", table.ErrCorrupt, t.name)
	}
	e := &sch[pos]
	path = append(path[:len(path):len(path)], e.Name)
	if r, ok := e.RepetitionType.Get(); ok && r == format.Repeated {
		rep++
	}
	n, _ := e.NumChildren.Get()
	if !isGroup(e) {
		t.paths = append(t.paths, path)
		t.maxRep = max(t.maxRep, rep)
		return pos + 1, nil
	}
	pos++
	for k := 0; k < int(n); k++ {
		var err error
		if pos, err = t.walk(sch, pos, path, rep, depth+1); err != nil {
			return 0, err
		}
	}
	return pos, nil
}

// nestedKind returns "" for a flat top-level column, else the kind of the
// nested one: a list (a LIST group, or any repeated column), a map (a MAP
// group) or a struct (any other group).
func nestedKind(e *format.SchemaElement) string {
	if lt := e.LogicalType.Value; lt != nil {
		switch lt.(type) {
		case *format.ListType:
			return "list"
		case *format.MapType:
			return "map"
		}
	}
	if ct, ok := e.ConvertedType.Get(); ok {
		switch ct {
		case deprecated.List:
			return "list"
		case deprecated.Map, deprecated.MapKeyValue:
			return "map"
		}
	}
	if r, ok := e.RepetitionType.Get(); ok && r == format.Repeated {
		return "list"
	}
	if isGroup(e) {
		return "struct"
	}
	return ""
}

// isGroup reports whether a schema element is a group: it has children, or
// no physical type.
func isGroup(e *format.SchemaElement) bool {
	n, _ := e.NumChildren.Get()
	_, typed := e.Type.Get()
	return n > 0 || !typed
}

// describeNested lists nested columns as `"tags" (list), "attrs" (struct)`.
func describeNested(ns []Nested) string {
	var b []byte
	for i, n := range ns {
		if i > 0 {
			b = append(b, ", "...)
		}
		b = strconv.AppendQuote(b, n.Name)
		b = append(b, " ("+n.Kind+")"...)
	}
	return string(b)
}

// noFlatError reports a file whose columns are all nested (or that has
// none). It wraps table.ErrEmpty: to manyfold the file holds no table.
type noFlatError struct{ msg string }

func (e *noFlatError) Error() string { return e.msg }

// Unwrap returns table.ErrEmpty.
func (e *noFlatError) Unwrap() error { return table.ErrEmpty }
