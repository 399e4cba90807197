package pqio

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"math/bits"
	"slices"
	"unsafe"

	"github.com/klauspost/compress/s2"
	"github.com/parquet-go/parquet-go/compress/zstd"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// Page and dictionary geometry of the columns the writer encodes
// (variables so that tests can make pages and dictionaries small).
var (
	// pageBytes ends a data page once its encoded values reach it.
	pageBytes = 1 << 20
	// pageValues ends a data page once it holds this many values.
	pageValues = 1 << 17
	// dictMaxBytes bounds a text column's dictionary within a row group;
	// past it the column's remaining pages in the row group are PLAIN, and
	// its next row group starts PLAIN too.
	dictMaxBytes = 1 << 20
)

// dictProbe is the number of values after which a row group's
// dictionary is given up when nearly every value so far (9 in 10 for
// text, 1 in 4 for numbers) was a new entry: a column of nearly unique
// values (an id, a measurement) would only fill the dictionary to
// dictMaxBytes and fall back then, having hashed each of those values for
// nothing. Giving up early on such columns is common practice among
// columnar writers. Numbers give up sooner, as an 8-byte entry saves
// less than a text one.
const dictProbe = 1 << 14

// codec compresses pages.
type codec struct {
	id  format.CompressionCodec
	enc func(dst, src []byte) ([]byte, error)
}

var zstdCodec zstd.Codec

// codecs maps the names WriterOptions.Compression takes to codecs. Snappy
// pages come from the Snappy-compatible block encoder of
// github.com/klauspost/compress/s2 (its fast mode); zstd from that module's
// zstd encoder at its default level.
var codecs = map[string]codec{
	"":             {format.Snappy, func(dst, src []byte) ([]byte, error) { return s2.EncodeSnappy(dst[:cap(dst)], src), nil }},
	"snappy":       {format.Snappy, func(dst, src []byte) ([]byte, error) { return s2.EncodeSnappy(dst[:cap(dst)], src), nil }},
	"zstd":         {format.Zstd, zstdCodec.Encode},
	"none":         {format.Uncompressed, func(dst, src []byte) ([]byte, error) { return append(dst[:0], src...), nil }},
	"uncompressed": {format.Uncompressed, func(dst, src []byte) ([]byte, error) { return append(dst[:0], src...), nil }},
}

// chunk encodes the values of one column for one row group as Parquet data
// pages (format version 1 pages: definition levels, when the column is
// optional, in the RLE / bit-packing hybrid with a 4-byte length prefix,
// then the values), compressed page by page. Text, int64 and float64 are
// dictionary encoded (RLE_DICTIONARY indices, the dictionary PLAIN in a
// dictionary page ahead of the data pages) until the dictionary outgrows
// dictMaxBytes or the probe (dictProbe) finds the values nearly all
// distinct; booleans, and values past that point, are PLAIN. Numbers are
// entered by their bit patterns, so -0 and 0, and NaNs of different
// payloads, stay distinct, as PLAIN keeps them. A chunk records the statistics
// the column chunk's metadata carries: null count and, for numbers and
// text, the minimum and maximum.
type chunk struct {
	kind     table.Kind
	nullable bool
	codec    codec

	// The page being filled.
	defs     []uint32 // definition level of each value (optional columns)
	vals     []byte   // PLAIN-encoded values, not for bool or dictionary pages
	bools    []uint32 // bool values as 0 or 1
	idx      []uint32 // dictionary indices
	pageN    int      // values (nulls included) in the page
	pageDict bool     // the page holds dictionary indices

	// The dictionary of the row group.
	useDict  bool             // values still go to the dictionary
	plainRG  bool             // the dictionary overflowed in this row group
	dict     map[string]int32 // entry -> index
	dictVals []byte           // PLAIN-encoded entries
	dictN    int
	dictSeen int       // values looked up in the dictionary
	srcID    uint64    // Dict.ID the cache below belongs to
	srcMap   []int32   // input dictionary entry -> our index, -1 unknown
	fixed    fixedDict // int64 and float64 entries

	// The encoded chunk.
	pages      [][]byte // compressed data pages, each with its header
	spare      [][]byte // page buffers of earlier row groups, for reuse
	uncomp     int64    // uncompressed size of the pages, headers included
	numValues  int64
	nulls      int64
	plainPages int32
	dictPages  int32 // data pages of dictionary indices
	hasMin     bool
	minI, maxI int64
	minF, maxF float64
	minB, maxB []byte
	body, cbuf []byte // scratch
}

