// Package pqio reads and writes Parquet files as manyfold tables.
//
// # Reading
//
// Open reads the footer of a Parquet file and exposes its flat columns as a
// table.Schema. Only top-level primitive columns are read: a nested column
// (a struct, a list or a map) is left out of the schema, so the rest of the
// file stays usable, and Nested lists it. A file whose columns are all
// nested gives an error wrapping table.ErrEmpty. The physical and logical
// types map to kinds as follows:
//
//   - BYTE_ARRAY (strings, enums, JSON, raw bytes) and FIXED_LEN_BYTE_ARRAY
//     (their raw bytes) give text;
//   - INT32 and INT64 give int, except the dates, timestamps and unsigned
//     64-bit integers below: a time of day is its integer count of units, a
//     decimal its unscaled integer; an unsigned 32-bit integer keeps its
//     value;
//   - a DATE (logical or converted type) gives text, its ISO 8601 date
//     (2026-12-04); a TIMESTAMP (logical type of any unit, or the
//     TIMESTAMP_MILLIS and TIMESTAMP_MICROS converted types) and the legacy
//     INT96 timestamp give text, ISO 8601 date and time with the fraction
//     of a second only when it is not zero, to at most the unit's digits,
//     trailing zeros dropped, and a Z when the timestamp is adjusted to UTC
//     (2026-12-04T17:58:01Z, 2026-12-04T17:58:01.25Z; a local wall clock
//     time has no zone: 2026-12-04T17:58:01). A Parquet output that copies
//     such a column chunk by chunk (WriterOptions.Copy) keeps its type;
//   - an unsigned 64-bit integer (INT64 with the unsigned integer logical
//     type or the UINT_64 converted type) gives text, its unsigned decimal,
//     as values above 2^63-1 do not fit an int: its levels are the texts a
//     CSV file of the same numbers holds;
//   - FLOAT and DOUBLE give float;
//   - BOOLEAN gives bool.
//
// The reader yields at most 65536 rows per batch, and a batch never
// spans two row groups, so its memory is bounded by the row group size
// rather than the file's. A text column whose pages in the batch are all
// dictionary encoded comes as table.FormDict, with a Dict copied from the
// column chunk's dictionary once per chunk and a non-zero ID unique to that
// chunk; otherwise (PLAIN pages, or a chunk that fell back from dictionary
// to PLAIN part way) the batch's text comes as table.FormText. Other
// columns come as FormInt64, FormFloat64 or FormBool. Select restricts the
// reader to some columns: the column chunks of the others are never read.
//
// Errors name the file, and the column where one is involved. A file whose
// structure is broken (a truncated footer, a bad page, a dictionary index
// out of range) gives an error wrapping table.ErrCorrupt; a panic inside the
// Parquet decoder is turned into such an error.
//
// # Writing
//
// NewWriter writes a table in the order of its schema's fields, as optional
// columns where the field is Nullable: text as UTF-8 BYTE_ARRAY, int as
// INT64, float as DOUBLE, bool as BOOLEAN. The pages are encoded here, not
// by a Parquet library: format version 1 data pages whose definition
// levels, for an optional column, and dictionary indices use the RLE /
// bit-packing hybrid; values PLAIN, but text dictionary encoded while its
// dictionary stays within 1 MiB per row group (a column that outgrows it
// finishes the row group PLAIN and starts the next one PLAIN, as a nearly
// unique column would only pay for a dictionary it never reuses). Pages
// hold up to 1 MiB of values and are compressed with Snappy by default.
// Each column chunk records its null count and, for numbers and text, its
// minimum and maximum (type-defined order). The columns of a batch are
// encoded side by side, one goroutine per column; the bytes do not depend
// on it. Row groups hold WriterOptions.RowGroupRows rows.
//
// With WriterOptions.Source, columns of an existing Parquet file of the same
// rows are copied into the output chunk by chunk, still encoded and
// compressed, and the output takes the Source's row groups: this is how
// manyfold writes the input's columns back beside the encoded ones without
// decoding them (see Source).
//
// A batch's columns may come in any form. Text written to an int column
// must be a decimal integer (or a number with no fractional part), to a
// float column a number as table.ParseFloat reads it, to a bool column
// what strconv.ParseBool accepts; empty text is a null in a nullable
// numeric or bool column. Numbers and booleans written to a text column
// become their canonical text. A value that does not convert, or a null in
// a column that is not Nullable, gives a *table.DataError naming the row
// and the column.
package pqio

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"strconv"
	"sync/atomic"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/deprecated"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// batchRows is the largest number of rows in a batch (a variable so that
