package pqio

import (
	"errors"
	"fmt"
	"io"
	"math"
	"reflect"
	"runtime"
	"slices"
	"strconv"
	"sync"
	"sync/atomic"
	"unsafe"

	"github.com/parquet-go/parquet-go"

	"manyfold/io/table"
)

// WriterOptions configures a Parquet writer.
type WriterOptions struct {
	// Compression names the page codec: "snappy" (the default when
	// empty), "zstd" or "none".
	Compression string
	// RowGroupRows is the number of rows in each row group but the last;
	// 0 means 1<<20.
	RowGroupRows int
}

// defaultRowGroupRows is the row group size when WriterOptions leaves it 0.
const defaultRowGroupRows = 1 << 20

// chunkRows is how many rows the writer converts and hands on at a time;
// a page ends only between two such hand-overs (a variable so that tests
// can make pages short).
var chunkRows = 4096

// dictMaxBytes bounds a text column's dictionary within a row group; past it
// the column's remaining pages in the row group are written PLAIN.
const dictMaxBytes = 2 << 20

// writer writes batches as a Parquet file. It implements table.Writer.
type writer struct {
	name   string // the output's name, for errors
	fields []table.Field
	pw     *parquet.Writer
	rgRows int
	inRG   int   // rows in the open row group
	rows   int64 // rows written so far
	vals   [][]parquet.Value
	text   [][]byte // per column: text of values converted to text
	tends  []int    // ends of the values in text
	err    error    // sticky: the first failure
	closed bool
}

// NewWriter returns a writer of a Parquet file with the given schema to w.
// The columns keep the schema's order; Close writes the footer but does not
// close w.
func NewWriter(w io.Writer, schema *table.Schema, opts WriterOptions) (table.Writer, error) {
	return newWriter(w, schema, opts)
}

// newWriter is NewWriter with extra parquet-go options, which tests use to
// force small pages or dictionary fallback.
func newWriter(w io.Writer, schema *table.Schema, opts WriterOptions, extra ...parquet.WriterOption) (*writer, error) {
	name := "parquet output"
	if n, ok := w.(interface{ Name() string }); ok {
		name = n.Name()
	}
	if schema == nil || len(schema.Fields) == 0 {
		return nil, fmt.Errorf("%s: the schema has no columns", name)
	}
	var codec parquet.WriterOption
	switch opts.Compression {
	case "", "snappy":
		codec = parquet.Compression(&parquet.Snappy)
	case "zstd":
		codec = parquet.Compression(&parquet.Zstd)
	case "none", "uncompressed":
		codec = parquet.Compression(&parquet.Uncompressed)
	default:
		return nil, fmt.Errorf("%s: unknown Parquet compression %q (want snappy, zstd or none)", name, opts.Compression)
	}
	rg := opts.RowGroupRows
	if rg == 0 {
		rg = defaultRowGroupRows
	}
	if rg < 0 {
		return nil, fmt.Errorf("%s: row group size %d is negative", name, rg)
	}
	root, err := schemaNode(schema)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	options := append([]parquet.WriterOption{
		parquet.NewSchema("manyfold", root),
		codec,
		parquet.MaxRowsPerRowGroup(int64(rg)),
		parquet.DictionaryMaxBytes(dictMaxBytes),
	}, extra...)
	wr := &writer{
		name:   name,
		fields: append([]table.Field(nil), schema.Fields...),
		rgRows: rg,
		vals:   make([][]parquet.Value, len(schema.Fields)),
		text:   make([][]byte, len(schema.Fields)),
	}
	if err := wr.guard(func() error {
		wr.pw = parquet.NewWriter(w, options...)
		if n := len(wr.pw.ColumnWriters()); n != len(schema.Fields) {
			return fmt.Errorf("the Parquet schema has %d columns for %d fields", n, len(schema.Fields))
		}
		return nil
	}); err != nil {
		return nil, err
	}
	for i := range wr.vals {
		wr.vals[i] = make([]parquet.Value, chunkRows)
	}
	return wr, nil
}

// guard runs f, turning a panic into an error naming the output.
func (w *writer) guard(f func() error) (err error) {
	defer func() {
		if p := recover(); p != nil {
			err = fmt.Errorf("%s: writing Parquet: %v", w.name, p)
		}
	}()
	if err := f(); err != nil {
		var de *table.DataError
		if errors.As(err, &de) {
			return err
		}
		return fmt.Errorf("%s: writing Parquet: %w", w.name, err)
	}
	return nil
}

// Write appends the rows of b.
func (w *writer) Write(b *table.Batch) error {
	if w.closed {
		return fmt.Errorf("%s: write after Close", w.name)
	}
	if w.err != nil {
		return w.err
	}
	if err := w.check(b); err != nil {
		return err
	}
	w.err = w.guard(func() error { return w.write(b) })
	return w.err
}