func newChunk(f table.Field, c codec) *chunk {
	ch := &chunk{kind: f.Kind, nullable: f.Nullable, codec: c}
	if f.Kind == table.Int64 || f.Kind == table.Float64 {
		// A page's values in one allocation, not grown by doubling.
		ch.vals = make([]byte, 0, min(pageBytes, 8*pageValues))
	}
	ch.reset(false)
	return ch
}

// reset empties the chunk for the next row group; plain starts it without a
// dictionary (the last row group's overflowed).
func (c *chunk) reset(plain bool) {
	c.defs, c.vals, c.bools, c.idx = c.defs[:0], c.vals[:0], c.bools[:0], c.idx[:0]
	c.pageN = 0
	c.useDict = c.kind != table.Bool && !plain
	c.pageDict = c.useDict
	c.plainRG = false
	if c.useDict && c.kind == table.String {
		if c.dict == nil || len(c.dict) > 0 {
			c.dict = make(map[string]int32)
		}
	}
	c.fixed.reset()
	c.dictVals, c.dictN, c.dictSeen = c.dictVals[:0], 0, 0
	c.srcID, c.srcMap = 0, c.srcMap[:0]
	c.spare = append(c.spare, c.pages...)
	c.pages, c.uncomp = c.pages[:0], 0
	c.numValues, c.nulls, c.plainPages, c.dictPages = 0, 0, 0, 0
	c.hasMin = false
}

// full reports whether the page has reached its size: pageValues values,
// or pageBytes bytes of values (dictionary indices counted at 4 bytes,
// booleans at 1 bit).
func (c *chunk) full() bool {
	return c.pageN >= pageValues || len(c.vals)+4*len(c.idx)+len(c.bools)/8 >= pageBytes
}

// null appends a null.
func (c *chunk) null() error {
	c.defs = append(c.defs, 0)
	c.pageN++
	c.nulls++
	if c.full() {
		return c.flushPage()
	}
	return nil
}

// present marks one more present value.
func (c *chunk) present() {
	if c.nullable {
		c.defs = append(c.defs, 1)
	}
	c.pageN++
}

// appendInts appends vals; nulls, when not nil, marks rows to write as nulls
// (their slots in vals are ignored).
func (c *chunk) appendInts(vals []int64, nulls []bool) error {
	return appendFixed(c, vals, nulls, func(v int64) {
		if !c.hasMin {
			c.minI, c.maxI, c.hasMin = v, v, true
		} else if v < c.minI {
			c.minI = v
		} else if v > c.maxI {
			c.maxI = v
		}
	})
}

// appendFloats is appendInts for float64 values. NaN takes no part in the
// minimum and maximum (Parquet format, statistics of floating-point
// columns); a zero minimum is written as -0 and a zero maximum as +0.
func (c *chunk) appendFloats(vals []float64, nulls []bool) error {
	return appendFixed(c, vals, nulls, func(v float64) {
		if v != v {
			return
		}
		if !c.hasMin {
			c.minF, c.maxF, c.hasMin = v, v, true
		} else if v < c.minF {
			c.minF = v
		} else if v > c.maxF {
			c.maxF = v
		}
	})
}

// appendFixed appends 8-byte values: runs of present values are entered in
// the dictionary, or copied PLAIN, a page's room at a time. stat folds a
// value into the chunk's minimum and maximum; with the dictionary it sees
// each entry once, as the entries are the values.
func appendFixed[T int64 | float64](c *chunk, vals []T, nulls []bool, stat func(T)) error {
	for i := 0; i < len(vals); {
		if nulls != nil && nulls[i] {
			if err := c.null(); err != nil {
				return err
			}
			i++
			continue
		}
		// The run of present values from i, as far as the page has room.
		var room int
		if c.useDict {
			room = max(1, min(pageValues-c.pageN, (pageBytes-4*len(c.idx)+3)/4))
		} else {
			room = max(1, min(pageValues-c.pageN, (pageBytes-len(c.vals)+7)/8))
		}
		j := i + 1
		for j < len(vals) && j-i < room && (nulls == nil || !nulls[j]) {
			j++
		}
		giveUp := false
		if c.useDict {
			var k int
			k, giveUp = enterFixed(c, vals[i:j], stat)
			j = i + k
		} else {
			off := len(c.vals)
			c.vals = slices.Grow(c.vals, 8*(j-i))[:off+8*(j-i)]
			dst := c.vals[off:]
			for k, b := range bitPatterns(vals[i:j]) {
				binary.LittleEndian.PutUint64(dst[8*k:], b)
				stat(vals[i+k])
			}
		}
		if c.nullable {
			for range j - i {
				c.defs = append(c.defs, 1)
			}
		}
		c.pageN += j - i
		i = j
		if giveUp {
			if err := c.fallBack(); err != nil {
				return err
			}
			continue
		}
		if c.full() {
			if err := c.flushPage(); err != nil {
				return err
			}
		}
	}
	return nil
}

