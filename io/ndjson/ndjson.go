// Package ndjson reads newline-delimited JSON tables (also called JSON
// Lines): one JSON object a line, each key a column.
//
// The rules:
//
//   - Each non-blank line holds one object whose values are flat: strings,
//     numbers, true, false or null. A nested object or array is an error
//     naming the line and the key; so is a key given twice in one object,
//     and any text after the object on its line.
//   - The columns are the keys of the first Options.SampleRows non-blank
//     lines (the sample), in the order they first appear. A key missing from
//     a line is null there. A key that first appears after the sample is an
//     error naming its line and the key: the schema is fixed before the
//     first row is delivered, and dropping the key silently would lose data
//     (raise Options.SampleRows to take it in).
//   - Blank lines (spaces, tabs, CR only) are skipped; a UTF-8 byte order
//     mark at the start is dropped. An input with no object is an error
//     wrapping table.ErrEmpty.
//   - Kinds are inferred from the sample as the CSV reader infers them
//     (csvio.Inference), with one difference: a JSON string is text even if
//     it reads as a number, since the writer of the file said it was one. A
//     column of JSON numbers is int when every number is a decimal int64,
//     float otherwise (text when a number is an integer beyond int64 or
//     overflows a float); true and false make a bool column. Options.Types
//     and Options.TypesIfPresent override the inferred kinds. Past the
//     sample, every value must read as its column's kind (csvio.CheckValue),
//     or the error is a *table.DataError holding a *csvio.KindError.
//   - Every column is delivered as text (table.FormText): strings unescaped,
//     numbers as written, booleans as true and false.
//   - A line may hold at most Options.MaxLineBytes bytes; a longer one is an
//     error naming its line, found before more of it is held in memory. The
//     sample holds at most 64 MiB of lines.
//
// Bad data is reported as a *table.DataError naming the file, the line
// and, where known, the key. Compressed input is not read (decompress it
// first, or convert the table to CSV).
package ndjson

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"sort"

	"manyfold/internal/param"
	"manyfold/io/csvio"
	"manyfold/io/table"
)

// Options controls how NewReader reads a table.
type Options struct {
	// Types overrides the inferred kind of the columns it names; a name
	// that no key of the sample has is an error (csvio.ErrTypeColumn).
	Types map[string]table.Kind
	// TypesIfPresent sets the kind of the columns it names that the
	// sample has; other names are ignored. Types wins.
	TypesIfPresent map[string]table.Kind
	// SampleRows is the number of lines whose keys make the columns and
	// whose values set their kinds; values below 1 mean 10000.
	SampleRows int
	// BatchRows is the number of rows per batch; values below 1 mean 65536.
	BatchRows int
	// MaxLineBytes bounds the bytes of one line; values below 1 mean
	// csvio.DefaultMaxFieldBytes. Messages name it as
	// csvio.ParamMaxFieldBytes, the option tableio sets it from.
	MaxLineBytes int
}

const (
	defaultSampleRows = 10000
	defaultBatchRows  = 65536
	// maxSampleBytes bounds the bytes of the lines held for the sample.
	maxSampleBytes = 64 << 20
	// maxBatchBytes ends a batch early so that int32 offsets cannot
	// overflow.
	maxBatchBytes = 1 << 30
)

// maxBatchCells ends a batch early when its rows times its columns pass
// it: a line of a few bytes ({}) still costs every column an offset and a
// null flag, so a table of many keys and short lines would otherwise take
// memory out of proportion to its input. Tests lower it.
var maxBatchCells = 1 << 26

// Errors wrapped by the reader's data errors; tests tell them apart with
// errors.Is.
var (
	// ErrNested: a value is an object or an array.
	ErrNested = errors.New("nested value")
	// ErrNewKey: a key that the sample's lines do not have.
	ErrNewKey = errors.New("key not in the first lines")
	// ErrSyntax: the line is not one flat JSON object.
	ErrSyntax = errors.New("not a JSON object")
	// ErrLineSize: a line longer than Options.MaxLineBytes.
	ErrLineSize = errors.New("line too long")
)

