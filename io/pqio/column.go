package pqio

import (
	"errors"
	"fmt"
	"io"
	"math"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/deprecated"
	"github.com/parquet-go/parquet-go/encoding"

	"manyfold/io/table"
)

// errShortChunk: a column chunk ended before the row group's last row.
var errShortChunk = errors.New("column chunk holds fewer rows than the footer records")

// text forms a string column can take within a batch.
const (
	modeNone = iota
	modeDict
	modeText
)

// julianUnixEpoch is the Julian day number of 1970-01-01, used to turn the
// legacy INT96 timestamps (nanoseconds of the day, then the Julian day) into
// nanoseconds since the Unix epoch (layout from memory of the Parquet
// format's notes on INT96).
const julianUnixEpoch = 2440588

// colReader reads one selected column, page by page, into batches.
type colReader struct {
	leaf  *leaf
	pages parquet.Pages
	guard pageGuard // checks each page before pages reads it

	// The current page.
	page parquet.Page
	rows int    // rows in the page
	pos  int    // next row of the page to deliver
	vpos int    // next non-null value of the page to deliver
	defs []byte // definition levels, nil when the page has no null
	dpg  bool   // the page is dictionary encoded (text columns)

	// The current page's non-null values, in the column kind's type.
	idx    []int32 // dictionary indices (text, dictionary page)
	ints   []int64
	floats []float64
	bools  []bool
	text   []byte   // text, plain page: value i is text[toffs[i]:toffs[i+1]]
	toffs  []uint32 // len = values+1
	// Conversion buffers behind the slices above.
	intBuf   []int64
	floatBuf []float64
	boolBuf  []bool
	offBuf   []uint32
	utext    []byte // unsigned 64-bit values as text

	// The column chunk's dictionary, converted once per chunk.
	dictSrc    parquet.Dictionary
	dict       *table.Dict // text columns
	dictInts   []int64
	dictFloats []float64
	dictBools  []bool

	// Output buffers, reused from batch to batch.
	nulls   []bool
	indices []int32
	data    []byte
	offsets []int32
	outInts []int64
	outFlts []float64
	outBool []bool
}

// startChunk begins reading a new column chunk.
func (c *colReader) startChunk(p parquet.Pages) {
	c.closePages()
	c.pages = p
	c.dictSrc, c.dict = nil, nil
}

// releasePage drops the current page.
func (c *colReader) releasePage() {
	if c.page != nil {
		parquet.Release(c.page)
		c.page = nil
	}
	c.rows, c.pos, c.vpos = 0, 0, 0
	c.idx, c.ints, c.floats, c.bools, c.text, c.toffs, c.defs = nil, nil, nil, nil, nil, nil, nil
}

// closePages drops the current page and closes the chunk's page reader.
func (c *colReader) closePages() {
	c.releasePage()
	if c.pages != nil {
		c.pages.Close()
		c.pages = nil
	}
}

// nextPage reads the next page of the chunk and prepares its values.
func (c *colReader) nextPage() error {
	c.releasePage()
	if err := c.guard.next(); err != nil {
		return err
	}
	p, err := c.pages.ReadPage()
	if err == io.EOF {
		return fmt.Errorf("%w: %w", table.ErrCorrupt, errShortChunk)
	}
	if err != nil {
		return err
	}
	c.page = p
	l := c.leaf
	defs := p.DefinitionLevels()
	rows := int(p.NumValues())
	nvals := rows
	if l.maxDef > 0 {
		if len(defs) != rows {
			return fmt.Errorf("%w: page has %d definition levels for %d values", table.ErrCorrupt, len(defs), rows)
		}
		nvals -= int(p.NumNulls()) // counts the levels below maxDef
		if nvals < 0 {
			return fmt.Errorf("%w: page counts more nulls than rows", table.ErrCorrupt)
		}
		if nvals < rows {
			c.defs = defs
		}
	}
	c.rows = rows
	data := p.Data()
	if d := p.Dictionary(); d != nil {
		if d != c.dictSrc {
			if err := c.loadDict(d); err != nil {
				return err
			}
		}
		idx := data.Int32()
		if len(idx) < nvals {
			return fmt.Errorf("%w: page holds %d dictionary indices for %d values", table.ErrCorrupt, len(idx), nvals)
		}
		idx = idx[:nvals]
		if m := maxIndex(idx); len(idx) > 0 && m >= uint32(d.Len()) {
			return fmt.Errorf("%w: dictionary index %d out of range (dictionary has %d entries)", table.ErrCorrupt, m, d.Len())
		}
		switch l.kind {
		case table.String:
			c.idx, c.dpg = idx, true
		case table.Int64:
			buf := grow(c.intBuf, nvals)
			for i, v := range idx {
				buf[i] = c.dictInts[v]
			}
			c.intBuf, c.ints = buf, buf
		case table.Float64:
			buf := grow(c.floatBuf, nvals)
			for i, v := range idx {
				buf[i] = c.dictFloats[v]
			}
			c.floatBuf, c.floats = buf, buf
		case table.Bool:
			buf := grow(c.boolBuf, nvals)
			for i, v := range idx {
				buf[i] = c.dictBools[v]
			}
			c.boolBuf, c.bools = buf, buf
		}
		return nil
	}
	c.dpg = false
	var have int
	switch {
	case l.toText != nil: // integers read as text
		var v []int64
		v, c.intBuf, have = intValues(data, l.phys, nvals, c.intBuf)
		c.utext, c.offBuf = intTexts(c.utext, c.offBuf, v, l.toText)
		c.text, c.toffs = c.utext, c.offBuf
	default:
		var err error
		if have, err = c.plainValues(data, nvals); err != nil {
			return err
		}
	}
	if have < nvals {
		return fmt.Errorf("%w: page holds %d values where its levels promise %d", table.ErrCorrupt, have, nvals)
	}
	return nil
}

