package arrowio

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"

	flatbuffers "github.com/google/flatbuffers/go"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"
)

// The Arrow library sizes what it allocates for a batch by the batch's
// metadata: the length of every field node, and for a compressed body the
// uncompressed length written before each buffer. A batchGuard checks
// those claims against the bytes that hold them, with the schema in hand,
// before the library loads the batch. It walks the field nodes and buffers
// in the order the library's loader consumes them:
//
//   - a node's length must fit its buffers: a validity bitmap of b bytes
//     holds at most 8b rows, fixed-width values of w bits at most 8b/w,
//     offsets at most b/w - 1, views at most b/16;
//   - a top-level node's length must equal the batch's;
//   - nodes that no buffer bounds (null columns, zero-width binary,
//     structs and fixed-size lists without nulls, run-end encoded arrays)
//     may hold at most maxFreeRows rows plus freeRowsPerByte rows a byte of
//     the message (metadata and body), summed over the batch;
//   - a compressed buffer may claim at most ratioLZ4 or ratioZstd times
//     its compressed bytes (the most the codec can expand a byte to), a
//     fixed-width buffer no more than its rows need, rounded up to the
//     format's 64-byte alignment, and each ZSTD frame a window of at most
//     the buffer's size or maxZstdWindow.
const (
	maxFreeRows     = 1 << 20
	freeRowsPerByte = 64
	ratioLZ4        = 256     // an LZ4 match extension byte adds at most 255 bytes
	ratioZstd       = 1 << 15 // a 4-byte RLE block yields at most 128 KiB
	alignment       = 64

	slotMsgVersion     = 4  // Message.version: short
	slotFooterVersion  = 4  // Footer.version: short
	slotFieldDict      = 12 // Field.dictionary: DictionaryEncoding
	slotDictEncID      = 4  // DictionaryEncoding.id: long
	slotDictID         = 4  // DictionaryBatch.id: long
	slotBatchCompress  = 10 // RecordBatch.compression: BodyCompression
	slotCompressCodec  = 4  // BodyCompression.codec: byte
	codecLZ4           = 0  // CompressionType.LZ4_FRAME
	codecZstd          = 1  // CompressionType.ZSTD
	metadataV5         = 4  // MetadataVersion.V5
	nodeOffsetNullness = 8  // FieldNode.null_count
)

// batchGuard checks the batches of one file or stream.
type batchGuard struct {
	fields  []arrow.Field
	dicts   map[int64]dictField // value types by dictionary id
	batches int                 // record batches checked so far
	dictNo  int                 // dictionary batches checked so far
}

// dictField is the value type of a dictionary and the column it belongs to.
type dictField struct {
	typ    arrow.DataType
	column string
}

// newBatchGuard makes a guard for the schema whose Schema table sits at
// pos in buf, and which the library read as schema.
func newBatchGuard(buf []byte, pos flatbuffers.UOffsetT, schema *arrow.Schema) (*batchGuard, error) {
	g := &batchGuard{fields: schema.Fields(), dicts: map[int64]dictField{}}
	c := newCheck(buf)
	err := c.run(func() error {
		st := flatbuffers.Table{Bytes: buf, Pos: pos}
		i := 0
		return c.tables(&st, slotSchemaFields, func(t *flatbuffers.Table) error {
			if i >= len(g.fields) {
				return errBadMeta
			}
			f := g.fields[i]
			i++
			return g.mapDicts(c, t, f.Type, f.Name, 0)
		})
	})
	if err != nil {
		return nil, err
	}
	return g, nil
}

