package pqio

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
	"unicode/utf8"
	"unsafe"

	"github.com/parquet-go/parquet-go/deprecated"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/internal/guard"
	"manyfold/io/table"
)

// WriterOptions configures a Parquet writer.
type WriterOptions struct {
	// Compression names the page codec: "snappy" (the default when
	// empty), "zstd" or "none".
	Compression string
	// RowGroupRows is the number of rows in each row group but the last;
	// 0 means 1<<20. It is ignored when Source is set.
	RowGroupRows int
	// Source, when set, holds the same rows as the output, in the same
	// order, and the columns that Copy marks are copied from its column
	// chunks of the same name instead of being encoded from the batches
	// (whose columns at those positions are then ignored and may be
	// empty). The output's row groups have the Source's row group sizes.
	// The caller checks each copied column with Source.CanCopy first.
	Source *Source
	// Copy marks, by position in the schema, the columns copied from
	// Source.
	Copy []bool
	// Nested lists nested top-level columns of Source (lists, maps,
	// structs) copied whole into the output, leaf chunks and schema
	// subtree as they are: each goes before the schema's column at
	// position Before (len(schema.Fields): after the last). Several with
	// the same Before keep their order here. Kind is not used. The caller
	// checks each with Source.CanCopy first.
	Nested []Nested
	// Input names the table being written (the input file) in errors
	// about its values and column names; empty: the output's name.
	Input string
	// CheckUTF8 refuses text values and column names that are not valid
	// UTF-8, a STRING column's type, with a *table.DataError wrapping
	// table.ErrNotUTF8 (columns copied from Source are the input's bytes
	// and are not checked). Without it text is written as it is, as
	// manyfold's mapping tables keep a level's bytes.
	CheckUTF8 bool
	// KeepBytes writes a text column any of whose values is not valid
	// UTF-8 as plain BYTE_ARRAY, without the STRING annotation, which
	// promises UTF-8 (decided at Close: the schema is in the footer).
	// manyfold's mapping tables set it, as their levels are the input's
	// bytes, in whatever encoding the input has. CheckUTF8 takes
	// precedence.
	KeepBytes bool
}

// defaultRowGroupRows is the row group size when WriterOptions leaves it 0.
const defaultRowGroupRows = 1 << 20

// chunkRows is how many rows of a batch the writer converts and hands to
// its column encoders at a time (a variable so that tests can change it).
var chunkRows = 4096

// writer writes batches as a Parquet file. It implements table.Writer.
type writer struct {
	name   string // the output's name, for errors
	out    io.Writer
	off    int64 // bytes written
	fields []table.Field
	codec  codec
	chunks []*chunk // per column; nil for a copied column
	src    *Source
	rgRows int   // row group size without a Source
	rg     int   // index of the open row group
	inRG   int   // rows in the open row group
	rows   int64 // rows written so far
	groups []format.RowGroup
	elems  []format.SchemaElement // the schema below the root, in output order
	plan   []outCol               // the top-level columns in output order
	leaves int                    // leaf columns in the output
	// Per column: conversion scratch.
	ints   [][]int64
	floats [][]float64
	bools  [][]bool
	nulls  [][]bool
	text   [][]byte
	tends  [][]int
	// Errors about values and names: the file they come from and each
	// row's line in it (the batch's Lines, nil when unknown).
	dataName string
	lines    []int64
	utf8     []table.UTF8Check // per column, text checked as UTF-8 (nil: none)
	refuse   bool              // CheckUTF8: text that is not UTF-8 is an error
	binary   []bool            // KeepBytes: per column, text met that is not UTF-8
	elemAt   []int             // per column written here: its element in elems
	err      error             // sticky: the first failure
	closed   bool
}

// NewWriter returns a writer of a Parquet file with the given schema to w.
// The columns keep the schema's order; Close writes the footer but does not
// close w. With WriterOptions.CheckUTF8, a text value or a column name
// that is not valid UTF-8 gives a *table.DataError wrapping
// table.ErrNotUTF8, naming the row and column, or the column's position.
func NewWriter(w io.Writer, schema *table.Schema, opts WriterOptions) (table.Writer, error) {
	return newWriter(w, schema, opts)
}