// plainValues sets the page's values from data, a page that is not
// dictionary encoded, and returns how many it holds (at least nvals, or
// the page is corrupt).
func (c *colReader) plainValues(data encoding.Values, nvals int) (have int, err error) {
	l := c.leaf
	switch l.phys {
	case parquet.ByteArray:
		c.text, c.toffs = data.ByteArray()
		have = len(c.toffs) - 1
	case parquet.FixedLenByteArray:
		b, size := data.FixedLenByteArray()
		if size <= 0 {
			return 0, fmt.Errorf("%w: fixed-length values of size %d", table.ErrCorrupt, size)
		}
		have = len(b) / size
		c.offBuf = fixedOffsets(c.offBuf, min(have, nvals), size)
		c.text, c.toffs = b, c.offBuf
	case parquet.Int32:
		v := data.Int32()
		have = len(v)
		buf := grow(c.intBuf, min(have, nvals))
		if l.uint32s {
			for i := range buf {
				buf[i] = int64(uint32(v[i]))
			}
		} else {
			for i := range buf {
				buf[i] = int64(v[i])
			}
		}
		c.intBuf, c.ints = buf, buf
	case parquet.Int64:
		c.ints = data.Int64()
		have = len(c.ints)
	case parquet.Float:
		v := data.Float()
		have = len(v)
		buf := grow(c.floatBuf, min(have, nvals))
		for i := range buf {
			buf[i] = float64(v[i])
		}
		c.floatBuf, c.floats = buf, buf
	case parquet.Double:
		c.floats = data.Double()
		have = len(c.floats)
	case parquet.Boolean:
		bits := data.Boolean()
		have = len(bits) * 8
		buf := grow(c.boolBuf, min(have, nvals))
		for i := range buf {
			buf[i] = bits[i>>3]>>(i&7)&1 != 0
		}
		c.boolBuf, c.bools = buf, buf
	}
	return have, nil
}

// maxIndex returns the largest of idx as unsigned values (a negative
// index counts as huge), 0 for none.
func maxIndex(idx []int32) uint32 {
	var m0, m1, m2, m3 uint32
	i := 0
	for ; i+4 <= len(idx); i += 4 {
		m0 = max(m0, uint32(idx[i]))
		m1 = max(m1, uint32(idx[i+1]))
		m2 = max(m2, uint32(idx[i+2]))
		m3 = max(m3, uint32(idx[i+3]))
	}
	for ; i < len(idx); i++ {
		m0 = max(m0, uint32(idx[i]))
	}
	return max(m0, m1, m2, m3)
}