// mapDicts records the dictionaries of a field and its children, walking
// the flatbuffer Field t beside the type the library made of it.
func (g *batchGuard) mapDicts(c *fbCheck, t *flatbuffers.Table, dt arrow.DataType, column string, depth int) error {
	if depth > maxDepth {
		return errBadMeta
	}
	if ext, ok := dt.(arrow.ExtensionType); ok {
		dt = ext.StorageType()
	}
	if o := flatbuffers.UOffsetT(t.Offset(slotFieldDict)); o != 0 {
		enc := flatbuffers.Table{Bytes: c.buf, Pos: t.Indirect(o + t.Pos)}
		var id int64
		if o := flatbuffers.UOffsetT(enc.Offset(slotDictEncID)); o != 0 {
			id = enc.GetInt64(o + enc.Pos)
		}
		d, ok := dt.(*arrow.DictionaryType)
		if !ok {
			return errBadMeta
		}
		if _, dup := g.dicts[id]; !dup {
			g.dicts[id] = dictField{typ: d.ValueType, column: column}
		}
		dt = d.ValueType
	}
	var kids []arrow.Field
	if n, ok := dt.(arrow.NestedType); ok {
		kids = n.Fields()
	}
	i := 0
	return c.tables(t, slotFieldChildren, func(sub *flatbuffers.Table) error {
		if i >= len(kids) {
			return errBadMeta
		}
		i++
		return g.mapDicts(c, sub, kids[i-1].Type, column, depth+1)
	})
}

// check checks a record or dictionary batch message (its metadata, already
// checked by checkMessage) and its body, of bodyLen bytes.
func (g *batchGuard) check(meta []byte, body io.ReaderAt, bodyLen int64) error {
	fc := newCheck(meta)
	msgLen := int64(len(meta)) + bodyLen
	var what string
	err := fc.run(func() error {
		root := fc.root()
		kind := root.GetByte(flatbuffers.UOffsetT(root.Offset(slotMsgHeaderType)) + root.Pos)
		var ht flatbuffers.Table
		root.Union(&ht, flatbuffers.UOffsetT(root.Offset(slotMsgHeader)))
		if kind == headerBatch {
			g.batches++
			what = fmt.Sprintf("record batch %d", g.batches)
			var version int16
			if o := flatbuffers.UOffsetT(root.Offset(slotMsgVersion)); o != 0 {
				version = root.GetInt16(o + root.Pos)
			}
			return newBatchCheck(fc, &ht, version, body, msgLen).record(g.fields)
		}
		g.dictNo++
		what = fmt.Sprintf("dictionary batch %d", g.dictNo)
		return g.dictionary(fc, &ht, body, msgLen, &what)
	})
	if err != nil && what != "" {
		return fmt.Errorf("%s: %w", what, err)
	}
	return err
}

// dictionary checks the DictionaryBatch table ht against the value type of
// its dictionary, adding the column's name to *what.
func (g *batchGuard) dictionary(fc *fbCheck, ht *flatbuffers.Table, body io.ReaderAt, msgLen int64, what *string) error {
	var id int64
	if o := flatbuffers.UOffsetT(ht.Offset(slotDictID)); o != 0 {
		id = ht.GetInt64(o + ht.Pos)
	}
	d, ok := g.dicts[id]
	if !ok {
		return nil // the library refuses an unknown dictionary
	}
	*what += fmt.Sprintf(" (column %q)", d.column)
	rb := flatbuffers.Table{Bytes: fc.buf, Pos: ht.Indirect(flatbuffers.UOffsetT(ht.Offset(slotDictData)) + ht.Pos)}
	// The library loads dictionaries as metadata version 1.
	b := newBatchCheck(fc, &rb, 0, body, msgLen)
	if _, _, err := b.load(d.typ, 0); err != nil {
		return err
	}
	return b.over
}

// batchCheck walks the nodes and buffers of one RecordBatch table.
type batchCheck struct {
	meta               []byte
	length             int64
	nodes, bufs, vars  uint32
	nnodes, nbufs, nvs int
	inode, ibuf, ivar  int
	v5                 bool
	ratio              int64 // 0 for an uncompressed body
	body               io.ReaderAt
	free, maxFree      int64
	scratch            []byte // a compressed buffer being read
	column             string // the column being checked
	over               error  // set when the rows no buffer bounds pass maxFree
}