func newWriter(w io.Writer, schema *table.Schema, opts WriterOptions) (*writer, error) {
	name := "parquet output"
	if n, ok := w.(interface{ Name() string }); ok {
		name = n.Name()
	}
	if schema == nil || len(schema.Fields) == 0 {
		return nil, fmt.Errorf("%s: the schema has no columns", name)
	}
	cd, ok := codecs[opts.Compression]
	if !ok {
		return nil, fmt.Errorf("%s: unknown Parquet compression %q (want snappy, zstd or none)", name, opts.Compression)
	}
	rg := opts.RowGroupRows
	if rg == 0 {
		rg = defaultRowGroupRows
	}
	if rg < 0 {
		return nil, fmt.Errorf("%s: row group size %d is negative", name, rg)
	}
	n := len(schema.Fields)
	if opts.Copy != nil && (len(opts.Copy) != n || opts.Source == nil) {
		return nil, fmt.Errorf("%s: Copy marks %d columns of %d, or has no Source", name, len(opts.Copy), n)
	}
	wr := &writer{
		name: name, out: w, fields: append([]table.Field(nil), schema.Fields...), codec: cd,
		chunks: make([]*chunk, n), src: opts.Source, rgRows: rg,
		ints: make([][]int64, n), floats: make([][]float64, n), bools: make([][]bool, n),
		nulls: make([][]bool, n), text: make([][]byte, n), tends: make([][]int, n),
		dataName: name,
	}
	if opts.CheckUTF8 || opts.KeepBytes {
		wr.utf8 = make([]table.UTF8Check, n)
		wr.refuse = opts.CheckUTF8
		wr.binary = make([]bool, n)
		wr.elemAt = make([]int, n)
	}
	if opts.Input != "" {
		wr.dataName = opts.Input
	}
	seen := make(map[string]bool, n)
	elems := make([][]format.SchemaElement, n) // per field, its schema subtree
	for i, f := range schema.Fields {
		if f.Name == "" {
			return nil, fmt.Errorf("%s: column %d has no name", name, i+1)
		}
		if seen[f.Name] {
			return nil, fmt.Errorf("%s: column %q appears twice", name, f.Name)
		}
		seen[f.Name] = true
		if opts.Copy != nil && opts.Copy[i] {
			t, ok := opts.Source.cols[f.Name]
			if !ok || t.kind != "" {
				return nil, fmt.Errorf("%s: column %q is not a flat column of %s", name, f.Name, opts.Source.name)
			}
			elems[i] = t.elems
			continue
		}
		if opts.CheckUTF8 && !utf8.ValidString(f.Name) {
			return nil, &table.DataError{File: wr.dataName, Err: table.NameNotUTF8(i, f.Name)}
		}
		if f.Kind > table.Bool {
			return nil, fmt.Errorf("%s: column %q: unknown kind %v", name, f.Name, f.Kind)
		}
		rep := format.Required
		if f.Nullable {
			rep = format.Optional
		}
		e := format.SchemaElement{Type: thrift.New(physical(f.Kind)), RepetitionType: thrift.New(rep), Name: f.Name}
		if f.Kind == table.String {
			e.ConvertedType = thrift.New(deprecated.UTF8)
			e.LogicalType = format.LogicalType{Value: &format.StringType{}}
		}
		elems[i] = []format.SchemaElement{e}
		wr.chunks[i] = newChunk(f, cd)
	}
	if err := wr.planColumns(opts, elems, seen); err != nil {
		return nil, err
	}
	if err := wr.emit([]byte("PAR1")); err != nil {
		return nil, err
	}
	return wr, nil
}

// outCol is one top-level column of the output: field j of the schema, or
// (field -1) a nested column copied from the Source.
type outCol struct {
	field int
	src   *topColumn // the Source's column copied, nil when encoded here
}