// enterFixed appends the dictionary indices of vals, adding new entries,
// and returns how many it appended. giveUp says that the dictionary is to
// be given up after those: it is full (dictMaxBytes), or the probe found
// more than one value in four new.
func enterFixed[T int64 | float64](c *chunk, vals []T, stat func(T)) (n int, giveUp bool) {
	keys := bitPatterns(vals)
	d := &c.fixed
	if cap(c.idx) == 0 {
		// A page's indices in one allocation, not grown by doubling.
		c.idx = make([]uint32, 0, pageValues)
	}
	off := len(c.idx)
	c.idx = slices.Grow(c.idx, len(keys))[:off+len(keys)]
	idx := c.idx[off:]
	for k, b := range keys {
		// Runs of one value (a constant column, sorted data) skip the
		// table.
		if d.n == 0 || b != d.last {
			x, ok := d.find(b)
			if !ok {
				if len(c.dictVals)+8 > dictMaxBytes {
					c.idx = c.idx[:off+k]
					c.dictSeen += k
					return k, true
				}
				x = d.add(b)
				c.dictVals = binary.LittleEndian.AppendUint64(c.dictVals, b)
				c.dictN++
				stat(vals[k])
			}
			d.last, d.lastX = b, x
		}
		idx[k] = d.lastX
	}
	before := c.dictSeen
	c.dictSeen += len(keys)
	probed := before < dictProbe && c.dictSeen >= dictProbe
	return len(keys), probed && c.dictN*4 > c.dictSeen
}

// bitPatterns returns the IEEE 754 or two's-complement bit patterns of
// vals, which PLAIN writes and the dictionary keys on, as a view of the
// same memory.
func bitPatterns[T int64 | float64](vals []T) []uint64 {
	return unsafe.Slice((*uint64)(unsafe.Pointer(unsafe.SliceData(vals))), len(vals))
}

// fixedDict maps the bit patterns of a row group's int64 or float64
// entries to their indices: open addressing, linear probing from the top
// bits of the pattern times 2^64/phi (Fibonacci hashing, Knuth, TAOCP vol.
// 3, 6.4), at most 3/4 full.
type fixedDict struct {
	keys  []uint64
	ids   []uint32 // entry index + 1; 0 marks an empty slot
	shift uint     // 64 - log2(len(ids))
	n     int
	last  uint64 // the last value entered and its index
	lastX uint32
}

const fibonacci = 0x9E3779B97F4A7C15

// reset empties the dictionary, keeping its table.
func (d *fixedDict) reset() {
	clear(d.ids)
	d.n = 0
}

// find returns the index of the entry b.
func (d *fixedDict) find(b uint64) (uint32, bool) {
	if len(d.ids) == 0 {
		return 0, false
	}
	mask := len(d.ids) - 1
	for i := int((b * fibonacci) >> d.shift); ; i = (i + 1) & mask {
		id := d.ids[i]
		if id == 0 {
			return 0, false
		}
		if d.keys[i] == b {
			return id - 1, true
		}
	}
}

// add enters b, which find did not find, and returns its index.
func (d *fixedDict) add(b uint64) uint32 {
	if (d.n+1)*4 > len(d.ids)*3 {
		d.grow()
	}
	d.place(b, uint32(d.n+1))
	d.n++
	return uint32(d.n - 1)
}

// place puts entry b with id (index + 1) in its slot.
func (d *fixedDict) place(b uint64, id uint32) {
	mask := len(d.ids) - 1
	i := int((b * fibonacci) >> d.shift)
	for d.ids[i] != 0 {
		i = (i + 1) & mask
	}
	d.keys[i], d.ids[i] = b, id
}

// grow doubles the table (64 slots at first) and places the entries again.
func (d *fixedDict) grow() {
	keys, ids := d.keys, d.ids
	n := max(64, 2*len(ids))
	d.keys, d.ids = make([]uint64, n), make([]uint32, n)
	d.shift = uint(64 - bits.TrailingZeros(uint(n)))
	for i, id := range ids {
		if id != 0 {
			d.place(keys[i], id)
		}
	}
}