func newBatchCheck(c *fbCheck, rb *flatbuffers.Table, version int16, body io.ReaderAt, msgLen int64) *batchCheck {
	b := &batchCheck{meta: c.buf, body: body, v5: version >= metadataV5}
	if o := flatbuffers.UOffsetT(rb.Offset(slotBatchLength)); o != 0 {
		b.length = rb.GetInt64(o + rb.Pos)
	}
	// The vectors were checked by checkMessage.
	b.nodes, b.nnodes, _ = c.vector(rb, slotBatchNodes, nodeSize)
	b.bufs, b.nbufs, _ = c.vector(rb, slotBatchBuffers, bufferSize)
	b.vars, b.nvs, _ = c.vector(rb, slotBatchVariadic, 8)
	if o := flatbuffers.UOffsetT(rb.Offset(slotBatchCompress)); o != 0 {
		comp := flatbuffers.Table{Bytes: c.buf, Pos: rb.Indirect(o + rb.Pos)}
		codec := byte(codecLZ4)
		if o := flatbuffers.UOffsetT(comp.Offset(slotCompressCodec)); o != 0 {
			codec = comp.GetByte(o + comp.Pos)
		}
		// The library reads the buffers of another codec as they are.
		switch codec {
		case codecLZ4:
			b.ratio = ratioLZ4
		case codecZstd:
			b.ratio = ratioZstd
		}
	}
	b.maxFree = maxFreeRows + freeRowsPerByte*msgLen
	return b
}

// record checks a record batch of the given columns.
func (b *batchCheck) record(fields []arrow.Field) error {
	if b.length < 0 {
		return fmt.Errorf("negative length %d", b.length)
	}
	if len(fields) == 0 {
		b.addFree(b.length)
	}
	for _, f := range fields {
		b.column = f.Name
		n, _, err := b.load(f.Type, 0)
		if err == nil && n != b.length {
			err = fmt.Errorf("%d rows in a batch of %d", n, b.length)
		}
		if err != nil {
			return fmt.Errorf("column %q: %w", f.Name, err)
		}
	}
	return b.over
}

// load checks the nodes and buffers of one array of type dt, as the
// library's loader consumes them, and returns its length and whether its
// own buffers bound that length.
func (b *batchCheck) load(dt arrow.DataType, depth int) (n int64, bounded bool, err error) {
	if depth > maxDepth {
		return 0, false, errors.New("nested too deep")
	}
	switch dt := dt.(type) {
	case *arrow.NullType:
		return b.unbounded(b.common(dt.ID()))
	case *arrow.DictionaryType:
		return b.primitive(dt.IndexType)
	case *arrow.BooleanType,
		*arrow.Int8Type, *arrow.Int16Type, *arrow.Int32Type, *arrow.Int64Type,
		*arrow.Uint8Type, *arrow.Uint16Type, *arrow.Uint32Type, *arrow.Uint64Type,
		*arrow.Float16Type, *arrow.Float32Type, *arrow.Float64Type,
		*arrow.Decimal128Type, *arrow.Decimal256Type,
		*arrow.Time32Type, *arrow.Time64Type,
		*arrow.TimestampType,
		*arrow.Date32Type, *arrow.Date64Type,
		*arrow.MonthIntervalType, *arrow.DayTimeIntervalType, *arrow.MonthDayNanoIntervalType,
		*arrow.DurationType:
		return b.primitive(dt)
	case *arrow.BinaryType, *arrow.StringType:
		return b.binary(dt, 4)
	case *arrow.LargeStringType, *arrow.LargeBinaryType:
		return b.binary(dt, 8)
	case arrow.BinaryViewDataType:
		return b.view(dt)
	case *arrow.FixedSizeBinaryType:
		return b.fixedBinary(dt)
	case *arrow.ListType:
		return b.list(dt, dt.Elem(), 4, depth)
	case *arrow.LargeListType:
		return b.list(dt, dt.Elem(), 8, depth)
	case *arrow.MapType:
		return b.list(dt, dt.Elem(), 4, depth)
	case *arrow.ListViewType:
		return b.listView(dt, dt.Elem(), 4, depth)
	case *arrow.LargeListViewType:
		return b.listView(dt, dt.Elem(), 8, depth)
	case *arrow.FixedSizeListType:
		return b.fixedList(dt, depth)
	case *arrow.StructType:
		return b.structure(dt, depth)
	case arrow.ExtensionType:
		return b.load(dt.StorageType(), depth+1)
	case *arrow.RunEndEncodedType:
		n, _, err := b.common(dt.ID())
		if err != nil {
			return 0, false, err
		}
		for _, t := range []arrow.DataType{dt.RunEnds(), dt.Encoded()} {
			if _, _, err := b.load(t, depth+1); err != nil {
				return 0, false, err
			}
		}
		return b.unbounded(n, false, nil)
	case arrow.UnionType:
		return b.union(dt, depth)
	}
	return 0, false, fmt.Errorf("type %s cannot be read", typeName(dt))
}