// loadDict converts a column chunk's dictionary to the column's kind.
func (c *colReader) loadDict(d parquet.Dictionary) error {
	c.dictSrc = d
	n := d.Len()
	data := d.Page().Data()
	switch c.leaf.kind {
	case table.String:
		var b []byte
		var offs []uint32
		switch c.leaf.phys {
		case parquet.ByteArray:
			b, offs = data.ByteArray()
		case parquet.FixedLenByteArray:
			var size int
			b, size = data.FixedLenByteArray()
			if size <= 0 || len(b) < n*size {
				return fmt.Errorf("%w: dictionary of %d fixed-length values holds %d bytes", table.ErrCorrupt, n, len(b))
			}
			offs = fixedOffsets(nil, n, size)
		case parquet.Int32, parquet.Int64, parquet.Int96: // dates, timestamps, unsigned
			v, _, have := intValues(data, c.leaf.phys, n, nil)
			if have < n || c.leaf.toText == nil {
				return errShortDict(n, have)
			}
			b, offs = intTexts(nil, nil, v, c.leaf.toText)
		default:
			return fmt.Errorf("%w: dictionary of physical type %v in a text column", table.ErrCorrupt, c.leaf.phys)
		}
		if len(offs) < n+1 {
			return fmt.Errorf("%w: dictionary of %d entries has %d offsets", table.ErrCorrupt, n, len(offs))
		}
		base, end := offs[0], offs[n]
		if end < base || int(end) > len(b) || int64(end-base) > math.MaxInt32 {
			return fmt.Errorf("%w: dictionary offsets out of range", table.ErrCorrupt)
		}
		dict := &table.Dict{
			Data:    append([]byte(nil), b[base:end]...),
			Offsets: make([]int32, n+1),
			ID:      dictIDs.Add(1),
		}
		for i, o := range offs[:n+1] {
			if o < base || o > end || (i > 0 && o < offs[i-1]) {
				return fmt.Errorf("%w: dictionary offsets out of order", table.ErrCorrupt)
			}
			dict.Offsets[i] = int32(o - base)
		}
		c.dict = dict
	case table.Int64:
		c.dictInts = grow(c.dictInts, n)
		switch c.leaf.phys {
		case parquet.Int32:
			conv := func(v int32) int64 { return int64(v) }
			if c.leaf.uint32s {
				conv = func(v int32) int64 { return int64(uint32(v)) }
			}
			return dictValues(c.dictInts, data.Int32(), conv)
		case parquet.Int64:
			return dictValues(c.dictInts, data.Int64(), func(v int64) int64 { return v })
		}
	case table.Float64:
		c.dictFloats = grow(c.dictFloats, n)
		switch c.leaf.phys {
		case parquet.Float:
			return dictValues(c.dictFloats, data.Float(), func(v float32) float64 { return float64(v) })
		case parquet.Double:
			return dictValues(c.dictFloats, data.Double(), func(v float64) float64 { return v })
		}
	case table.Bool:
		bits := data.Boolean()
		if len(bits)*8 < n {
			return errShortDict(n, len(bits)*8)
		}
		c.dictBools = grow(c.dictBools, n)
		for i := range c.dictBools {
			c.dictBools[i] = bits[i>>3]>>(i&7)&1 != 0
		}
	}
	return nil
}

// dictValues fills dst with the first len(dst) dictionary values of src,
// converted.
func dictValues[S, D any](dst []D, src []S, conv func(S) D) error {
	if len(src) < len(dst) {
		return errShortDict(len(dst), len(src))
	}
	for i := range dst {
		dst[i] = conv(src[i])
	}
	return nil
}

func errShortDict(want, have int) error {
	return fmt.Errorf("%w: dictionary of %d entries holds %d values", table.ErrCorrupt, want, have)
}

// int96Nanos converts a legacy INT96 timestamp to nanoseconds since the
// Unix epoch.
func int96Nanos(v deprecated.Int96) int64 {
	nanos := int64(uint64(v[1])<<32 | uint64(v[0]))
	return (int64(v[2])-julianUnixEpoch)*86400_000_000_000 + nanos
}

// fixedOffsets returns the offsets of n values of the given size.
func fixedOffsets(buf []uint32, n, size int) []uint32 {
	buf = grow(buf, n+1)
	for i := range buf {
		buf[i] = uint32(i * size)
	}
	return buf
}

// grow returns buf resized to n, reallocating when it is too small.
func grow[T any](buf []T, n int) []T {
	if cap(buf) < n {
		return make([]T, n, n+n/4)
	}
	return buf[:n]
}