// tests can make batches small).
var batchRows int64 = 1 << 16

// dictIDs hands out Dict IDs, unique across every reader in the process.
var dictIDs atomic.Uint64

// leaf describes one flat column of the file.
type leaf struct {
	name    string
	kind    table.Kind
	index   int // leaf column index in the file
	maxDef  byte
	phys    parquet.Kind
	uint32s bool // INT32 holding unsigned values
	// toText, when set, reads an integer column as text: unsigned 64-bit
	// integers as decimals, dates and timestamps as ISO 8601 (timeText).
	toText textOf
}

// Reader reads a Parquet file as a table. It implements table.Reader.
type Reader struct {
	path     string
	file     *os.File // nil when reading from an io.ReaderAt given by a test
	pf       *parquet.File
	ra       io.ReaderAt // the file, for the page checks
	size     int64
	leaves   []leaf // one per field of the full schema
	full     table.Schema
	schema   table.Schema
	sel      []int
	cols     []colReader
	batch    table.Batch
	started  bool
	rg       int   // next row group to start
	rgLeft   int64 // rows left in the current row group
	nextRow  int64 // 1-based number of the next row
	err      error // sticky error from Next
	closed   bool
	curIndex int      // column being read, for panic messages
	nested   []Nested // top-level columns left out of the table
}

// openSized opens the file at path and returns its size.
func openSized(path string) (*os.File, int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, 0, err
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, 0, err
	}
	return f, st.Size(), nil
}

// Open opens the Parquet file at path and reads its footer.
func Open(path string) (*Reader, error) {
	f, size, err := openSized(path)
	if err != nil {
		return nil, err
	}
	r, err := openReaderAt(path, f, size)
	if err != nil {
		f.Close()
		return nil, err
	}
	r.file = f
	return r, nil
}