// planColumns orders the output's top-level columns: the schema's fields,
// with opts.Nested placed among them; and lays out the output's schema
// (elems, one subtree per field) in that order.
func (w *writer) planColumns(opts WriterOptions, elems [][]format.SchemaElement, seen map[string]bool) error {
	n := len(w.fields)
	if len(opts.Nested) > 0 && opts.Source == nil {
		return fmt.Errorf("%s: nested columns to copy without a Source", w.name)
	}
	nested := make([][]*topColumn, n+1) // by the field they precede
	for _, nc := range opts.Nested {
		t, ok := opts.Source.cols[nc.Name]
		switch {
		case !ok || t.kind == "":
			return fmt.Errorf("%s: %q is not a nested column of %s", w.name, nc.Name, opts.Source.name)
		case nc.Before < 0 || nc.Before > n:
			return fmt.Errorf("%s: nested column %q placed at %d of %d columns", w.name, nc.Name, nc.Before, n)
		case seen[nc.Name]:
			return fmt.Errorf("%s: column %q appears twice", w.name, nc.Name)
		}
		seen[nc.Name] = true
		nested[nc.Before] = append(nested[nc.Before], t)
	}
	add := func(sl outCol, sub []format.SchemaElement) {
		if sl.field >= 0 && w.elemAt != nil {
			w.elemAt[sl.field] = len(w.elems)
		}
		w.plan = append(w.plan, sl)
		w.elems = append(w.elems, sub...)
		if sl.src != nil {
			w.leaves += len(sl.src.paths)
		} else {
			w.leaves++
		}
	}
	for i := 0; i <= n; i++ {
		for _, t := range nested[i] {
			add(outCol{field: -1, src: t}, t.elems)
		}
		if i < n {
			sl := outCol{field: i}
			if w.chunks[i] == nil {
				sl.src = opts.Source.cols[w.fields[i].Name]
			}
			add(sl, elems[i])
		}
	}
	return nil
}

// copyColumn copies the chunks of the Source's column t in the open row
// group into the output, and adds their metadata to rg.
func (w *writer) copyColumn(rg *format.RowGroup, t *topColumn) error {
	for l, path := range t.paths {
		cc, _, err := w.src.copyChunk(countWriter{w}, w.off, t.first+l, path, w.rg, w.codec)
		if err != nil {
			return fmt.Errorf("%s: copying: %w", w.name, err)
		}
		if !w.src.ordered(w.rg) {
			// Without the source's column orders its min_value and
			// max_value have no defined meaning; the output declares
			// type-defined orders, so they are dropped.
			cc.MetaData.Statistics.MinValue, cc.MetaData.Statistics.MaxValue = nil, nil
		}
		rg.Columns = append(rg.Columns, cc)
		rg.TotalByteSize += cc.MetaData.TotalUncompressedSize
	}
	return nil
}

// emit writes b to the output.
func (w *writer) emit(b []byte) error {
	n, err := w.out.Write(b)
	w.off += int64(n)
	if err != nil {
		return fmt.Errorf("%s: writing Parquet: %w", w.name, err)
	}
	return nil
}

// target returns the size of the open row group.
func (w *writer) target() (int, error) {
	if w.src == nil {
		return w.rgRows, nil
	}
	if w.rg >= w.src.numGroups() {
		return 0, fmt.Errorf("%s: more rows than %s holds (%d)", w.name, w.src.name, w.src.NumRows())
	}
	return int(w.src.groupRows(w.rg)), nil
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
	w.err = w.write(b)
	return w.err
}