// unbounded counts the rows of a node that its buffers do not bound.
func (b *batchCheck) unbounded(n int64, bounded bool, err error) (int64, bool, error) {
	if err == nil && !bounded {
		b.addFree(n)
	}
	return n, bounded, err
}

// addFree adds n rows to those no buffer bounds, remembering the column
// where they first pass the limit.
func (b *batchCheck) addFree(n int64) {
	if n <= b.maxFree-b.free {
		b.free += n
		return
	}
	if b.over == nil {
		b.over = fmt.Errorf("%d rows that no buffer holds, more than the %d a message of this size may claim", n, b.maxFree)
		if b.column != "" {
			b.over = fmt.Errorf("column %q: %w", b.column, b.over)
		}
	}
	b.free = b.maxFree
}

// node returns the next field node's length and null count.
func (b *batchCheck) node() (n, nulls int64, err error) {
	if b.inode >= b.nnodes {
		return 0, 0, fmt.Errorf("only %d field nodes for the schema", b.nnodes)
	}
	p := b.nodes + uint32(b.inode*nodeSize)
	b.inode++
	n = int64(binary.LittleEndian.Uint64(b.meta[p:]))
	nulls = int64(binary.LittleEndian.Uint64(b.meta[p+nodeOffsetNullness:]))
	if n < 0 {
		return 0, 0, fmt.Errorf("negative length %d", n)
	}
	if nulls < 0 || nulls > n {
		return 0, 0, fmt.Errorf("%d nulls in %d rows", nulls, n)
	}
	return n, nulls, nil
}

// buffer returns the size of the next buffer once loaded (uncompressed),
// and whether it is compressed.
func (b *batchCheck) buffer() (size int64, compressed bool, err error) {
	if b.ibuf >= b.nbufs {
		return 0, false, fmt.Errorf("only %d buffers for the schema", b.nbufs)
	}
	p := b.bufs + uint32(b.ibuf*bufferSize)
	b.ibuf++
	off := int64(binary.LittleEndian.Uint64(b.meta[p:]))
	length := int64(binary.LittleEndian.Uint64(b.meta[p+8:]))
	if length == 0 || b.ratio == 0 {
		return length, false, nil
	}
	if length < 8 {
		return 0, false, fmt.Errorf("a compressed buffer of %d bytes has no length prefix", length)
	}
	var prefix [8]byte
	if _, err := b.body.ReadAt(prefix[:], off); err != nil {
		return 0, false, fmt.Errorf("read a buffer's length prefix: %w", err)
	}
	u := int64(binary.LittleEndian.Uint64(prefix[:]))
	if u == -1 { // stored uncompressed
		return length - 8, false, nil
	}
	if u < 0 || u > b.ratio*(length-8) {
		return 0, false, fmt.Errorf("a compressed buffer of %d bytes claims %d bytes uncompressed (at most %d)", length-8, u, b.ratio*(length-8))
	}
	if b.ratio == ratioZstd {
		if err := b.zstdFrames(off+8, length-8, u); err != nil {
			return 0, false, err
		}
	}
	return u, true, nil
}

// zstdFrames reads the compressed bytes of a ZSTD buffer, of n bytes at
// off, and checks the window of each frame: the decoder allocates it
// before reading a block, so a frame header of a few bytes could claim
// 512 MiB. A frame may ask for at most the buffer's uncompressed size u,
// or maxZstdWindow (what streaming encoders declare whatever the size).
func (b *batchCheck) zstdFrames(off, n, u int64) error {
	b.scratch = resize(b.scratch, int(n))
	if _, err := b.body.ReadAt(b.scratch, off); err != nil {
		return fmt.Errorf("read a compressed buffer: %w", err)
	}
	limit := uint64(max(u, maxZstdWindow))
	for f := b.scratch; len(f) > 0; {
		window, size, ok := zstdFrame(f)
		if !ok {
			return nil // the decoder refuses what is not a frame
		}
		if window > limit {
			return fmt.Errorf("a ZSTD frame asks for a window of %d bytes to make %d", window, u)
		}
		f = f[size:]
	}
	return nil
}