// appendBools is appendInts for booleans.
func (c *chunk) appendBools(vals []bool, nulls []bool) error {
	for i, v := range vals {
		if nulls != nil && nulls[i] {
			if err := c.null(); err != nil {
				return err
			}
			continue
		}
		var b uint32
		if v {
			b = 1
		}
		c.bools = append(c.bools, b)
		c.present()
		if c.full() {
			if err := c.flushPage(); err != nil {
				return err
			}
		}
	}
	return nil
}

// appendText appends one text value.
func (c *chunk) appendText(v []byte) error {
	if c.useDict {
		x, ok, err := c.index(v)
		if err != nil {
			return err
		}
		if ok {
			return c.appendIndex(x)
		}
	}
	return c.appendPlain(v)
}

// index returns the dictionary index of v, adding v if it is new; ok is
// false when the dictionary is full, in which case the chunk has fallen
// back to PLAIN for the rest of the row group.
func (c *chunk) index(v []byte) (x int32, ok bool, err error) {
	c.dictSeen++
	if x, ok := c.dict[bstr(v)]; ok {
		return x, true, nil
	}
	if len(c.dictVals)+4+len(v) > dictMaxBytes || (c.dictSeen == dictProbe && c.dictN*10 >= dictProbe*9) {
		return 0, false, c.fallBack()
	}
	x = int32(c.dictN)
	c.dict[string(v)] = x
	c.dictVals = binary.LittleEndian.AppendUint32(c.dictVals, uint32(len(v)))
	c.dictVals = append(c.dictVals, v...)
	c.dictN++
	// Every value of a dictionary page is an entry, so the entries' bounds
	// are the values' bounds.
	c.textStats(v)
	return x, true, nil
}

// appendIndex appends a value by its dictionary index.
func (c *chunk) appendIndex(x int32) error {
	c.idx = append(c.idx, uint32(x))
	c.present()
	if c.full() {
		return c.flushPage()
	}
	return nil
}

// appendDict appends the rows of a dictionary-form column, translating each
// input dictionary entry to our index once per input dictionary rather than
// once per row.
func (c *chunk) appendDict(d *table.Dict, idx []int32, nulls []bool) error {
	for i, e := range idx {
		if nulls != nil && nulls[i] {
			if err := c.null(); err != nil {
				return err
			}
			continue
		}
		if e < 0 || int(e) >= d.Len() {
			return fmt.Errorf("dictionary index %d out of range [0, %d)", e, d.Len())
		}
		v := d.Entry(int(e))
		if !c.useDict {
			if err := c.appendPlain(v); err != nil {
				return err
			}
			continue
		}
		if d.ID == 0 || d.ID != c.srcID || len(c.srcMap) != d.Len() {
			c.srcID = d.ID
			c.srcMap = c.srcMap[:0]
			for range d.Len() {
				c.srcMap = append(c.srcMap, -1)
			}
		}
		x := c.srcMap[e]
		if x < 0 {
			var ok bool
			var err error
			if x, ok, err = c.index(v); err != nil {
				return err
			}
			if !ok {
				if err := c.appendPlain(v); err != nil {
					return err
				}
				continue
			}
			c.srcMap[e] = x
		}
		if err := c.appendIndex(x); err != nil {
			return err
		}
	}
	return nil
}

// appendPlain appends a text value PLAIN.
func (c *chunk) appendPlain(v []byte) error {
	c.textStats(v)
	c.vals = binary.LittleEndian.AppendUint32(c.vals, uint32(len(v)))
	c.vals = append(c.vals, v...)
	c.present()
	if c.full() {
		return c.flushPage()
	}
	return nil
}

// fallBack ends dictionary encoding for the rest of the row group.
func (c *chunk) fallBack() error {
	if err := c.flushPage(); err != nil {
		return err
	}
	c.useDict, c.pageDict, c.plainRG = false, false, true
	return nil
}

// textStats folds v into the minimum and maximum (unsigned byte order).
func (c *chunk) textStats(v []byte) {
	switch {
	case !c.hasMin:
		c.minB = append(c.minB[:0], v...)
		c.maxB = append(c.maxB[:0], v...)
		c.hasMin = true
	case bytes.Compare(v, c.minB) < 0:
		c.minB = append(c.minB[:0], v...)
	case bytes.Compare(v, c.maxB) > 0:
		c.maxB = append(c.maxB[:0], v...)
	}
}

var compact thrift.CompactProtocol

