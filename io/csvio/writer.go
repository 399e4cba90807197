package csvio

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"runtime"

	"manyfold/internal/guard"
	"manyfold/io/table"
)

// WriterOptions controls how NewWriter writes a CSV table.
type WriterOptions struct {
	// Delimiter separates fields: ',', ';', '\t' or '|'; 0 means ','.
	Delimiter byte
}

// writer writes batches as CSV lines; see NewWriter.
type writer struct {
	bw      *bufio.Writer
	delim   byte
	ncols   int
	special [256]bool       // bytes that force quoting
	row     []byte          // the header line
	bufs    [][]byte        // formatted parts of a batch
	floats  [][]*floatTexts // per part, per column: texts of recent floats
	closed  bool
}

// floatSlotBits sets the entries of a floatTexts (2^9).
const floatSlotBits = 9

// floatTexts remembers the text of the floats of one column formatted
// last, direct-mapped by the value's bits. An encoded column repeats few
// values (a level's mean within a fold; the prior of every unique or
// unseen level), and the shortest text that reads back the same is dear to
// find (strconv's Ryu-style search, about 70 ns a value here).
type floatTexts [1 << floatSlotBits]struct {
	bits uint64
	n    uint8    // length of the text; 0: empty
	text [24]byte // the longest is -2.2250738585072014e-308
}

// append appends the text of f (table.AppendFloat) to dst.
func (c *floatTexts) append(dst []byte, f float64) []byte {
	bits := math.Float64bits(f)
	e := &c[(bits*0x9E3779B97F4A7C15)>>(64-floatSlotBits)]
	if e.n != 0 && e.bits == bits {
		return append(dst, e.text[:e.n]...)
	}
	start := len(dst)
	dst = table.AppendFloat(dst, f)
	if n := len(dst) - start; n <= len(e.text) {
		e.bits, e.n = bits, uint8(copy(e.text[:], dst[start:]))
	}
	return dst
}

// NewWriter writes the header line of schema to w and returns a writer for
// the rows. Columns of any form are accepted: text as is, integers in
// decimal, floats in the shortest form that reads back the same, booleans
// as true and false; nulls as empty fields. Output is buffered; Close
// flushes it but does not close w.
func NewWriter(w io.Writer, schema *table.Schema, opts WriterOptions) (table.Writer, error) {
	d, err := checkDelimiter(opts.Delimiter)
	if err != nil {
		return nil, err
	}
	if schema == nil || len(schema.Fields) == 0 {
		return nil, errors.New("csv output needs at least one column")
	}
	cw := &writer{bw: bufio.NewWriterSize(w, 1<<20), delim: d, ncols: len(schema.Fields)}
	for _, b := range []byte{d, '"', '\r', '\n'} {
		cw.special[b] = true
	}
	for i, f := range schema.Fields {
		if i > 0 {
			cw.row = append(cw.row, d)
		}
		cw.row = cw.appendField(cw.row, []byte(f.Name))
	}
	cw.row = append(cw.row, '\n')
	if _, err := cw.bw.Write(cw.row); err != nil {
		return nil, fmt.Errorf("writing csv header: %w", err)
	}
	return cw, nil
}

// needsQuotes reports whether a non-null text value must be quoted.
func (w *writer) needsQuotes(v []byte) bool {
	if len(v) == 0 {
		return true // "" is the empty string; an empty field is null
	}
	if c := v[0]; c == ' ' || c == '\t' {
		return true
	}
	if c := v[len(v)-1]; c == ' ' || c == '\t' {
		return true
	}
	for _, c := range v {
		if w.special[c] {
			return true
		}
	}
	return false
}

// appendField appends the text value v, quoted if needed.
func (w *writer) appendField(dst, v []byte) []byte {
	if !w.needsQuotes(v) {
		return append(dst, v...)
	}
	dst = append(dst, '"')
	for {
		i := bytes.IndexByte(v, '"')
		if i < 0 {
			break
		}
		dst = append(dst, v[:i+1]...)
		dst = append(dst, '"')
		v = v[i+1:]
	}
	dst = append(dst, v...)
	return append(dst, '"')
}