// maxZstdWindow is the largest ZSTD window allowed beyond a buffer's own
// size: 8 MiB, the window of the default level of the common encoders.
const maxZstdWindow = 8 << 20

// zstdFrame returns the window size a ZSTD frame at the start of f asks for
// (zero for a skippable frame) and the frame's length, following the frame
// format of RFC 8878 section 3.1. ok is false when f holds no complete
// frame header.
func zstdFrame(f []byte) (window uint64, size int, ok bool) {
	le := binary.LittleEndian
	if len(f) < 8 {
		return 0, 0, false
	}
	if magic := le.Uint32(f); magic&0xfffffff0 == 0x184d2a50 { // skippable
		n := int64(le.Uint32(f[4:]))
		if n > int64(len(f)-8) {
			return 0, 0, false
		}
		return 0, 8 + int(n), true
	} else if magic != 0xfd2fb528 {
		return 0, 0, false
	}
	fhd := f[4]
	single := fhd&0x20 != 0
	pos := 5
	if !single {
		exp, mant := uint64(f[pos]>>3), uint64(f[pos]&7)
		base := uint64(1) << (10 + exp)
		window = base + base/8*mant
		pos++
	}
	pos += [4]int{0, 1, 2, 4}[fhd&3] // dictionary id
	fcsLen := [4]int{0, 2, 4, 8}[fhd>>6]
	if single && fcsLen == 0 {
		fcsLen = 1
	}
	if pos+fcsLen > len(f) {
		return 0, 0, false
	}
	if single {
		switch fcsLen {
		case 1:
			window = uint64(f[pos])
		case 2:
			window = uint64(le.Uint16(f[pos:])) + 256
		case 4:
			window = uint64(le.Uint32(f[pos:]))
		case 8:
			window = le.Uint64(f[pos:])
		}
	}
	pos += fcsLen
	for last := false; !last; {
		if pos+3 > len(f) {
			return window, len(f), true // cut: the decoder will say so
		}
		h := int(f[pos]) | int(f[pos+1])<<8 | int(f[pos+2])<<16
		pos += 3
		last = h&1 == 1
		switch (h >> 1) & 3 {
		case 1: // RLE: one byte
			pos++
		case 3: // reserved
			return 0, 0, false
		default: // raw or compressed: the block's bytes
			pos += h >> 3
		}
	}
	if fhd&4 != 0 {
		pos += 4 // checksum
	}
	return window, min(pos, len(f)), true
}

// fits checks that a buffer of size bytes holds n values of bits bits, and
// that a compressed one claims no more than they need.
func fits(what string, size int64, compressed bool, n, bits int64) error {
	if n > size*8/bits {
		return fmt.Errorf("its %s hold %d bytes, too few for %d values", what, size, n)
	}
	need := (n*bits + 7) / 8
	if compressed && size > (need+alignment-1)/alignment*alignment {
		return fmt.Errorf("its compressed %s claim %d bytes where %d values need %d", what, size, n, need)
	}
	return nil
}

// hasValidity says whether the loader reads a validity bitmap for type id.
func (b *batchCheck) hasValidity(id arrow.Type) bool {
	if !b.v5 {
		return id != arrow.NULL
	}
	switch id {
	case arrow.NULL, arrow.DENSE_UNION, arrow.SPARSE_UNION, arrow.RUN_END_ENCODED:
		return false
	}
	return true
}

// common reads a node and its validity bitmap, if the type has one, and
// returns the node's length and whether the bitmap bounds it.
func (b *batchCheck) common(id arrow.Type) (n int64, bounded bool, err error) {
	n, nulls, err := b.node()
	if err != nil || !b.hasValidity(id) {
		return n, false, err
	}
	if nulls == 0 {
		b.ibuf++ // not read
		return n, false, nil
	}
	size, comp, err := b.buffer()
	if err != nil {
		return 0, false, err
	}
	return n, true, fits("validity bitmap", size, comp, n, 1)
}