// openReaderAt opens a Parquet file of the given size read through ra;
// name is used in errors.
func openReaderAt(name string, ra io.ReaderAt, size int64) (r *Reader, err error) {
	if size == 0 {
		return nil, fmt.Errorf("%s: %w", name, table.ErrEmpty)
	}
	defer func() {
		if p := recover(); p != nil {
			r, err = nil, fmt.Errorf("%s: %w: reading the footer: %v", name, table.ErrCorrupt, p)
		}
	}()
	if err := checkFooter(name, ra, size); err != nil {
		return nil, err
	}
	pf, err := parquet.OpenFile(ra, size, parquet.SkipPageIndex(true), parquet.SkipBloomFilters(true))
	if err != nil {
		if isIOError(err) {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		return nil, fmt.Errorf("%s: %w: %w", name, table.ErrCorrupt, err)
	}
	r = &Reader{path: name, pf: pf, ra: ra, size: size}
	if err := r.readSchema(); err != nil {
		return nil, err
	}
	for _, rg := range pf.RowGroups() {
		if n := len(rg.ColumnChunks()); n != len(pf.Schema().Columns()) {
			return nil, fmt.Errorf("%s: %w: a row group has %d column chunks for %d columns",
				name, table.ErrCorrupt, n, len(pf.Schema().Columns()))
		}
	}
	if err := checkRowCounts(pf.Metadata()); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	all := make([]int, len(r.leaves))
	for i := range all {
		all[i] = i
	}
	r.setSelection(all)
	return r, nil
}

// checkFooter checks the footer's length before the decoder allocates a
// buffer of that size (a damaged length would otherwise cost up to 4 GiB),
// then its structure (see checkThrift).
func checkFooter(name string, ra io.ReaderAt, size int64) error {
	var tail [8]byte
	if size < 12 {
		return fmt.Errorf("%s: %w: %d bytes is too short for a Parquet file", name, table.ErrCorrupt, size)
	}
	if _, err := ra.ReadAt(tail[:], size-8); err != nil {
		return fmt.Errorf("%s: reading the footer: %w", name, err)
	}
	if string(tail[4:]) != "PAR1" {
		return fmt.Errorf("%s: %w: no Parquet magic at the end of the file", name, table.ErrCorrupt)
	}
	n := int64(binary.LittleEndian.Uint32(tail[:4]))
	if n+12 > size {
		return fmt.Errorf("%s: %w: footer of %d bytes in a file of %d", name, table.ErrCorrupt, n, size)
	}
	footer := make([]byte, n)
	if _, err := ra.ReadAt(footer, size-8-n); err != nil {
		return fmt.Errorf("%s: reading the footer: %w", name, err)
	}
	if err := checkThrift(footer); err != nil {
		return fmt.Errorf("%s: %w: %w", name, table.ErrCorrupt, err)
	}
	return nil
}

// isIOError reports whether err comes from reading the file rather than
// from its content.
func isIOError(err error) bool {
	var pe *fs.PathError
	return errors.As(err, &pe)
}

// readSchema fills r.leaves and r.full from the file's schema. Levels come
// from the file's column tree, which is what the page decoder uses: the
// schema's Lookup counts a root marked repeated (as some writers mark it)
// and would give levels one too high.
func (r *Reader) readSchema() error {
	root := r.pf.Root()
	tops, err := topColumns(r.pf.Metadata().Schema)
	if err != nil {
		return fmt.Errorf("%s: %w", r.path, err)
	}
	if len(tops) != len(root.Columns()) {
		return fmt.Errorf("%s: %w: the schema has %d top-level columns, the file's tree %d", r.path, table.ErrCorrupt, len(tops), len(root.Columns()))
	}
	for i, col := range root.Columns() {
		if tops[i].kind != "" || !col.Leaf() || col.Repeated() || col.MaxRepetitionLevel() > 0 {
			// A group, a list or a map: never read, but listed.
			kind := tops[i].kind
			if kind == "" {
				kind = "struct"
			}
			r.nested = append(r.nested, Nested{Name: col.Name(), Kind: kind, Before: len(r.leaves)})
			continue
		}
		name := col.Name()
		if d := col.MaxDefinitionLevel(); d > 255 || d < 0 {
			return fmt.Errorf("%s: %w: column %q has definition level %d", r.path, table.ErrCorrupt, name, d)
		}
		t := col.Type()
		l := leaf{name: name, index: col.Index(), maxDef: byte(col.MaxDefinitionLevel()), phys: t.Kind()}
		switch l.phys {
		case parquet.ByteArray:
			l.kind = table.String
		case parquet.FixedLenByteArray:
			l.kind = table.String
		case parquet.Int32, parquet.Int64, parquet.Int96:
			l.kind = table.Int64
			l.uint32s = l.phys == parquet.Int32 && isUnsigned(t)
			if l.toText = timeText(t, l.phys); l.toText != nil {
				l.kind = table.String
			}
		case parquet.Float, parquet.Double:
			l.kind = table.Float64
		case parquet.Boolean:
			l.kind = table.Bool
		default:
			return fmt.Errorf("%s: %w: column %q has unknown physical type %v", r.path, table.ErrCorrupt, name, l.phys)
		}
		r.leaves = append(r.leaves, l)
		r.full.Fields = append(r.full.Fields, table.Field{Name: l.name, Kind: l.kind, Nullable: l.maxDef > 0})
	}
	if err := r.checkNames(); err != nil {
		return err
	}
	if len(r.leaves) == 0 {
		if len(r.nested) > 0 {
			return &noFlatError{fmt.Sprintf("%s: no flat columns: its %d columns are all nested (%s); manyfold reads flat columns only",
				r.path, len(r.nested), describeNested(r.nested))}
		}
		return &noFlatError{fmt.Sprintf("%s: the file has no columns", r.path)}
	}
	return nil
}

// checkNames refuses top-level columns with an empty name or a name
// another one has, as the CSV reader refuses such a header: no column
// could be named on the command line or written out.
func (r *Reader) checkNames() error {
	seen := map[string]int{}
	for i, col := range r.pf.Root().Columns() {
		name := col.Name()
		if name == "" {
			return &table.DataError{File: r.path, Err: fmt.Errorf("column %d has an empty name", i+1)}
		}
		if j, ok := seen[name]; ok {
			return &table.DataError{File: r.path, Column: name, Err: fmt.Errorf("named twice, columns %d and %d", j+1, i+1)}
		}
		seen[name] = i
	}
	return nil
}

// Nested returns the file's nested top-level columns (lists, maps and
// structs), which the table leaves out, in file order. Before is the
// position in the full schema (before any Select) of the flat column that
// follows each.
func (r *Reader) Nested() []Nested { return r.nested }

// isUnsigned reports whether an INT32 or INT64 column holds unsigned
// integers.
func isUnsigned(t parquet.Type) bool {
	if lt := t.LogicalType(); lt != nil {
		if it, ok := lt.Value.(*format.IntType); ok {
			return !it.IsSigned
		}
	}
	if ct := t.ConvertedType(); ct != nil {
		switch *ct {
		case deprecated.Uint8, deprecated.Uint16, deprecated.Uint32, deprecated.Uint64:
			return true
		}
	}
	return false
}

// setSelection makes the columns at positions sel of the full schema the
// ones read.
func (r *Reader) setSelection(sel []int) {
	r.sel = sel
	r.schema.Fields = make([]table.Field, len(sel))
	r.cols = make([]colReader, len(sel))
	for i, c := range sel {
		r.schema.Fields[i] = r.full.Fields[c]
		r.cols[i].leaf = &r.leaves[c]
	}
	r.batch.Cols = make([]table.Column, len(sel))
}

// Schema returns the table's columns (after Select, the selected ones).
func (r *Reader) Schema() *table.Schema { return &r.schema }

// NumRows returns the number of rows that the file's footer records, as a
// hint for sizing (the rows read are counted from the pages): at most 8 per
// byte of the file plus sparseValues, so that a damaged footer cannot make
// a caller reserve room for trillions of rows. Only a file of long runs
// (a column of nulls or of one value) holds more rows than that, and its
// levels are then too few for the hint to matter.
func (r *Reader) NumRows() int64 {
	return max(0, min(r.pf.NumRows(), 8*r.size+sparseValues))
}

// Select restricts the reader to the columns at the given positions of the
// full schema, in that order. It must be called before the first Next.
func (r *Reader) Select(cols []int) error {
	if r.started {
		return fmt.Errorf("%s: Select called after Next", r.path)
	}
	seen := make(map[int]bool, len(cols))
	for _, c := range cols {
		if c < 0 || c >= len(r.full.Fields) {
			return fmt.Errorf("%s: no column at position %d (the file has %d)", r.path, c, len(r.full.Fields))
		}
		if seen[c] {
			return fmt.Errorf("%s: column %q selected twice", r.path, r.full.Fields[c].Name)
		}
		seen[c] = true
	}
	r.setSelection(append([]int(nil), cols...))
	return nil
}

// Next returns the next batch of rows, or io.EOF after the last one.
func (r *Reader) Next() (b *table.Batch, err error) {
	if r.err != nil {
		return nil, r.err
	}
	if r.closed {
		return nil, fmt.Errorf("%s: reader is closed", r.path)
	}
	r.started = true
	defer func() {
		if p := recover(); p != nil {
			name := "?"
			if r.curIndex < len(r.cols) {
				name = r.cols[r.curIndex].leaf.name
			}
			b, err = nil, fmt.Errorf("%s: column %q: %w: %v", r.path, name, table.ErrCorrupt, p)
		}
		if err != nil && err != io.EOF {
			r.err = err
			r.closePages()
		}
	}()
	for r.rgLeft == 0 {
		if err := r.endRowGroup(); err != nil {
			return nil, err
		}
		rgs := r.pf.RowGroups()
		if r.rg >= len(rgs) {
			return nil, io.EOF
		}
		rg := rgs[r.rg]
		r.rg++
		r.rgLeft = rg.NumRows()
		if r.rgLeft < 0 {
			return nil, fmt.Errorf("%s: %w: row group %d has %d rows", r.path, table.ErrCorrupt, r.rg, r.rgLeft)
		}
		if r.rgLeft == 0 {
			continue
		}
		chunks := rg.ColumnChunks()
		meta := r.pf.Metadata().RowGroups[r.rg-1].Columns
		for i := range r.cols {
			c := &r.cols[i]
			first := r.pf.Metadata().RowGroups[0].Columns[c.leaf.index].MetaData.Codec
			if err := c.guard.start(r.ra, r.size, &meta[c.leaf.index].MetaData, first, r.rgLeft, c.leaf); err != nil {
				return nil, r.columnError(c, err)
			}
			c.startChunk(chunks[c.leaf.index].Pages())
		}
	}
	n := int(min(r.rgLeft, batchRows))
	if len(r.cols) == 0 {
		// No column selected: rows are still counted.
		r.rgLeft -= int64(n)
		r.batch.Rows, r.batch.FirstRow = n, r.nextRow+1
		r.nextRow += int64(n)
		return &r.batch, nil
	}
	for i := range r.cols {
		r.curIndex = i
		c := &r.cols[i]
		if err := c.fill(n, &r.batch.Cols[i]); err != nil {
			return nil, r.columnError(c, err)
		}
	}
	r.rgLeft -= int64(n)
	r.batch.Rows = n
	r.batch.FirstRow = r.nextRow + 1
	r.nextRow += int64(n)
	return &r.batch, nil
}

// columnError wraps an error met while reading column c.
func (r *Reader) columnError(c *colReader, err error) error {
	where := "row group " + strconv.Itoa(r.rg)
	if errors.Is(err, table.ErrCorrupt) || isIOError(err) {
		return fmt.Errorf("%s: column %q: %s: %w", r.path, c.leaf.name, where, err)
	}
	return fmt.Errorf("%s: column %q: %s: %w: %w", r.path, c.leaf.name, where, table.ErrCorrupt, err)
}

// endRowGroup checks that the columns of the finished row group hold no
// more rows than the footer says, and releases their pages.
func (r *Reader) endRowGroup() error {
	for i := range r.cols {
		c := &r.cols[i]
		if c.pages == nil {
			continue
		}
		extra := c.page != nil && c.pos < c.rows
		c.closePages()
		if extra {
			return fmt.Errorf("%s: column %q: row group %d: %w: more rows than the footer records",
				r.path, c.leaf.name, r.rg, table.ErrCorrupt)
		}
	}
	return nil
}

func (r *Reader) closePages() {
	for i := range r.cols {
		r.cols[i].closePages()
	}
}

// Close releases the reader's pages and closes the file.
func (r *Reader) Close() error {
	if r.closed {
		return nil
	}
	r.closed = true
	r.closePages()
	if r.file != nil {
		return r.file.Close()
	}
	return nil
}

var _ table.Reader = (*Reader)(nil)