// check verifies that b matches the schema.
func (w *writer) check(b *table.Batch) error {
	if len(b.Cols) != len(w.fields) {
		return fmt.Errorf("%s: batch has %d columns, the schema %d", w.name, len(b.Cols), len(w.fields))
	}
	for i := range b.Cols {
		if n := b.Cols[i].Len(); n != b.Rows {
			return fmt.Errorf("%s: column %q holds %d rows in a batch of %d", w.name, w.fields[i].Name, n, b.Rows)
		}
		if c := &b.Cols[i]; c.Nulls != nil && len(c.Nulls) < b.Rows {
			return fmt.Errorf("%s: column %q marks nulls for %d rows in a batch of %d", w.name, w.fields[i].Name, len(c.Nulls), b.Rows)
		}
	}
	return nil
}

func (w *writer) write(b *table.Batch) error {
	first := b.FirstRow
	if first <= 0 {
		first = w.rows + 1
	}
	cws := w.pw.ColumnWriters()
	for start := 0; start < b.Rows; {
		k := min(b.Rows-start, chunkRows, w.rgRows-w.inRG)
		// Convert every column first, so that a bad value leaves no
		// column longer than the others.
		if err := w.columns(func(j int) error { return w.convert(j, &b.Cols[j], start, k, first) }); err != nil {
			return err
		}
		// Each column writer encodes and compresses its own pages, so the
		// columns are written side by side; the bytes do not depend on it.
		if err := w.columns(func(j int) error {
			if _, err := cws[j].WriteRowValues(w.vals[j][:k]); err != nil {
				return fmt.Errorf("column %q: %w", w.fields[j].Name, err)
			}
			return nil
		}); err != nil {
			return err
		}
		start += k
		w.inRG += k
		w.rows += int64(k)
		if w.inRG == w.rgRows {
			if err := w.pw.Flush(); err != nil {
				return err
			}
			w.inRG = 0
		}
	}
	return nil
}

// convert fills w.vals[j][:k] with rows start..start+k of c, converted to
// field j's kind.
func (w *writer) convert(j int, c *table.Column, start, k int, first int64) error {
	f := &w.fields[j]
	vals := w.vals[j][:k]
	def := 0
	if f.Nullable {
		def = 1
	}
	bad := func(i int, err error) error {
		return &table.DataError{File: w.name, Row: first + int64(start+i), Column: f.Name, Err: err}
	}
	var nulls []bool // nulls of the rows converted, nil when none
	if c.Nulls != nil {
		nulls = c.Nulls[start : start+k]
		if !f.Nullable {
			if i := slices.Index(nulls, true); i >= 0 {
				return bad(i, errors.New("null value in a column declared not null"))
			}
			nulls = nil
		}
	}
	null := parquet.NullValue().Level(0, 0, j)
	// The common cases: the column's form matches the kind.
	switch {
	case f.Kind == table.Int64 && c.Form == table.FormInt64:
		src := c.Ints[start : start+k]
		for i, v := range src {
			vals[i] = parquet.Int64Value(v).Level(0, def, j)
		}
		setNulls(vals, nulls, null)
		return nil
	case f.Kind == table.Float64 && c.Form == table.FormFloat64:
		src := c.Floats[start : start+k]
		for i, v := range src {
			vals[i] = parquet.DoubleValue(v).Level(0, def, j)
		}
		setNulls(vals, nulls, null)
		return nil
	case f.Kind == table.Bool && c.Form == table.FormBool:
		src := c.Bools[start : start+k]
		for i, v := range src {
			vals[i] = parquet.BooleanValue(v).Level(0, def, j)
		}
		setNulls(vals, nulls, null)
		return nil
	case f.Kind == table.String && c.Form == table.FormText:
		offs := c.Offsets[start : start+k+1]
		for i := range vals {
			vals[i] = parquet.ByteArrayValue(c.Data[offs[i]:offs[i+1]]).Level(0, def, j)
		}
		setNulls(vals, nulls, null)
		return nil
	case f.Kind == table.String && c.Form == table.FormDict:
		for i, x := range c.Indices[start : start+k] {
			if nulls != nil && nulls[i] {
				vals[i] = null
				continue
			}
			vals[i] = parquet.ByteArrayValue(c.Dict.Entry(int(x))).Level(0, def, j)
		}
		return nil
	case f.Kind == table.String:
		// Numbers and booleans are written as their canonical text.
		buf := w.text[j][:0]
		w.tends = grow(w.tends, k)
		for i := range vals {
			buf = c.AppendText(buf, start+i)
			w.tends[i] = len(buf)
		}
		w.text[j] = buf
		from := 0
		for i := range vals {
			vals[i] = parquet.ByteArrayValue(buf[from:w.tends[i]]).Level(0, def, j)
			from = w.tends[i]
		}
		setNulls(vals, nulls, null)
		return nil
	}
	// Conversions between kinds: text parsed, numbers converted.
	for i := range vals {
		if nulls != nil && nulls[i] {
			vals[i] = null
			continue
		}
		var v parquet.Value
		var isNull bool
		var err error
		switch f.Kind {
		case table.Int64:
			var x int64
			x, isNull, err = intAt(c, start+i, f.Nullable)
			v = parquet.Int64Value(x)
		case table.Float64:
			var x float64
			x, isNull, err = floatAt(c, start+i, f.Nullable)
			v = parquet.DoubleValue(x)
		case table.Bool:
			var x bool
			x, isNull, err = boolAt(c, start+i, f.Nullable)
			v = parquet.BooleanValue(x)
		default:
			return fmt.Errorf("column %q: unknown kind %v", f.Name, f.Kind)
		}
		if err != nil {
			return bad(i, err)
		}
		if isNull {
			vals[i] = null
		} else {
			vals[i] = v.Level(0, def, j)
		}
	}
	return nil
}