// column holds one output column of the current batch.
type column struct {
	data  []byte
	offs  []int32 // offs[i+1] ends row i
	nulls []bool
	null  bool // some row is null
	set   int  // the row that set the column last, for duplicate keys
}

// line is one held line of the sample.
type line struct {
	no   int64
	text []byte
}

// Reader reads a newline-delimited JSON table as batches of text columns.
// It implements table.Reader.
type Reader struct {
	name    string
	br      *bufio.Reader
	maxLine int
	buf     []byte // the line being read
	lineNo  int64  // lines read so far
	eof     bool

	held []line // sample lines not delivered yet

	fields []table.Field  // every key, in order of first appearance
	index  map[string]int // key -> position in fields
	sel    []int          // position in fields -> output column, or -1
	schema table.Schema   // the selected columns
	cols   []column       // per output column
	bcols  []table.Column // the batch's columns
	batch  table.Batch    //
	lines  []int64        // the batch's lines
	vals   []value        // the values of the line being parsed
	scr    []byte         // unescaped strings of the line being parsed
	rows   int64          // rows delivered
	batchN int            // Options.BatchRows
	kinds  []table.Kind   // the selected columns' kinds
	err    error          // sticky; io.EOF after the last batch
	start  bool           // Next was called
	sample int            // lines in the sample
	stamp  []int64        // per key: the last line that gave it
	parsed int64          // the line parse read last
	gen    int64          // parses so far, for stamp
	later  error          // an error met in the sample, after the held lines
}

// NewReader reads the sample of the table in r, sets up its schema and
// returns a reader for its rows. name names the input in errors. The
// reader does not close r.
func NewReader(r io.Reader, name string, opts Options) (*Reader, error) {
	nr := &Reader{name: name, br: bufio.NewReaderSize(r, 64<<10), maxLine: opts.MaxLineBytes, batchN: opts.BatchRows,
		index: map[string]int{}}
	if nr.maxLine < 1 {
		nr.maxLine = csvio.DefaultMaxFieldBytes
	}
	if nr.batchN < 1 {
		nr.batchN = defaultBatchRows
	}
	sample := opts.SampleRows
	if sample < 1 {
		sample = defaultSampleRows
	}
	if err := nr.readSample(sample, opts); err != nil {
		return nil, err
	}
	all := make([]int, len(nr.fields))
	for i := range all {
		all[i] = i
	}
	nr.selectCols(all)
	return nr, nil
}

// readSample holds the first lines, collects their keys and infers the
// columns' kinds.
func (r *Reader) readSample(n int, opts Options) error {
	var infer []csvio.Inference
	bytesHeld := 0
	for len(r.held) < n && bytesHeld < maxSampleBytes {
		text, err := r.readLine()
		if err == nil {
			err = r.sampleLine(text, &infer)
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			if len(r.fields) == 0 {
				return err
			}
			// Next delivers the rows before the bad line first.
			r.later = err
			break
		}
		r.held = append(r.held, line{r.lineNo, append([]byte(nil), text...)})
		bytesHeld += len(text)
	}
	if len(r.fields) == 0 {
		return &table.DataError{File: r.name, Err: table.ErrEmpty}
	}
	r.sample = len(r.held)
	for i := range r.fields {
		r.fields[i].Kind = infer[i].Kind()
	}
	return r.override(opts)
}

// sampleLine parses a line of the sample, adding its new keys to the
// fields and its values to their kinds' inference.
func (r *Reader) sampleLine(text []byte, infer *[]csvio.Inference) error {
	if err := r.parse(r.lineNo, text); err != nil {
		return err
	}
	for _, v := range r.vals {
		i, ok := r.index[string(v.key)]
		if !ok {
			i = len(r.fields)
			r.index[string(v.key)] = i
			r.fields = append(r.fields, table.Field{Name: string(v.key), Nullable: true})
			*infer = append(*infer, csvio.Inference{})
			r.stamp = append(r.stamp, 0)
		}
		if err := r.once(i, v.key); err != nil {
			return err
		}
		switch v.kind {
		case jsonNull:
		case jsonString:
			(*infer)[i].AddText()
		default:
			(*infer)[i].Add(v.text)
		}
	}
	return nil
}

