package arrowio

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"unicode/utf8"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/array"
	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"

	"manyfold/io/table"
)

// writer implements table.Writer with Arrow's IPC file writer.
type writer struct {
	name   string
	out    *bufio.Writer
	pos    *positionWriter
	fw     *ipc.FileWriter
	schema *table.Schema
	asch   *arrow.Schema
	rows   int64 // rows written so far
	cols   []writeCol
	arrays []arrow.Array
	err    error // sticky output error
	closed bool
	// Errors about values and names: the file they come from and each
	// row's line in it (the batch's Lines, nil when unknown).
	dataName  string
	lines     []int64
	checkUTF8 bool
}

// writeCol holds the buffers reused to build one output column.
type writeCol struct {
	valid  []byte
	ints   []int64
	floats []float64
	bits   []byte
	offs   []int32
	data   []byte
	utf8   table.UTF8Check
}

// positionWriter counts the bytes written so that the file writer can ask
// for its position; it cannot seek anywhere else.
type positionWriter struct {
	w io.Writer
	n int64
}

func (p *positionWriter) Write(b []byte) (int, error) {
	n, err := p.w.Write(b)
	p.n += int64(n)
	return n, err
}

// Seek reports the current position; the file writer never moves it.
func (p *positionWriter) Seek(offset int64, whence int) (int64, error) {
	if offset == 0 && whence == io.SeekCurrent {
		return p.n, nil
	}
	return 0, errors.New("arrowio: output cannot seek")
}

// WriterOptions configures an Arrow writer.
type WriterOptions struct {
	// Input names the table being written (the input file) in errors
	// about its values and column names; empty: the output's name.
	Input string
	// CheckUTF8 refuses text values and column names that are not valid
	// UTF-8, utf8's definition, with a *table.DataError wrapping
	// table.ErrNotUTF8. Without it text is written as it is.
	CheckUTF8 bool
}

// NewWriter writes a table in the Arrow IPC file format to w, which need not
// be seekable: text columns as utf8, int as int64, float as float64, bool as
// bool, each nullable as the field says. Close writes the footer and
// flushes, but does not close w.
func NewWriter(w io.Writer, schema *table.Schema) (table.Writer, error) {
	return NewWriterWith(w, schema, WriterOptions{})
}

// NewWriterWith is NewWriter with options. With opts.CheckUTF8, a text
// value or a column name that is not valid UTF-8 gives a *table.DataError
// wrapping table.ErrNotUTF8, naming the row and column, or the column's
// position.
func NewWriterWith(w io.Writer, schema *table.Schema, opts WriterOptions) (table.Writer, error) {
	name := outputName(w)
	dataName := name
	if opts.Input != "" {
		dataName = opts.Input
	}
	fields := make([]arrow.Field, len(schema.Fields))
	for i, f := range schema.Fields {
		if opts.CheckUTF8 && !utf8.ValidString(f.Name) {
			return nil, &table.DataError{File: dataName, Err: table.NameNotUTF8(i, f.Name)}
		}
		var dt arrow.DataType
		switch f.Kind {
		case table.String:
			dt = arrow.BinaryTypes.String
		case table.Int64:
			dt = arrow.PrimitiveTypes.Int64
		case table.Float64:
			dt = arrow.PrimitiveTypes.Float64
		case table.Bool:
			dt = arrow.FixedWidthTypes.Boolean
		default:
			return nil, fmt.Errorf("%s: column %q: cannot write kind %s", name, f.Name, f.Kind)
		}
		fields[i] = arrow.Field{Name: f.Name, Type: dt, Nullable: f.Nullable}
	}
	asch := arrow.NewSchema(fields, nil)
	bw := bufio.NewWriterSize(w, 1<<16)
	pw := &positionWriter{w: bw}
	fw, err := ipc.NewFileWriter(pw, ipc.WithSchema(asch))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return &writer{
		name: name, dataName: dataName, checkUTF8: opts.CheckUTF8, out: bw, pos: pw, fw: fw, schema: schema, asch: asch,
		cols:   make([]writeCol, len(fields)),
		arrays: make([]arrow.Array, len(fields)),
	}, nil
}

// outputName finds a name for errors: the final path of an atomic output
// file, else the name of a file.
func outputName(w io.Writer) string {
	switch f := w.(type) {
	case interface{ Path() string }:
		return f.Path()
	case interface{ Name() string }:
		return f.Name()
	}
	return "arrow output"
}