// setNulls puts the null value at the rows that nulls marks.
func setNulls(vals []parquet.Value, nulls []bool, null parquet.Value) {
	for i, n := range nulls {
		if n {
			vals[i] = null
		}
	}
}

// bstr views b as a string without copying; the string must not outlive b.
func bstr(b []byte) string { return unsafe.String(unsafe.SliceData(b), len(b)) }

// textAt returns the text of row r of a text or dictionary column, and
// whether it is empty text that stands for a null (only when nullable).
func textAt(c *table.Column, r int, nullable bool) ([]byte, bool) {
	b := c.Bytes(r)
	return b, len(b) == 0 && nullable
}

var (
	errEmpty = errors.New("empty text in a column declared not null")
)

// intAt returns row r of c as an integer. Text is parsed as a decimal
// integer, or as a number with no fractional part.
func intAt(c *table.Column, r int, nullable bool) (int64, bool, error) {
	switch c.Form {
	case table.FormInt64:
		return c.Ints[r], false, nil
	case table.FormFloat64:
		v, err := floatToInt(c.Floats[r])
		return v, false, err
	case table.FormBool:
		if c.Bools[r] {
			return 1, false, nil
		}
		return 0, false, nil
	}
	b, null := textAt(c, r, nullable)
	if null {
		return 0, true, nil
	}
	if len(b) == 0 {
		return 0, false, errEmpty
	}
	if v, err := strconv.ParseInt(bstr(b), 10, 64); err == nil {
		return v, false, nil
	}
	f, err := strconv.ParseFloat(bstr(b), 64)
	if err != nil {
		return 0, false, fmt.Errorf("%q is not an integer", b)
	}
	v, err := floatToInt(f)
	if err != nil {
		return 0, false, fmt.Errorf("%q is not an integer", b)
	}
	return v, false, nil
}

// floatToInt converts f to an integer when it has no fractional part and
// fits in an int64.
func floatToInt(f float64) (int64, error) {
	if f != math.Trunc(f) || f < -(1<<63) || f >= 1<<63 {
		return 0, fmt.Errorf("%s is not an integer", table.AppendFloat(nil, f))
	}
	return int64(f), nil
}

// floatAt returns row r of c as a float. Text is parsed as table.ParseFloat
// does (true and false are 1 and 0).
func floatAt(c *table.Column, r int, nullable bool) (float64, bool, error) {
	switch c.Form {
	case table.FormInt64:
		return float64(c.Ints[r]), false, nil
	case table.FormFloat64:
		return c.Floats[r], false, nil
	case table.FormBool:
		if c.Bools[r] {
			return 1, false, nil
		}
		return 0, false, nil
	}
	b, null := textAt(c, r, nullable)
	if null {
		return 0, true, nil
	}
	if len(b) == 0 {
		return 0, false, errEmpty
	}
	switch bstr(b) {
	case "true", "TRUE", "True":
		return 1, false, nil
	case "false", "FALSE", "False":
		return 0, false, nil
	}
	v, err := strconv.ParseFloat(bstr(b), 64)
	if err != nil {
		return 0, false, fmt.Errorf("%q is not a number", b)
	}
	return v, false, nil
}