// override applies Options.Types and Options.TypesIfPresent.
func (r *Reader) override(opts Options) error {
	names := make([]string, 0, len(opts.Types))
	for name := range opts.Types {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		i, ok := r.index[name]
		if !ok {
			return &table.DataError{File: r.name, Column: name, Err: csvio.ErrTypeColumn}
		}
		k := opts.Types[name]
		if k > table.Bool {
			return &table.DataError{File: r.name, Column: name, Err: fmt.Errorf("unknown kind %v", k)}
		}
		r.fields[i].Kind = k
	}
	for name, k := range opts.TypesIfPresent {
		if _, forced := opts.Types[name]; forced || k > table.Bool {
			continue
		}
		if i, ok := r.index[name]; ok {
			r.fields[i].Kind = k
		}
	}
	return nil
}

// readLine returns the next non-blank line, without its line end, valid
// until the next call; io.EOF after the last.
func (r *Reader) readLine() ([]byte, error) {
	for {
		if r.eof {
			return nil, io.EOF
		}
		r.buf = r.buf[:0]
		r.lineNo++
		for {
			part, err := r.br.ReadSlice('\n')
			if r.lineBytes(part) > r.maxLine {
				return nil, &table.DataError{File: r.name, Line: r.lineNo,
					Err: param.Errorf("%v: longer than %s (%d bytes)", ErrLineSize, csvio.ParamMaxFieldBytes, r.maxLine)}
			}
			r.buf = append(r.buf, part...)
			if err == bufio.ErrBufferFull {
				continue
			}
			if err == io.EOF {
				r.eof = true
				break
			}
			if err != nil {
				return nil, &table.DataError{File: r.name, Line: r.lineNo, Err: fmt.Errorf("reading: %w", err)}
			}
			break
		}
		text := r.buf
		if r.lineNo == 1 {
			text = bytes.TrimPrefix(text, []byte("\xef\xbb\xbf"))
		}
		if len(bytes.Trim(text, " \t\r\n")) > 0 {
			return text, nil
		}
	}
}

// lineBytes returns the bytes of the line read so far with part, without
// its line end (LF or CRLF; a CR that part ends with may begin one).
func (r *Reader) lineBytes(part []byte) int {
	n := len(r.buf) + len(part)
	if n > 0 && part[len(part)-1] == '\n' {
		n--
		if n > 0 && (len(part) > 1 && part[len(part)-2] == '\r' || len(part) == 1 && len(r.buf) > 0 && r.buf[len(r.buf)-1] == '\r') {
			n--
		}
	} else if n > 0 && part[len(part)-1] == '\r' {
		n--
	}
	return n
}

// Schema returns the columns, restricted by Select if it was called.
func (r *Reader) Schema() *table.Schema { return &r.schema }

// Select restricts the schema and every later batch to the columns at the
// given positions of the full schema, in that order. It must be called
// before the first Next and a position may appear only once.
func (r *Reader) Select(cols []int) error {
	if r.start {
		return fmt.Errorf("%s: Select called after Next", r.name)
	}
	seen := make([]bool, len(r.fields))
	for _, c := range cols {
		if c < 0 || c >= len(r.fields) {
			return fmt.Errorf("%s: column position %d out of range (the table has %d columns)", r.name, c, len(r.fields))
		}
		if seen[c] {
			return fmt.Errorf("%s: column %q selected twice", r.name, r.fields[c].Name)
		}
		seen[c] = true
	}
	r.selectCols(cols)
	return nil
}

func (r *Reader) selectCols(cols []int) {
	r.sel = make([]int, len(r.fields))
	for i := range r.sel {
		r.sel[i] = -1
	}
	r.schema.Fields = make([]table.Field, len(cols))
	r.cols = make([]column, len(cols))
	r.kinds = make([]table.Kind, len(cols))
	for k, c := range cols {
		r.sel[c] = k
		r.schema.Fields[k] = r.fields[c]
		r.kinds[k] = r.fields[c].Kind
	}
}