// Write appends b as one record batch.
func (w *writer) Write(b *table.Batch) error {
	if w.closed {
		return fmt.Errorf("%s: write after close", w.name)
	}
	if w.err != nil {
		return w.err
	}
	if len(b.Cols) != len(w.schema.Fields) {
		return fmt.Errorf("%s: batch has %d columns, the output %d", w.name, len(b.Cols), len(w.schema.Fields))
	}
	first := w.rows + 1
	if b.FirstRow > 0 {
		first = b.FirstRow
	}
	w.lines = nil
	if len(b.Lines) >= b.Rows {
		w.lines = b.Lines
	}
	for i := range b.Cols {
		col := &b.Cols[i]
		f := &w.schema.Fields[i]
		if col.Len() != b.Rows {
			return fmt.Errorf("%s: column %q has %d values in a batch of %d rows", w.name, f.Name, col.Len(), b.Rows)
		}
		arr, err := w.build(&w.cols[i], col, f, b.Rows, first)
		if err != nil {
			for _, a := range w.arrays[:i] {
				a.Release()
			}
			return err
		}
		w.arrays[i] = arr
	}
	rec := array.NewRecord(w.asch, w.arrays, int64(b.Rows))
	for _, a := range w.arrays {
		a.Release()
	}
	err := w.fw.Write(rec)
	rec.Release()
	if err != nil {
		w.err = fmt.Errorf("write %s: %w", w.name, err)
		return w.err
	}
	w.rows += int64(b.Rows)
	return nil
}

// dataErr reports a bad value at row i of the batch.
func (w *writer) dataErr(first int64, i int, column string, err error) error {
	e := &table.DataError{File: w.dataName, Row: first + int64(i), Column: column, Err: err}
	if w.lines != nil {
		e.Line = w.lines[i]
	}
	return e
}

// build makes the Arrow array for one column, converting its form to the
// field's kind.
func (w *writer) build(st *writeCol, col *table.Column, f *table.Field, n int, first int64) (arrow.Array, error) {
	var (
		valid *memory.Buffer
		nulls int
	)
	if col.Nulls != nil {
		st.valid = resize(st.valid, (n+7)/8)
		clear(st.valid)
		for i, isNull := range col.Nulls[:n] {
			if isNull {
				nulls++
			} else {
				st.valid[i>>3] |= 1 << (i & 7)
			}
		}
		if nulls > 0 {
			if !f.Nullable {
				for i, isNull := range col.Nulls[:n] {
					if isNull {
						return nil, w.dataErr(first, i, f.Name, errors.New("null in a column declared not nullable"))
					}
				}
			}
			valid = memory.NewBufferBytes(st.valid)
		}
	}
	var (
		dt   arrow.DataType
		bufs []*memory.Buffer
	)
	switch f.Kind {
	case table.String:
		// Arrow's utf8 is UTF-8: text values are checked (numbers and
		// booleans converted to text are ASCII).
		if w.checkUTF8 {
			if i := st.utf8.Invalid(col, 0, n); i >= 0 {
				return nil, w.dataErr(first, i, f.Name, table.NotUTF8(col.Bytes(i)))
			}
		}
		offs, data, err := w.text(st, col, n, f.Name)
		if err != nil {
			return nil, err
		}
		dt = arrow.BinaryTypes.String
		bufs = []*memory.Buffer{valid, memory.NewBufferBytes(arrow.Int32Traits.CastToBytes(offs)), memory.NewBufferBytes(data)}
	case table.Int64:
		v, err := w.ints(st, col, n, f.Name, first)
		if err != nil {
			return nil, err
		}
		dt = arrow.PrimitiveTypes.Int64
		bufs = []*memory.Buffer{valid, memory.NewBufferBytes(arrow.Int64Traits.CastToBytes(v))}
	case table.Float64:
		v, err := w.floats(st, col, n, f.Name, first)
		if err != nil {
			return nil, err
		}
		dt = arrow.PrimitiveTypes.Float64
		bufs = []*memory.Buffer{valid, memory.NewBufferBytes(arrow.Float64Traits.CastToBytes(v))}
	case table.Bool:
		v, err := w.bools(st, col, n, f.Name, first)
		if err != nil {
			return nil, err
		}
		dt = arrow.FixedWidthTypes.Boolean
		bufs = []*memory.Buffer{valid, memory.NewBufferBytes(v)}
	}
	data := array.NewData(dt, n, bufs, nil, nulls, 0)
	arr := array.MakeFromData(data)
	data.Release()
	return arr, nil
}