func (b *batchCheck) primitive(dt arrow.DataType) (int64, bool, error) {
	n, _, err := b.common(dt.ID())
	if err != nil {
		return 0, false, err
	}
	if n == 0 {
		b.ibuf++ // not read
		return 0, true, nil
	}
	size, comp, err := b.buffer()
	if err != nil {
		return 0, false, err
	}
	fw, ok := dt.(arrow.FixedWidthDataType)
	if !ok || fw.BitWidth() <= 0 {
		return 0, false, fmt.Errorf("type %s has no fixed width", typeName(dt))
	}
	return n, true, fits("values", size, comp, n, int64(fw.BitWidth()))
}

// offsets checks a buffer of n+1 offsets of w bytes (none when n is 0).
func (b *batchCheck) offsets(n, w int64) error {
	size, comp, err := b.buffer()
	if err != nil || (n == 0 && size == 0) {
		return err
	}
	return fits("offsets", size, comp, n+1, 8*w)
}

func (b *batchCheck) binary(dt arrow.DataType, w int64) (int64, bool, error) {
	n, _, err := b.common(dt.ID())
	if err == nil {
		err = b.offsets(n, w)
	}
	if err == nil {
		_, _, err = b.buffer() // the bytes: bounded by the ratio only
	}
	return n, true, err
}

func (b *batchCheck) view(dt arrow.DataType) (int64, bool, error) {
	if b.ivar >= b.nvs {
		return 0, false, errors.New("a view column without its count of data buffers")
	}
	k := int64(binary.LittleEndian.Uint64(b.meta[b.vars+uint32(8*b.ivar):]))
	b.ivar++
	n, _, err := b.common(dt.ID())
	if err != nil {
		return 0, false, err
	}
	if k < 0 || k > int64(b.nbufs-b.ibuf) {
		return 0, false, fmt.Errorf("%d data buffers claimed, %d left in the batch", k, b.nbufs-b.ibuf)
	}
	size, comp, err := b.buffer()
	if err == nil {
		err = fits("views", size, comp, n, 128)
	}
	for i := int64(0); i < k && err == nil; i++ {
		_, _, err = b.buffer()
	}
	return n, true, err
}

func (b *batchCheck) fixedBinary(dt *arrow.FixedSizeBinaryType) (int64, bool, error) {
	n, _, err := b.common(dt.ID())
	if err != nil {
		return 0, false, err
	}
	size, comp, err := b.buffer()
	if err != nil {
		return 0, false, err
	}
	switch {
	case dt.ByteWidth < 0:
		return 0, false, fmt.Errorf("negative byte width %d", dt.ByteWidth)
	case dt.ByteWidth == 0:
		return b.unbounded(n, false, nil)
	}
	return n, true, fits("values", size, comp, n, 8*int64(dt.ByteWidth))
}

func (b *batchCheck) list(dt, elem arrow.DataType, w int64, depth int) (int64, bool, error) {
	n, _, err := b.common(dt.ID())
	if err == nil {
		err = b.offsets(n, w)
	}
	if err == nil {
		_, _, err = b.load(elem, depth+1)
	}
	return n, true, err
}

func (b *batchCheck) listView(dt, elem arrow.DataType, w int64, depth int) (int64, bool, error) {
	n, _, err := b.common(dt.ID())
	for _, what := range []string{"offsets", "sizes"} {
		if err != nil {
			break
		}
		size, comp, e := b.buffer()
		if err = e; err == nil {
			err = fits(what, size, comp, n, 8*w)
		}
	}
	if err == nil {
		_, _, err = b.load(elem, depth+1)
	}
	return n, true, err
}

func (b *batchCheck) fixedList(dt *arrow.FixedSizeListType, depth int) (int64, bool, error) {
	n, bounded, err := b.common(dt.ID())
	if err != nil {
		return 0, false, err
	}
	k, kidBounded, err := b.load(dt.Elem(), depth+1)
	if err != nil {
		return 0, false, err
	}
	if size := int64(dt.Len()); size > 0 {
		if n > k/size {
			return 0, false, fmt.Errorf("%d lists of %d in %d values", n, size, k)
		}
		bounded = bounded || kidBounded
	}
	return b.unbounded(n, bounded, nil)
}