// flushPage encodes, compresses and appends the page being filled.
func (c *chunk) flushPage() error {
	if c.pageN == 0 {
		return nil
	}
	body, own := c.body[:0], true
	if c.nullable {
		body = append(body, 0, 0, 0, 0)
		body = appendHybrid(body, c.defs, 1)
		binary.LittleEndian.PutUint32(body, uint32(len(body)-4))
	}
	enc := format.Plain
	switch {
	case c.pageDict:
		enc = format.RLEDictionary
		var top uint32
		for _, x := range c.idx {
			top = max(top, x)
		}
		w := bitWidth(top)
		body = append(body, byte(w))
		body = appendHybrid(body, c.idx, w)
		c.dictPages++
	case c.kind == table.Bool:
		body = packBits(body, c.bools, len(c.bools), 1)
		c.plainPages++
	default:
		if c.nullable {
			body = append(body, c.vals...)
		} else {
			body, own = c.vals, false
		}
		c.plainPages++
	}
	comp, err := c.codec.enc(c.cbuf[:0], body)
	if err != nil {
		return fmt.Errorf("compressing a page: %w", err)
	}
	h := format.PageHeader{
		Type:                 format.DataPage,
		UncompressedPageSize: int32(len(body)),
		CompressedPageSize:   int32(len(comp)),
		CRC:                  pageCRC(comp),
		DataPageHeader: thrift.New(format.DataPageHeader{
			NumValues:               int32(c.pageN),
			Encoding:                enc,
			DefinitionLevelEncoding: format.RLE,
			RepetitionLevelEncoding: format.RLE,
		}),
	}
	hb, err := thrift.Marshal(&compact, &h)
	if err != nil {
		return fmt.Errorf("encoding a page header: %w", err)
	}
	// Each page gets a buffer of its own, so that the chunk never copies
	// its earlier pages to grow.
	var pb []byte
	if n := len(c.spare); n > 0 {
		pb, c.spare = c.spare[n-1][:0], c.spare[:n-1]
	}
	pb = append(pb, hb...)
	pb = append(pb, comp...)
	c.pages = append(c.pages, pb)
	c.uncomp += int64(len(hb) + len(body))
	c.numValues += int64(c.pageN)
	if own {
		c.body = body
	}
	c.cbuf = comp
	c.defs, c.vals, c.bools, c.idx = c.defs[:0], c.vals[:0], c.bools[:0], c.idx[:0]
	c.pageN = 0
	c.pageDict = c.useDict
	return nil
}

// finish completes the chunk: it flushes the last page and returns the
// dictionary page (header and compressed entries; nil without one).
func (c *chunk) finish() ([]byte, int64, error) {
	if err := c.flushPage(); err != nil {
		return nil, 0, err
	}
	if c.dictN == 0 {
		return nil, 0, nil
	}
	comp, err := c.codec.enc(nil, c.dictVals)
	if err != nil {
		return nil, 0, fmt.Errorf("compressing a dictionary page: %w", err)
	}
	h := format.PageHeader{
		Type:                 format.DictionaryPage,
		UncompressedPageSize: int32(len(c.dictVals)),
		CompressedPageSize:   int32(len(comp)),
		CRC:                  pageCRC(comp),
		DictionaryPageHeader: thrift.New(format.DictionaryPageHeader{
			NumValues: int32(c.dictN),
			Encoding:  format.Plain,
		}),
	}
	hb, err := thrift.Marshal(&compact, &h)
	if err != nil {
		return nil, 0, fmt.Errorf("encoding a page header: %w", err)
	}
	return append(hb, comp...), int64(len(hb) + len(c.dictVals)), nil
}

// physical returns the Parquet physical type of a kind.
func physical(k table.Kind) format.Type {
	switch k {
	case table.Int64:
		return format.Int64
	case table.Float64:
		return format.Double
	case table.Bool:
		return format.Boolean
	}
	return format.ByteArray
}

// stats returns the chunk's statistics.
func (c *chunk) stats() format.Statistics {
	s := format.Statistics{NullCount: c.nulls}
	if !c.hasMin {
		return s
	}
	switch c.kind {
	case table.Int64:
		s.MinValue = binary.LittleEndian.AppendUint64(nil, uint64(c.minI))
		s.MaxValue = binary.LittleEndian.AppendUint64(nil, uint64(c.maxI))
	case table.Float64:
		lo, hi := c.minF, c.maxF
		if lo == 0 {
			lo = math.Copysign(0, -1)
		}
		if hi == 0 {
			hi = math.Copysign(0, 1)
		}
		s.MinValue = binary.LittleEndian.AppendUint64(nil, math.Float64bits(lo))
		s.MaxValue = binary.LittleEndian.AppendUint64(nil, math.Float64bits(hi))
	case table.String:
		s.MinValue = append([]byte(nil), c.minB...)
		s.MaxValue = append([]byte(nil), c.maxB...)
	}
	return s
}