// text returns zero-based offsets and the bytes of a text column, aliasing
// text-form input and formatting other forms.
func (w *writer) text(st *writeCol, col *table.Column, n int, name string) ([]int32, []byte, error) {
	if n == 0 {
		return zeroOffset[:], nil, nil
	}
	if col.Form == table.FormText {
		offs, data := rebase32(&st.offs, col.Offsets[:n+1], col.Data)
		return offs, data, nil
	}
	if col.Form == table.FormDict {
		size := int32(col.Dict.Len())
		for i, x := range col.Indices[:n] {
			if (x < 0 || x >= size) && !col.IsNull(i) {
				return nil, nil, fmt.Errorf("%s: column %q: dictionary index %d out of range (%d entries)", w.name, name, x, size)
			}
		}
	}
	st.offs = resize(st.offs, n+1)
	st.offs[0] = 0
	data := st.data[:0]
	for i := 0; i < n; i++ {
		data = col.AppendText(data, i)
		if len(data) > math.MaxInt32 {
			return nil, nil, fmt.Errorf("%s: column %q: a batch holds more than 2 GiB of text", w.name, name)
		}
		st.offs[i+1] = int32(len(data))
	}
	st.data = data
	return st.offs, data, nil
}

// ints returns the column as int64 values; null rows hold 0.
func (w *writer) ints(st *writeCol, col *table.Column, n int, name string, first int64) ([]int64, error) {
	if col.Form == table.FormInt64 {
		return col.Ints[:n], nil
	}
	st.ints = resize(st.ints, n)
	for i := 0; i < n; i++ {
		if col.IsNull(i) {
			st.ints[i] = 0
			continue
		}
		switch col.Form {
		case table.FormFloat64:
			v, err := table.FloatToInt(col.Floats[i])
			if err != nil {
				return nil, w.dataErr(first, i, name, err)
			}
			st.ints[i] = v
		case table.FormBool:
			st.ints[i] = b2i(col.Bools[i])
		default:
			v, perr := table.ParseInt(col.Bytes(i))
			ok := perr == nil
			if !ok {
				return nil, w.dataErr(first, i, name, fmt.Errorf("%q is not an integer", col.Bytes(i)))
			}
			st.ints[i] = v
		}
	}
	return st.ints, nil
}

// floats returns the column as float64 values; null rows hold 0.
func (w *writer) floats(st *writeCol, col *table.Column, n int, name string, first int64) ([]float64, error) {
	if col.Form == table.FormFloat64 {
		return col.Floats[:n], nil
	}
	st.floats = resize(st.floats, n)
	for i := 0; i < n; i++ {
		if col.IsNull(i) {
			st.floats[i] = 0
			continue
		}
		v, _, err := col.Float(i)
		if err != nil {
			return nil, w.dataErr(first, i, name, err)
		}
		st.floats[i] = v
	}
	return st.floats, nil
}

// bools returns the column as a bitmap; null rows hold false. Text is read
// by table.ParseBool, as every writer reads it; numbers must be 0 or 1.
func (w *writer) bools(st *writeCol, col *table.Column, n int, name string, first int64) ([]byte, error) {
	st.bits = resize(st.bits, (n+7)/8)
	clear(st.bits)
	for i := 0; i < n; i++ {
		if col.IsNull(i) {
			continue
		}
		var v bool
		switch col.Form {
		case table.FormBool:
			v = col.Bools[i]
		case table.FormInt64, table.FormFloat64:
			f, _, _ := col.Float(i)
			if f != 0 && f != 1 {
				return nil, w.dataErr(first, i, name, fmt.Errorf("%s is not a boolean", col.AppendText(nil, i)))
			}
			v = f == 1
		default:
			var err error
			if v, err = table.ParseBool(col.Bytes(i)); err != nil {
				return nil, w.dataErr(first, i, name, err)
			}
		}
		if v {
			st.bits[i>>3] |= 1 << (i & 7)
		}
	}
	return st.bits, nil
}

func b2i(b bool) int64 {
	if b {
		return 1
	}
	return 0
}

// Close writes the footer and flushes the output; it does not close the
// underlying writer.
func (w *writer) Close() error {
	if w.closed {
		return nil
	}
	w.closed = true
	if w.err != nil {
		return w.err
	}
	if err := w.fw.Close(); err != nil {
		return fmt.Errorf("write %s: %w", w.name, err)
	}
	if err := w.out.Flush(); err != nil {
		return fmt.Errorf("write %s: %w", w.name, err)
	}
	return nil
}