// boolAt returns row r of c as a boolean: numbers must be 0 or 1; text is
// parsed by strconv.ParseBool (1, t, T, TRUE, true, True, 0, f, ...).
func boolAt(c *table.Column, r int, nullable bool) (bool, bool, error) {
	switch c.Form {
	case table.FormBool:
		return c.Bools[r], false, nil
	case table.FormInt64:
		switch c.Ints[r] {
		case 0:
			return false, false, nil
		case 1:
			return true, false, nil
		}
		return false, false, fmt.Errorf("%d is not a boolean (want 0 or 1)", c.Ints[r])
	case table.FormFloat64:
		switch c.Floats[r] {
		case 0:
			return false, false, nil
		case 1:
			return true, false, nil
		}
		return false, false, fmt.Errorf("%s is not a boolean (want 0 or 1)", table.AppendFloat(nil, c.Floats[r]))
	}
	b, null := textAt(c, r, nullable)
	if null {
		return false, true, nil
	}
	if len(b) == 0 {
		return false, false, errEmpty
	}
	v, err := strconv.ParseBool(bstr(b))
	if err != nil {
		return false, false, fmt.Errorf("%q is not a boolean", b)
	}
	return v, false, nil
}

// Close writes the last row group and the footer. It does not close the
// underlying writer. After a failed Write it writes nothing more and
// returns that failure.
func (w *writer) Close() error {
	if w.closed {
		return nil
	}
	w.closed = true
	if w.err != nil {
		return w.err
	}
	return w.guard(w.pw.Close)
}

// schemaNode builds the Parquet root node for schema, keeping its order.
func schemaNode(schema *table.Schema) (parquet.Node, error) {
	fields := make([]parquet.Field, len(schema.Fields))
	seen := make(map[string]bool, len(schema.Fields))
	for i, f := range schema.Fields {
		if f.Name == "" {
			return nil, fmt.Errorf("column %d has no name", i+1)
		}
		if seen[f.Name] {
			return nil, fmt.Errorf("column %q appears twice", f.Name)
		}
		seen[f.Name] = true
		var n parquet.Node
		switch f.Kind {
		case table.String:
			n = parquet.Encoded(parquet.String(), &parquet.RLEDictionary)
		case table.Int64:
			n = parquet.Leaf(parquet.Int64Type)
		case table.Float64:
			n = parquet.Leaf(parquet.DoubleType)
		case table.Bool:
			n = parquet.Leaf(parquet.BooleanType)
		default:
			return nil, fmt.Errorf("column %q: unknown kind %v", f.Name, f.Kind)
		}
		if f.Nullable {
			n = parquet.Optional(n)
		} else {
			n = parquet.Required(n)
		}
		fields[i] = orderedField{Node: n, name: f.Name}
	}
	return orderedGroup{fields: fields}, nil
}

// orderedGroup is a Parquet group whose fields keep the order they were
// given in (parquet.Group, a map, sorts them by name).
type orderedGroup struct {
	parquet.Group // for Type, Optional, Encoding and the other defaults
	fields        []parquet.Field
}

// Fields returns the group's fields in order.
func (g orderedGroup) Fields() []parquet.Field { return g.fields }

// String describes the group as a Parquet message.
func (g orderedGroup) String() string { return parquet.NewSchema("manyfold", g).String() }

// GoType returns the struct type that matches the group's fields.
func (g orderedGroup) GoType() reflect.Type {
	sf := make([]reflect.StructField, len(g.fields))
	for i, f := range g.fields {
		sf[i] = reflect.StructField{Name: "F" + strconv.Itoa(i), Type: f.GoType(), Tag: reflect.StructTag(`parquet:"` + f.Name() + `"`)}
	}
	return reflect.StructOf(sf)
}

// orderedField names one field of an orderedGroup.
type orderedField struct {
	parquet.Node
	name string
}

// Name returns the field's name.
func (f orderedField) Name() string { return f.name }

// Value returns field i of a struct of the group's GoType; the writer
// never calls it (it writes columns, not Go values).
func (f orderedField) Value(base reflect.Value) reflect.Value { return reflect.Value{} }

// columns calls f for every column, on up to GOMAXPROCS goroutines, and
// returns the error of the lowest-numbered column that failed.
func (w *writer) columns(f func(j int) error) error {
	n := len(w.fields)
	threads := min(runtime.GOMAXPROCS(0), n)
	if threads < 2 {
		for j := 0; j < n; j++ {
			if err := f(j); err != nil {
				return err
			}
		}
		return nil
	}
	errs := make([]error, n)
	var next atomic.Int64
	var wg sync.WaitGroup
	for t := 0; t < threads; t++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				j := int(next.Add(1) - 1)
				if j >= n {
					return
				}
				errs[j] = func() (err error) {
					defer func() {
						if p := recover(); p != nil {
							err = fmt.Errorf("writing Parquet: %v", p)
						}
					}()
					return f(j)
				}()
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}
