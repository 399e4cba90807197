package table

import (
	"fmt"
	"io"
)

// memName names a memory table in errors, where a reader of a file names
// the file.
const memName = "memory table"

// NewMemReader returns a Reader of a table held in memory: schema, then the
// given batches in order, each once, then io.EOF. It is for tests and for
// callers that build a table themselves. Every batch must hold one column
// per field of schema, each of Rows values in any physical form; Next
// checks the batch's shape (column count, lengths, text offsets, dictionary
// indices, nulls and lines per row) and returns an error wrapping
// ErrCorrupt rather than hand on a batch that would make a consumer index
// out of range. The reader numbers the rows itself: the FirstRow of a batch
// it returns is one more than the rows of the batches before it, whatever
// the given batch says. Select restricts the schema and the columns of every
// later batch, as the Reader contract says; the caller's batches are not
// modified. Empty batches (Rows 0) are returned like the others.
func NewMemReader(schema *Schema, batches ...*Batch) Reader {
	m := &memReader{full: schema, batches: batches}
	m.schema.Fields = append([]Field(nil), schema.Fields...)
	for i := range schema.Fields {
		m.sel = append(m.sel, i)
	}
	return m
}

// memReader is the Reader of NewMemReader.
type memReader struct {
	full    *Schema
	schema  Schema // the selected columns
	sel     []int  // positions in full of the selected columns
	batches []*Batch
	next    int   // the batch Next returns
	rows    int64 // rows returned so far
	started bool
	closed  bool
	out     Batch
}

// Schema returns the selected columns (all until Select is called).
func (m *memReader) Schema() *Schema { return &m.schema }

// Select restricts the reader to the columns at the given positions of the
// full schema, in that order. A position out of range or given twice, or a
// call after Next, is an error.
func (m *memReader) Select(cols []int) error {
	if m.started {
		return fmt.Errorf("%s: Select called after Next", memName)
	}
	seen := make([]bool, len(m.full.Fields))
	for _, c := range cols {
		if c < 0 || c >= len(m.full.Fields) {
			return fmt.Errorf("%s: column position %d out of range (the table has %d columns)", memName, c, len(m.full.Fields))
		}
		if seen[c] {
			return fmt.Errorf("%s: column %q selected twice", memName, m.full.Fields[c].Name)
		}
		seen[c] = true
	}
	m.sel = append(m.sel[:0], cols...)
	m.schema.Fields = m.schema.Fields[:0]
	for _, c := range cols {
		m.schema.Fields = append(m.schema.Fields, m.full.Fields[c])
	}
	return nil
}

// Next returns the next batch restricted to the selected columns, or io.EOF
// after the last one.
func (m *memReader) Next() (*Batch, error) {
	if m.closed {
		return nil, fmt.Errorf("%s: Next called after Close", memName)
	}
	m.started = true
	if m.next >= len(m.batches) {
		return nil, io.EOF
	}
	b := m.batches[m.next]
	m.next++
	if err := checkMemBatch(b, len(m.full.Fields)); err != nil {
		return nil, fmt.Errorf("%s: batch %d: %w: %v", memName, m.next, ErrCorrupt, err)
	}
	m.out.Rows, m.out.FirstRow, m.out.Lines = b.Rows, m.rows+1, b.Lines
	m.out.Cols = m.out.Cols[:0]
	for _, c := range m.sel {
		m.out.Cols = append(m.out.Cols, b.Cols[c])
	}
	m.rows += int64(b.Rows)
	return &m.out, nil
}

// Close ends the reader; Next fails after it.
func (m *memReader) Close() error {
	m.closed = true
	return nil
}

// checkMemBatch reports what in b does not fit a table of cols columns.
func checkMemBatch(b *Batch, cols int) error {
	if b == nil {
		return fmt.Errorf("nil batch")
	}
	if b.Rows < 0 {
		return fmt.Errorf("%d rows", b.Rows)
	}
	if len(b.Cols) != cols {
		return fmt.Errorf("%d columns, the schema has %d", len(b.Cols), cols)
	}
	if b.Lines != nil && len(b.Lines) != b.Rows {
		return fmt.Errorf("%d lines for %d rows", len(b.Lines), b.Rows)
	}
	for i := range b.Cols {
		if err := checkMemColumn(&b.Cols[i], b.Rows); err != nil {
			return fmt.Errorf("column %d: %v", i+1, err)
		}
	}
	return nil
}

// checkMemColumn reports what in c does not fit rows rows of its form.
func checkMemColumn(c *Column, rows int) error {
	if c.Form > FormBool {
		return fmt.Errorf("unknown form %d", c.Form)
	}
	if n := c.Len(); n != rows {
		return fmt.Errorf("%d values for %d rows", n, rows)
	}
	if c.Nulls != nil && len(c.Nulls) != rows {
		return fmt.Errorf("%d null flags for %d rows", len(c.Nulls), rows)
	}
	switch c.Form {
	case FormText:
		if rows == 0 {
			return nil
		}
		if err := checkOffsets(c.Offsets, len(c.Data)); err != nil {
			return err
		}
	case FormDict:
		if c.Dict == nil {
			return fmt.Errorf("dictionary form without a dictionary")
		}
		if len(c.Dict.Offsets) == 0 {
			return fmt.Errorf("dictionary without offsets")
		}
		if err := checkOffsets(c.Dict.Offsets, len(c.Dict.Data)); err != nil {
			return fmt.Errorf("dictionary: %v", err)
		}
		for i, x := range c.Indices {
			if !c.IsNull(i) && (x < 0 || int(x) >= c.Dict.Len()) {
				return fmt.Errorf("row %d: index %d of a dictionary of %d entries", i+1, x, c.Dict.Len())
			}
		}
	}
	return nil
}

// checkOffsets reports offsets that are negative, decrease or pass the end
// of data.
func checkOffsets(offs []int32, data int) error {
	if offs[0] < 0 || int(offs[0]) > data {
		return fmt.Errorf("offsets start at %d (data of %d bytes)", offs[0], data)
	}
	for i := 1; i < len(offs); i++ {
		if offs[i] < offs[i-1] || int(offs[i]) > data {
			return fmt.Errorf("offset %d is %d (previous %d, data of %d bytes)", i, offs[i], offs[i-1], data)
		}
	}
	return nil
}