// Write appends the rows of b, one line each.
func (w *writer) Write(b *table.Batch) error {
	if w.closed {
		return errors.New("csv writer: Write after Close")
	}
	if len(b.Cols) != w.ncols {
		return fmt.Errorf("csv writer: batch has %d columns, the schema %d", len(b.Cols), w.ncols)
	}
	for j := range b.Cols {
		if err := checkColumn(&b.Cols[j], b.Rows); err != nil {
			return fmt.Errorf("csv writer: column %d: %w", j+1, err)
		}
	}
	// The rows are formatted in parts side by side, each into a buffer
	// of its own, and the buffers written in order: the bytes do not
	// depend on the number of parts.
	parts := 1
	if b.Rows >= 2*minPartRows {
		parts = min(runtime.GOMAXPROCS(0), b.Rows/minPartRows, maxParts)
	}
	for len(w.bufs) < parts {
		w.bufs = append(w.bufs, nil)
		w.floats = append(w.floats, make([]*floatTexts, w.ncols))
	}
	if parts == 1 {
		w.bufs[0] = w.format(w.bufs[0][:0], b, 0, b.Rows, w.floats[0])
	} else {
		w.formatParts(b, parts)
	}
	for _, buf := range w.bufs[:parts] {
		if _, err := w.bw.Write(buf); err != nil {
			return fmt.Errorf("writing csv: %w", err)
		}
	}
	return nil
}

// Batches of fewer than 2*minPartRows rows are formatted in one part, and
// no batch in more than maxParts.
const (
	minPartRows = 2048
	maxParts    = 8
)

// formatParts formats the rows of b in parts on goroutines of their own.
func (w *writer) formatParts(b *table.Batch, parts int) {
	var g guard.Group // a panic reaches the caller's goroutine
	for p := 0; p < parts; p++ {
		lo, hi := b.Rows*p/parts, b.Rows*(p+1)/parts
		g.Go(func() {
			w.bufs[p] = w.format(w.bufs[p][:0], b, lo, hi, w.floats[p])
		})
	}
	g.Wait()
}

// format appends rows lo..hi of b as CSV lines to dst, with floats' texts
// remembered in floats (one per column, made when first needed).
func (w *writer) format(dst []byte, b *table.Batch, lo, hi int, floats []*floatTexts) []byte {
	for j := range b.Cols {
		if b.Cols[j].Form == table.FormFloat64 && floats[j] == nil {
			floats[j] = new(floatTexts)
		}
	}
	for i := lo; i < hi; i++ {
		for j := range b.Cols {
			if j > 0 {
				dst = append(dst, w.delim)
			}
			c := &b.Cols[j]
			if c.IsNull(i) {
				continue
			}
			switch c.Form {
			case table.FormText, table.FormDict:
				dst = w.appendField(dst, c.Bytes(i))
			case table.FormFloat64:
				dst = floats[j].append(dst, c.Floats[i])
			default:
				dst = c.AppendText(dst, i)
			}
		}
		dst = append(dst, '\n')
	}
	return dst
}

// checkColumn makes sure c holds rows values in its form, so that writing
// cannot index out of range.
func checkColumn(c *table.Column, rows int) error {
	if c.Nulls != nil && len(c.Nulls) < rows {
		return fmt.Errorf("%d null flags for %d rows", len(c.Nulls), rows)
	}
	n := c.Len()
	switch c.Form {
	case table.FormText:
		if n < rows {
			break
		}
		if last := c.Offsets[rows]; last < 0 || int(last) > len(c.Data) {
			return fmt.Errorf("offset %d beyond %d data bytes", last, len(c.Data))
		}
		for i := 0; i < rows; i++ {
			if c.Offsets[i] > c.Offsets[i+1] || c.Offsets[i] < 0 {
				return fmt.Errorf("offsets decrease at row %d", i+1)
			}
		}
		return nil
	case table.FormDict:
		if n < rows {
			break
		}
		if c.Dict == nil {
			return errors.New("dictionary form without a dictionary")
		}
		size := int32(c.Dict.Len())
		for i := 0; i < rows; i++ {
			if x := c.Indices[i]; (x < 0 || x >= size) && !c.IsNull(i) {
				return fmt.Errorf("row %d: index %d outside a dictionary of %d entries", i+1, x, size)
			}
		}
		return nil
	case table.FormInt64, table.FormFloat64, table.FormBool:
		if n < rows {
			break
		}
		return nil
	default:
		return fmt.Errorf("unknown form %d", c.Form)
	}
	return fmt.Errorf("%d values for %d rows", n, rows)
}

// Close flushes the buffered output. It does not close the underlying
// writer. Closing twice is harmless.
func (w *writer) Close() error {
	if w.closed {
		return nil
	}
	w.closed = true
	if err := w.bw.Flush(); err != nil {
		return fmt.Errorf("writing csv: %w", err)
	}
	return nil
}