// Next returns the next batch of rows, or io.EOF after the last one. When
// bad data is met, the rows before it are returned first and the error
// (a *table.DataError) comes with the following call.
func (r *Reader) Next() (*table.Batch, error) {
	r.start = true
	if r.err != nil {
		return nil, r.err
	}
	for i := range r.cols {
		c := &r.cols[i]
		c.data, c.offs, c.nulls, c.null, c.set = c.data[:0], append(c.offs[:0], 0), c.nulls[:0], false, -1
	}
	r.lines = r.lines[:0]
	rows, size := 0, 0
	for rows < r.batchN && size < maxBatchBytes && (rows+1)*len(r.cols) <= max(maxBatchCells, len(r.cols)) {
		no, text, err := r.nextLine()
		if err == nil {
			err = r.row(rows, no, text)
		}
		if err != nil {
			r.err = err
			r.truncate(rows)
			break
		}
		r.lines = append(r.lines, no)
		size += len(text)
		rows++
	}
	if rows == 0 {
		return nil, r.err
	}
	b := &r.batch
	b.Rows, b.FirstRow, b.Lines = rows, r.rows+1, r.lines
	r.rows += int64(rows)
	r.bcols = r.bcols[:0]
	for i := range r.cols {
		c := &r.cols[i]
		col := table.Column{Form: table.FormText, Data: c.data, Offsets: c.offs}
		if c.null {
			col.Nulls = c.nulls
		}
		r.bcols = append(r.bcols, col)
	}
	b.Cols = r.bcols
	return b, nil
}

// nextLine returns the next line: a held one of the sample first.
func (r *Reader) nextLine() (int64, []byte, error) {
	if len(r.held) > 0 {
		l := r.held[0]
		r.held[0] = line{}
		r.held = r.held[1:]
		return l.no, l.text, nil
	}
	if r.later != nil {
		return 0, nil, r.later
	}
	text, err := r.readLine()
	return r.lineNo, text, err
}

// row parses the line text (line no) into row i of the columns.
func (r *Reader) row(i int, no int64, text []byte) error {
	if err := r.parse(no, text); err != nil {
		return err
	}
	for _, v := range r.vals {
		f, ok := r.index[string(v.key)]
		if !ok {
			return &table.DataError{File: r.name, Line: no, Row: r.rows + int64(i) + 1, Column: string(v.key),
				Err: fmt.Errorf("%w: a key that the first %d lines do not have (the columns are their keys)", ErrNewKey, r.sample)}
		}
		if err := r.once(f, v.key); err != nil {
			return err
		}
		k := r.sel[f]
		if k < 0 {
			continue
		}
		c := &r.cols[k]
		if v.kind == jsonNull {
			continue
		}
		if kind := r.kinds[k]; kind != table.String {
			if err := csvio.CheckValue(kind, v.text); err != nil {
				return &table.DataError{File: r.name, Line: no, Row: r.rows + int64(i) + 1, Column: string(v.key),
					Err: &csvio.KindError{Value: string(v.text), Want: kind, Is: csvio.ValueKind(v.text), Err: err}}
			}
		}
		c.data = append(c.data, v.text...)
		c.set = i
	}
	for k := range r.cols {
		c := &r.cols[k]
		null := c.set != i
		c.offs = append(c.offs, int32(len(c.data)))
		c.nulls = append(c.nulls, null)
		c.null = c.null || null
	}
	return nil
}

// once refuses a key given twice on the line being parsed: key, at
// position f of the fields.
func (r *Reader) once(f int, key []byte) error {
	if r.stamp[f] == r.gen {
		return &table.DataError{File: r.name, Line: r.parsed, Column: string(key), Err: fmt.Errorf("%w: the key is given twice", ErrSyntax)}
	}
	r.stamp[f] = r.gen
	return nil
}

// truncate drops whatever a failed row appended after the first rows.
func (r *Reader) truncate(rows int) {
	for k := range r.cols {
		c := &r.cols[k]
		c.offs = c.offs[:rows+1]
		c.nulls = c.nulls[:rows]
		c.data = c.data[:c.offs[rows]]
		c.null = false
		for _, n := range c.nulls {
			c.null = c.null || n
		}
	}
}

// Close releases the reader's buffers; it does not close the input.
func (r *Reader) Close() error {
	r.held, r.cols, r.buf = nil, nil, nil
	return nil
}