// fill reads the next n rows of the column into out.
func (c *colReader) fill(n int, out *table.Column) error {
	l := c.leaf
	anyNull := false
	mode := modeNone
	switch l.kind {
	case table.String:
		c.data = c.data[:0]
		c.indices = grow(c.indices, n)
		c.offsets = grow(c.offsets, n+1)
		c.offsets[0] = 0
	case table.Int64:
		c.outInts = grow(c.outInts, n)
	case table.Float64:
		c.outFlts = grow(c.outFlts, n)
	case table.Bool:
		c.outBool = grow(c.outBool, n)
	}
	for filled := 0; filled < n; {
		if c.pos >= c.rows {
			if err := c.nextPage(); err != nil {
				return err
			}
			continue
		}
		k := min(n-filled, c.rows-c.pos)
		var nulls []bool // this segment's null marks, nil when none
		if c.defs != nil {
			if !anyNull {
				anyNull = true
				c.nulls = grow(c.nulls, n)
				clear(c.nulls[:filled])
			}
			nulls = c.nulls[filled : filled+k]
			for i, d := range c.defs[c.pos : c.pos+k] {
				nulls[i] = d != l.maxDef
			}
		} else if anyNull {
			clear(c.nulls[filled : filled+k])
		}
		switch l.kind {
		case table.String:
			if c.dpg && mode != modeText {
				mode = modeDict
				c.vpos = expand(c.indices[filled:filled+k], c.idx, c.vpos, nulls)
			} else {
				if mode == modeDict {
					if err := c.dictToText(filled, anyNull); err != nil {
						return err
					}
				}
				mode = modeText
				if err := c.appendText(filled, k, nulls); err != nil {
					return err
				}
			}
		case table.Int64:
			c.vpos = expand(c.outInts[filled:filled+k], c.ints, c.vpos, nulls)
		case table.Float64:
			c.vpos = expand(c.outFlts[filled:filled+k], c.floats, c.vpos, nulls)
		case table.Bool:
			c.vpos = expand(c.outBool[filled:filled+k], c.bools, c.vpos, nulls)
		}
		c.pos += k
		filled += k
	}
	*out = table.Column{}
	if anyNull {
		out.Nulls = c.nulls[:n]
	}
	switch l.kind {
	case table.String:
		if mode == modeDict {
			out.Form, out.Dict, out.Indices = table.FormDict, c.dict, c.indices[:n]
		} else {
			out.Form, out.Data, out.Offsets = table.FormText, c.data, c.offsets[:n+1]
		}
	case table.Int64:
		out.Form, out.Ints = table.FormInt64, c.outInts
	case table.Float64:
		out.Form, out.Floats = table.FormFloat64, c.outFlts
	case table.Bool:
		out.Form, out.Bools = table.FormBool, c.outBool
	}
	return nil
}

// expand copies the page's values src[vpos:] into dst, leaving the zero
// value at null rows, and returns the new vpos.
func expand[T any](dst, src []T, vpos int, nulls []bool) int {
	if nulls == nil {
		return vpos + copy(dst, src[vpos:vpos+len(dst)])
	}
	var zero T
	for i, null := range nulls {
		if null {
			dst[i] = zero
		} else {
			dst[i] = src[vpos]
			vpos++
		}
	}
	return vpos
}

// dictToText rewrites the first rows of the batch, held as dictionary
// indices, as text; anyNull tells whether c.nulls marks them.
func (c *colReader) dictToText(rows int, anyNull bool) error {
	c.data = c.data[:0]
	for i := 0; i < rows; i++ {
		if !anyNull || !c.nulls[i] {
			c.data = append(c.data, c.dict.Entry(int(c.indices[i]))...)
		}
		if len(c.data) > math.MaxInt32 {
			return errTooLong
		}
		c.offsets[i+1] = int32(len(c.data))
	}
	return nil
}

var errTooLong = errors.New("more than 2 GiB of text in one batch")

// appendText appends k rows of the current page as text, at batch rows
// filled..filled+k.
func (c *colReader) appendText(filled, k int, nulls []bool) error {
	for i := 0; i < k; i++ {
		if nulls == nil || !nulls[i] {
			var v []byte
			if c.dpg {
				v = c.dict.Entry(int(c.idx[c.vpos]))
			} else {
				v = c.text[c.toffs[c.vpos]:c.toffs[c.vpos+1]]
			}
			c.vpos++
			c.data = append(c.data, v...)
			if len(c.data) > math.MaxInt32 {
				return errTooLong
			}
		}
		c.offsets[filled+i+1] = int32(len(c.data))
	}
	return nil
}