func (b *batchCheck) structure(dt *arrow.StructType, depth int) (int64, bool, error) {
	n, bounded, err := b.common(dt.ID())
	if err != nil {
		return 0, false, err
	}
	for _, f := range dt.Fields() {
		k, kidBounded, err := b.load(f.Type, depth+1)
		if err != nil {
			return 0, false, err
		}
		if k < n {
			return 0, false, fmt.Errorf("field %q holds %d rows of %d", f.Name, k, n)
		}
		bounded = bounded || kidBounded
	}
	return b.unbounded(n, bounded, nil)
}

func (b *batchCheck) union(dt arrow.UnionType, depth int) (int64, bool, error) {
	n, _, err := b.common(dt.ID())
	if err != nil {
		return 0, false, err
	}
	dense := dt.Mode() == arrow.DenseMode
	if n == 0 {
		b.ibuf++
		if dense {
			b.ibuf++
		}
	} else {
		size, comp, err := b.buffer()
		if err == nil {
			err = fits("type ids", size, comp, n, 8)
		}
		if err == nil && dense {
			size, comp, err = b.buffer()
			if err == nil {
				err = fits("offsets", size, comp, n, 32)
			}
		}
		if err != nil {
			return 0, false, err
		}
	}
	for _, f := range dt.Fields() {
		if _, _, err := b.load(f.Type, depth+1); err != nil {
			return 0, false, err
		}
	}
	return n, true, nil
}

// streamGuard makes the guard of a stream from its schema message, which
// the library read as schema.
func streamGuard(meta []byte, schema *arrow.Schema) (*batchGuard, error) {
	if meta == nil || schema == nil {
		return nil, errors.New("no schema")
	}
	var pos flatbuffers.UOffsetT
	c := newCheck(meta)
	err := c.run(func() error {
		root := c.root()
		var ht flatbuffers.Table
		root.Union(&ht, flatbuffers.UOffsetT(root.Offset(slotMsgHeader)))
		pos = ht.Pos
		return nil
	})
	if err != nil {
		return nil, err
	}
	return newBatchGuard(meta, pos, schema)
}

// schemaMessage wraps the Schema table at pos in a file's footer into a
// schema message, which the library reads without touching the batches:
// a root offset and a Message table (version, header type, header) placed
// before a copy of the footer, whose offsets are all relative.
func schemaMessage(footer []byte, pos flatbuffers.UOffsetT, version int16) ([]byte, flatbuffers.UOffsetT) {
	const (
		vtable = 4  // vtable: its size, the table's size, three field offsets
		tbl    = 16 // table: vtable offset, header, version, header type
		shift  = 32 // the footer's copy
	)
	buf := make([]byte, shift+len(footer))
	copy(buf[shift:], footer)
	le := binary.LittleEndian
	le.PutUint32(buf[0:], tbl)
	le.PutUint16(buf[vtable:], 10)   // vtable size
	le.PutUint16(buf[vtable+2:], 12) // table size
	le.PutUint16(buf[vtable+4:], 8)  // version
	le.PutUint16(buf[vtable+6:], 10) // header type
	le.PutUint16(buf[vtable+8:], 4)  // header
	le.PutUint32(buf[tbl:], tbl-vtable)
	schema := shift + uint32(pos)
	le.PutUint32(buf[tbl+4:], schema-(tbl+4))
	le.PutUint16(buf[tbl+8:], uint16(version))
	buf[tbl+10] = headerSchema
	return buf, flatbuffers.UOffsetT(schema)
}

// schemaOf reads the schema of a schema message with the library.
func schemaOf(meta []byte) (*arrow.Schema, error) {
	msg := ipc.NewMessage(memory.NewBufferBytes(meta), memory.NewBufferBytes(nil))
	rd, err := ipc.NewReaderFromMessageReader(&oneMessage{msg: msg})
	if err != nil {
		return nil, err
	}
	defer rd.Release()
	return rd.Schema(), nil
}

// oneMessage is a message reader holding a single message.
type oneMessage struct{ msg *ipc.Message }

// Message returns the message once, then io.EOF.
func (m *oneMessage) Message() (*ipc.Message, error) {
	if m.msg == nil {
		return nil, io.EOF
	}
	msg := m.msg
	m.msg = nil
	return msg, nil
}

// Retain does nothing.
func (m *oneMessage) Retain() {}

// Release does nothing.
func (m *oneMessage) Release() {}