// check verifies that b matches the schema.
func (w *writer) check(b *table.Batch) error {
	if len(b.Cols) != len(w.fields) {
		return fmt.Errorf("%s: batch has %d columns, the schema %d", w.name, len(b.Cols), len(w.fields))
	}
	for i := range b.Cols {
		if w.chunks[i] == nil {
			continue
		}
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
	w.lines = nil
	if len(b.Lines) >= b.Rows {
		w.lines = b.Lines
	}
	for start := 0; start < b.Rows; {
		t, err := w.target()
		if err != nil {
			return err
		}
		if w.inRG == t {
			if err := w.flushRowGroup(); err != nil {
				return err
			}
			continue
		}
		k := min(b.Rows-start, chunkRows, t-w.inRG)
		// Each column encodes and compresses its own pages, so the
		// columns are written side by side; the bytes do not depend on it.
		if err := w.columns(func(j int) error {
			if w.chunks[j] == nil {
				return nil
			}
			return w.add(j, &b.Cols[j], start, k, first)
		}); err != nil {
			return err
		}
		start += k
		w.inRG += k
		w.rows += int64(k)
		if w.inRG == t {
			if err := w.flushRowGroup(); err != nil {
				return err
			}
		}
	}
	return nil
}

// add hands rows start..start+k of c to column j's encoder, converted to
// field j's kind.
func (w *writer) add(j int, c *table.Column, start, k int, first int64) error {
	f := &w.fields[j]
	ch := w.chunks[j]
	bad := func(i int, err error) error {
		e := &table.DataError{File: w.dataName, Row: first + int64(start+i), Column: f.Name, Err: err}
		if w.lines != nil {
			e.Line = w.lines[start+i]
		}
		return e
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
	wrap := func(err error) error {
		if err != nil {
			return fmt.Errorf("%s: column %q: %w", w.name, f.Name, err)
		}
		return nil
	}
	// Parquet text is UTF-8: text values are checked (numbers and
	// booleans converted to text are ASCII).
	if f.Kind == table.String && w.utf8 != nil && !w.binary[j] {
		if i := w.utf8[j].Invalid(c, start, k); i >= 0 {
			if w.refuse {
				return bad(i, table.NotUTF8(c.Bytes(start+i)))
			}
			w.binary[j] = true // KeepBytes: no STRING annotation
		}
	}
	// The common cases: the column's form matches the kind.
	switch {
	case f.Kind == table.Int64 && c.Form == table.FormInt64:
		return wrap(ch.appendInts(c.Ints[start:start+k], nulls))
	case f.Kind == table.Float64 && c.Form == table.FormFloat64:
		return wrap(ch.appendFloats(c.Floats[start:start+k], nulls))
	case f.Kind == table.Bool && c.Form == table.FormBool:
		return wrap(ch.appendBools(c.Bools[start:start+k], nulls))
	case f.Kind == table.String && c.Form == table.FormDict:
		return wrap(ch.appendDict(c.Dict, c.Indices[start:start+k], nulls))
	case f.Kind == table.String:
		// Numbers and booleans are written as their canonical text.
		for i := 0; i < k; i++ {
			if nulls != nil && nulls[i] {
				if err := ch.null(); err != nil {
					return wrap(err)
				}
				continue
			}
			var v []byte
			if c.Form == table.FormText {
				v = c.Data[c.Offsets[start+i]:c.Offsets[start+i+1]]
			} else {
				w.text[j] = c.AppendText(w.text[j][:0], start+i)
				v = w.text[j]
			}
			if err := ch.appendText(v); err != nil {
				return wrap(err)
			}
		}
		return nil
	}
	// Conversions between kinds: text parsed, numbers converted.
	nl := grow(w.nulls[j], k)
	w.nulls[j] = nl
	anyNull := false
	for i := 0; i < k; i++ {
		nl[i] = nulls != nil && nulls[i]
		anyNull = anyNull || nl[i]
	}
	switch f.Kind {
	case table.Int64:
		vals, nl, i, err := convertRows(&w.ints[j], nl, anyNull, c, start, f.Nullable, intAt)
		if err != nil {
			return bad(i, err)
		}
		return wrap(ch.appendInts(vals, nl))
	case table.Float64:
		vals, nl, i, err := convertRows(&w.floats[j], nl, anyNull, c, start, f.Nullable, floatAt)
		if err != nil {
			return bad(i, err)
		}
		return wrap(ch.appendFloats(vals, nl))
	case table.Bool:
		vals, nl, i, err := convertRows(&w.bools[j], nl, anyNull, c, start, f.Nullable, boolAt)
		if err != nil {
			return bad(i, err)
		}
		return wrap(ch.appendBools(vals, nl))
	}
	return fmt.Errorf("%s: column %q: unknown kind %v", w.name, f.Name, f.Kind)
}

// convertRows converts rows start..start+len(nl) of c with at into *buf,
// marking in nl the rows that turn out null (nl marks the null rows of c on
// entry, anyNull whether there is one). It returns the values, nl or nil
// when no row is null, and on failure the failing row's index.
func convertRows[T any](buf *[]T, nl []bool, anyNull bool, c *table.Column, start int, nullable bool,
	at func(*table.Column, int, bool) (T, bool, error)) ([]T, []bool, int, error) {
	vals := grow(*buf, len(nl))
	*buf = vals
	for i := range vals {
		if nl[i] {
			continue
		}
		v, isNull, err := at(c, start+i, nullable)
		if err != nil {
			return nil, nil, i, err
		}
		vals[i], nl[i] = v, isNull
		anyNull = anyNull || isNull
	}
	return vals, nullsOrNil(nl, anyNull), 0, nil
}

func nullsOrNil(nl []bool, any bool) []bool {
	if any {
		return nl
	}
	return nil
}

// flushRowGroup writes the open row group: copied chunks from the Source,
// the others from their encoders, in schema order.
func (w *writer) flushRowGroup() error {
	n := len(w.fields)
	dicts := make([][]byte, n)
	dictSizes := make([]int64, n)
	if err := w.columns(func(j int) error {
		if w.chunks[j] == nil {
			return nil
		}
		var err error
		dicts[j], dictSizes[j], err = w.chunks[j].finish()
		if err != nil {
			return fmt.Errorf("%s: column %q: %w", w.name, w.fields[j].Name, err)
		}
		return nil
	}); err != nil {
		return err
	}
	rg := format.RowGroup{NumRows: int64(w.inRG), Columns: make([]format.ColumnChunk, 0, w.leaves)}
	for _, sl := range w.plan {
		j := sl.field
		if j < 0 || w.chunks[j] == nil {
			// A copied column: its leaf chunks, in schema order.
			if err := w.copyColumn(&rg, sl.src); err != nil {
				return err
			}
			continue
		}
		ch := w.chunks[j]
		start := w.off
		md := format.ColumnMetaData{
			Type:         physical(ch.kind),
			PathInSchema: []string{w.fields[j].Name},
			Codec:        w.codec.id,
			NumValues:    ch.numValues,
			Statistics:   ch.stats(),
		}
		encs := []format.Encoding{format.Plain, format.RLE}
		if dicts[j] != nil {
			encs = append(encs, format.RLEDictionary)
			md.DictionaryPageOffset = w.off
			md.EncodingStats = append(md.EncodingStats, format.PageEncodingStats{PageType: format.DictionaryPage, Encoding: format.Plain, Count: 1})
			if err := w.emit(dicts[j]); err != nil {
				return err
			}
		}
		if ch.dictPages > 0 {
			md.EncodingStats = append(md.EncodingStats, format.PageEncodingStats{PageType: format.DataPage, Encoding: format.RLEDictionary, Count: ch.dictPages})
		}
		if ch.plainPages > 0 {
			md.EncodingStats = append(md.EncodingStats, format.PageEncodingStats{PageType: format.DataPage, Encoding: format.Plain, Count: ch.plainPages})
		}
		md.Encoding = encs
		md.DataPageOffset = w.off
		for _, pg := range ch.pages {
			if err := w.emit(pg); err != nil {
				return err
			}
		}
		md.TotalCompressedSize = w.off - start
		md.TotalUncompressedSize = ch.uncomp + dictSizes[j]
		rg.Columns = append(rg.Columns, format.ColumnChunk{FileOffset: start, MetaData: md})
		rg.TotalByteSize += md.TotalUncompressedSize
		ch.reset(ch.plainRG)
	}
	w.groups = append(w.groups, rg)
	w.rg++
	w.inRG = 0
	return nil
}

// countWriter counts the bytes a copy writes into the writer's offset.
type countWriter struct{ w *writer }

func (c countWriter) Write(b []byte) (int, error) {
	n, err := c.w.out.Write(b)
	c.w.off += int64(n)
	return n, err
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
	w.err = w.close()
	return w.err
}

func (w *writer) close() error {
	if w.src != nil {
		if w.rows != w.src.NumRows() {
			return fmt.Errorf("%s: %d rows written, %s holds %d", w.name, w.rows, w.src.name, w.src.NumRows())
		}
		// The open row group, and any empty ones after it.
		for w.rg < w.src.numGroups() {
			if err := w.flushRowGroup(); err != nil {
				return err
			}
		}
	} else if w.inRG > 0 {
		if err := w.flushRowGroup(); err != nil {
			return err
		}
	}
	for j, b := range w.binary {
		if b { // KeepBytes: bytes, not UTF-8 text
			e := &w.elems[w.elemAt[j]]
			e.ConvertedType, e.LogicalType = thrift.Null[deprecated.ConvertedType]{}, format.LogicalType{}
		}
	}
	root := format.SchemaElement{Name: "manyfold", NumChildren: thrift.New(int32(len(w.plan)))}
	meta := format.FileMetaData{
		Version:   1,
		Schema:    append([]format.SchemaElement{root}, w.elems...),
		NumRows:   w.rows,
		RowGroups: w.groups,
		CreatedBy: "manyfold",
	}
	if meta.RowGroups == nil {
		meta.RowGroups = []format.RowGroup{}
	}
	for range w.leaves {
		meta.ColumnOrders = append(meta.ColumnOrders, format.ColumnOrder{Value: &format.TypeDefinedOrder{}})
	}
	b, err := thrift.Marshal(&compact, &meta)
	if err != nil {
		return fmt.Errorf("%s: encoding the footer: %w", w.name, err)
	}
	b = binary.LittleEndian.AppendUint32(b, uint32(len(b)))
	b = append(b, "PAR1"...)
	return w.emit(b)
}

// bstr views b as a string without copying; the string must not outlive b.
func bstr(b []byte) string { return unsafe.String(unsafe.SliceData(b), len(b)) }

// textValue returns the text of row r for parsing into a number or a
// bool: null is true for empty text in a nullable column; empty text in
// a column that is not nullable is an error.
func textValue(c *table.Column, r int, nullable bool) (b []byte, null bool, err error) {
	b = c.Bytes(r)
	null = len(b) == 0 && nullable
	if !null && len(b) == 0 {
		return nil, false, errEmpty
	}
	return b, null, nil
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
		v, err := table.FloatToInt(c.Floats[r])
		return v, false, err
	case table.FormBool:
		if c.Bools[r] {
			return 1, false, nil
		}
		return 0, false, nil
	}
	b, null, err := textValue(c, r, nullable)
	if err != nil || null {
		return 0, null, err
	}
	v, err := table.ParseInt(b)
	return v, false, err
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
	b, null, err := textValue(c, r, nullable)
	if err != nil || null {
		return 0, null, err
	}
	v, err := table.ParseFloat(b)
	return v, false, err
}

// boolAt returns row r of c as a boolean: numbers must be 0 or 1; text is
// read by table.ParseBool (1, t, T, TRUE, true, True, 0, f, ...), as every
// writer reads it.
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
	b, null, err := textValue(c, r, nullable)
	if err != nil || null {
		return false, null, err
	}
	v, err := table.ParseBool(b)
	return v, false, err
}

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
					// A panic here is a bug of ours: an internal error
					// (exit 1), not a failure to write the output.
					defer guard.Catch(&err)
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
