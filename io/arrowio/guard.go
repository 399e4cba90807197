package arrowio

import (
	"bytes"
	"cmp"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"

	flatbuffers "github.com/google/flatbuffers/go"

	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"
)

// The Arrow library trusts the lengths stored in a file's metadata: a
// damaged vector length makes it allocate without bound, which ends the
// process rather than panicking. The checks here walk the metadata that the
// library turns into allocations (schemas, file footers, message framing)
// and reject lengths the bytes cannot hold, before the library sees them.
//
// Table slots, from the Arrow format's Schema.fbs, Message.fbs and File.fbs:
// each slot is 4 + 2*(field number).
const (
	slotSchemaFields   = 6  // Schema.fields: [Field]
	slotSchemaMeta     = 8  // Schema.custom_metadata: [KeyValue]
	slotSchemaFeatures = 10 // Schema.features: [long]
	slotFieldChildren  = 14 // Field.children: [Field]
	slotFieldMeta      = 16 // Field.custom_metadata: [KeyValue]
	slotMsgHeaderType  = 6  // Message.header_type: ubyte
	slotMsgHeader      = 8  // Message.header: union
	slotMsgBodyLength  = 10 // Message.bodyLength: long
	slotMsgMeta        = 12 // Message.custom_metadata
	slotFooterSchema   = 6  // Footer.schema: Schema
	slotFooterDicts    = 8  // Footer.dictionaries: [Block]
	slotFooterRecords  = 10 // Footer.recordBatches: [Block]
	slotFooterMeta     = 12 // Footer.custom_metadata

	slotDictData      = 6  // DictionaryBatch.data: RecordBatch
	slotBatchLength   = 4  // RecordBatch.length: long
	slotBatchNodes    = 6  // RecordBatch.nodes: [FieldNode]
	slotBatchBuffers  = 8  // RecordBatch.buffers: [Buffer]
	slotBatchVariadic = 12 // RecordBatch.variadicBufferCounts: [long]

	headerSchema = 1  // MessageHeader.Schema
	headerDict   = 2  // MessageHeader.DictionaryBatch
	headerBatch  = 3  // MessageHeader.RecordBatch
	nodeSize     = 16 // struct FieldNode { length: long; null_count: long }
	bufferSize   = 16 // struct Buffer { offset: long; length: long }
	blockSize    = 24 // struct Block { offset: long; metaDataLength: int; bodyLength: long }
	maxDepth     = 64 // deepest nesting of fields accepted
)

var errBadMeta = errors.New("damaged metadata")

// fbCheck walks one flatbuffer. budget bounds the number of tables visited,
// so that shared or cyclic offsets cannot make the walk (or the library's
// own walk after it) run away.
type fbCheck struct {
	buf    []byte
	budget int
}

func newCheck(buf []byte) *fbCheck { return &fbCheck{buf: buf, budget: len(buf)/4 + 1} }

// run calls f, turning an out-of-range read into errBadMeta.
func (c *fbCheck) run(f func() error) (err error) {
	defer func() {
		if recover() != nil {
			err = errBadMeta
		}
	}()
	return f()
}

// root returns the root table.
func (c *fbCheck) root() flatbuffers.Table {
	return flatbuffers.Table{Bytes: c.buf, Pos: flatbuffers.GetUOffsetT(c.buf)}
}

// vector returns the start and length of the vector in slot, checking that
// n elements of elem bytes fit in the buffer.
func (c *fbCheck) vector(t *flatbuffers.Table, slot flatbuffers.VOffsetT, elem int) (uint32, int, error) {
	o := flatbuffers.UOffsetT(t.Offset(slot))
	if o == 0 {
		return 0, 0, nil
	}
	n := t.VectorLen(o)
	start := t.Vector(o)
	if n < 0 || int64(start)+int64(n)*int64(elem) > int64(len(c.buf)) {
		return 0, 0, errBadMeta
	}
	return uint32(start), n, nil
}

// tables checks a vector of tables and calls f on each.
func (c *fbCheck) tables(t *flatbuffers.Table, slot flatbuffers.VOffsetT, f func(*flatbuffers.Table) error) error {
	start, n, err := c.vector(t, slot, 4)
	if err != nil {
		return err
	}
	for j := 0; j < n; j++ {
		c.budget--
		if c.budget < 0 {
			return errBadMeta
		}
		sub := flatbuffers.Table{Bytes: c.buf, Pos: t.Indirect(flatbuffers.UOffsetT(start + uint32(j)*4))}
		sub.Offset(0) // reads the vtable: panics if out of range
		if f != nil {
			if err := f(&sub); err != nil {
				return err
			}
		}
	}
	return nil
}

func (c *fbCheck) schema(t *flatbuffers.Table) error {
	if err := c.tables(t, slotSchemaMeta, nil); err != nil {
		return err
	}
	if _, _, err := c.vector(t, slotSchemaFeatures, 8); err != nil {
		return err
	}
	return c.tables(t, slotSchemaFields, func(f *flatbuffers.Table) error { return c.field(f, 0) })
}

func (c *fbCheck) field(t *flatbuffers.Table, depth int) error {
	if depth > maxDepth {
		return errBadMeta
	}
	if err := c.tables(t, slotFieldMeta, nil); err != nil {
		return err
	}
	return c.tables(t, slotFieldChildren, func(f *flatbuffers.Table) error { return c.field(f, depth+1) })
}

// checkMessage checks message metadata and returns the body length and
// the kind of message (headerSchema, headerDict, headerBatch, or another
// value the library refuses).
func checkMessage(meta []byte) (int64, byte, error) {
	c := newCheck(meta)
	var (
		body int64
		kind byte
	)
	err := c.run(func() error {
		t := c.root()
		if err := c.tables(&t, slotMsgMeta, nil); err != nil {
			return err
		}
		if o := flatbuffers.UOffsetT(t.Offset(slotMsgBodyLength)); o != 0 {
			body = t.GetInt64(o + t.Pos)
		}
		if body < 0 || body > maxBuffer {
			return errBadMeta
		}
		o := flatbuffers.UOffsetT(t.Offset(slotMsgHeaderType))
		if o == 0 {
			return nil
		}
		kind = t.GetByte(o + t.Pos)
		h := flatbuffers.UOffsetT(t.Offset(slotMsgHeader))
		if h == 0 {
			return errBadMeta
		}
		var ht flatbuffers.Table
		t.Union(&ht, h)
		switch kind {
		case headerSchema:
			return c.schema(&ht)
		case headerDict:
			d := flatbuffers.UOffsetT(ht.Offset(slotDictData))
			if d == 0 {
				return errBadMeta
			}
			rb := flatbuffers.Table{Bytes: c.buf, Pos: ht.Indirect(d + ht.Pos)}
			return c.batch(&rb, body)
		case headerBatch:
			return c.batch(&ht, body)
		}
		return nil
	})
	return body, kind, err
}

// batch checks that a record batch's buffers lie inside its body.
func (c *fbCheck) batch(t *flatbuffers.Table, body int64) error {
	if _, _, err := c.vector(t, slotBatchNodes, nodeSize); err != nil {
		return err
	}
	if _, _, err := c.vector(t, slotBatchVariadic, 8); err != nil {
		return err
	}
	start, n, err := c.vector(t, slotBatchBuffers, bufferSize)
	if err != nil {
		return err
	}
	for j := 0; j < n; j++ {
		b := c.buf[start+uint32(j*bufferSize):]
		off := int64(binary.LittleEndian.Uint64(b))
		length := int64(binary.LittleEndian.Uint64(b[8:]))
		if off < 0 || length < 0 || off > body || length > body-off {
			return fmt.Errorf("a buffer lies outside its message: %w", errBadMeta)
		}
	}
	return nil
}

// checkFooter checks the footer of an Arrow file of the given size: its
// schema; that every block lies inside the file, apart from the others;
// and each block's message, batches against the schema (batchGuard).
func checkFooter(f *os.File, size int64) error {
	const trailer = 10 // footer length (int32) and "ARROW1"
	if size < int64(8+trailer) {
		return errors.New("file too small")
	}
	tail := make([]byte, trailer)
	if _, err := f.ReadAt(tail, size-trailer); err != nil {
		return err
	}
	if string(tail[4:]) != string(ipc.Magic) {
		return errors.New("no closing ARROW1 magic (truncated?)")
	}
	n := int64(int32(binary.LittleEndian.Uint32(tail)))
	if n <= 0 || n > size-8-trailer {
		return errors.New("bad footer length")
	}
	buf := make([]byte, n)
	if _, err := f.ReadAt(buf, size-trailer-n); err != nil {
		return err
	}
	c := newCheck(buf)
	var (
		schemaPos flatbuffers.UOffsetT
		version   int16
		blocks    [2][]fileBlock
	)
	err := c.run(func() error {
		t := c.root()
		if err := c.tables(&t, slotFooterMeta, nil); err != nil {
			return err
		}
		if o := flatbuffers.UOffsetT(t.Offset(slotFooterVersion)); o != 0 {
			version = t.GetInt16(o + t.Pos)
		}
		for i, slot := range []flatbuffers.VOffsetT{slotFooterDicts, slotFooterRecords} {
			start, k, err := c.vector(&t, slot, blockSize)
			if err != nil {
				return err
			}
			for j := 0; j < k; j++ {
				b := buf[start+uint32(j*blockSize):]
				blk := fileBlock{
					off:  int64(binary.LittleEndian.Uint64(b)),
					meta: int64(int32(binary.LittleEndian.Uint32(b[8:]))),
					body: int64(binary.LittleEndian.Uint64(b[16:])),
				}
				if blk.off < 0 || blk.meta < 8 || blk.body < 0 || blk.off > size || blk.meta > size || blk.body > size || blk.off+blk.meta+blk.body > size {
					return fmt.Errorf("a block lies outside the file: %w", errBadMeta)
				}
				blocks[i] = append(blocks[i], blk)
			}
		}
		o := flatbuffers.UOffsetT(t.Offset(slotFooterSchema))
		if o == 0 {
			return errBadMeta
		}
		schemaPos = t.Indirect(o + t.Pos)
		s := flatbuffers.Table{Bytes: buf, Pos: schemaPos}
		return c.schema(&s)
	})
	if err != nil {
		return err
	}
	if err := disjoint(append(append([]fileBlock{}, blocks[0]...), blocks[1]...)); err != nil {
		return err
	}
	meta, pos := schemaMessage(buf, schemaPos, version)
	schema, err := schemaOf(meta)
	if err != nil {
		return err
	}
	g, err := newBatchGuard(meta, pos, schema)
	if err != nil {
		return err
	}
	for i, want := range []byte{headerDict, headerBatch} {
		for _, blk := range blocks[i] {
			if err := checkBlock(f, g, blk, want); err != nil {
				return err
			}
		}
	}
	return nil
}

// fileBlock is a block of a file's footer: the offset of a message, the
// length of its metadata (with the length prefix) and of its body.
type fileBlock struct{ off, meta, body int64 }

// disjoint checks that no two blocks share a byte, so that reading every
// block reads no byte of the file twice.
func disjoint(blocks []fileBlock) error {
	slices.SortFunc(blocks, func(a, b fileBlock) int { return cmp.Compare(a.off, b.off) })
	for i := 1; i < len(blocks); i++ {
		if prev := blocks[i-1]; blocks[i].off < prev.off+prev.meta+prev.body {
			return fmt.Errorf("two blocks of the footer overlap: %w", errBadMeta)
		}
	}
	return nil
}

// checkBlock checks the message of a file block, which must be of kind
// want, and its batch.
func checkBlock(f *os.File, g *batchGuard, blk fileBlock, want byte) error {
	buf := make([]byte, blk.meta)
	if _, err := f.ReadAt(buf, blk.off); err != nil {
		return err
	}
	// The prefix as the library reads it: continuation marker and length,
	// or a bare length from before the marker existed.
	prefix := 4
	switch binary.LittleEndian.Uint32(buf) {
	case 0:
		prefix = 0
	case 0xffffffff:
		prefix = 8
	}
	got, kind, err := checkMessage(buf[prefix:])
	if err != nil {
		return err
	}
	if got > blk.body {
		return fmt.Errorf("a message body is longer than its block: %w", errBadMeta)
	}
	if kind != want {
		return fmt.Errorf("a block holds a message of another kind: %w", errBadMeta)
	}
	return g.check(buf[prefix:], io.NewSectionReader(f, blk.off+blk.meta, blk.body), blk.body)
}

// msgReader frames the messages of an IPC stream like the library's own
// reader, but checks each message's metadata first and grows the body as
// bytes arrive, so a damaged length cannot claim more memory than the input
// holds.
type msgReader struct {
	r      io.Reader
	msg    *ipc.Message
	buf    [4]byte
	schema []byte      // the metadata of the schema message
	guard  *batchGuard // set once the library has read the schema
	dicts  int         // dictionaries the library still expects first
}

// Message returns the next message, or io.EOF at the end of the stream (an
// end-of-stream marker, or the input ending between two messages).
func (m *msgReader) Message() (*ipc.Message, error) {
	if m.msg != nil {
		m.msg.Release()
		m.msg = nil
	}
	if _, err := io.ReadFull(m.r, m.buf[:]); err != nil {
		return nil, err // io.EOF only when no byte was left
	}
	n := binary.LittleEndian.Uint32(m.buf[:])
	if n == 0xffffffff {
		if _, err := io.ReadFull(m.r, m.buf[:]); err != nil {
			return nil, unexpected(err)
		}
		n = binary.LittleEndian.Uint32(m.buf[:])
	}
	if n == 0 {
		return nil, io.EOF
	}
	if n > 1<<30 {
		return nil, fmt.Errorf("message metadata of %d bytes: %w", n, errBadMeta)
	}
	meta, err := readGrow(m.r, int64(n))
	if err != nil {
		return nil, err
	}
	bodyLen, kind, err := checkMessage(meta)
	if err != nil {
		return nil, err
	}
	body, err := readGrow(m.r, bodyLen)
	if err != nil {
		return nil, err
	}
	if m.guard != nil && m.dicts > 0 {
		// The library reads the messages after the schema as its
		// dictionaries, whatever their kind.
		if kind != headerDict {
			return nil, fmt.Errorf("the dictionaries do not follow the schema (%d missing): %w", m.dicts, errBadMeta)
		}
		m.dicts--
	}
	switch kind {
	case headerSchema:
		if m.schema == nil {
			m.schema = meta
		}
	case headerDict, headerBatch:
		if m.guard == nil {
			return nil, fmt.Errorf("a batch before the schema: %w", errBadMeta)
		}
		if err := m.guard.check(meta, bytes.NewReader(body), bodyLen); err != nil {
			return nil, err
		}
	}
	m.msg = ipc.NewMessage(memory.NewBufferBytes(meta), memory.NewBufferBytes(body))
	return m.msg, nil
}

// Retain does nothing: the reader belongs to one ipc.Reader.
func (m *msgReader) Retain() {}

// Release drops the last message.
func (m *msgReader) Release() {
	if m.msg != nil {
		m.msg.Release()
		m.msg = nil
	}
}

// readGrow reads exactly n bytes, allocating in step with the bytes read.
func readGrow(r io.Reader, n int64) ([]byte, error) {
	const step = 1 << 20
	if n <= step {
		b := make([]byte, n)
		_, err := io.ReadFull(r, b)
		return b, unexpected(err)
	}
	b := make([]byte, 0, step)
	for int64(len(b)) < n {
		if len(b) == cap(b) {
			c := min(int64(cap(b))*2, n)
			nb := make([]byte, len(b), c)
			copy(nb, b)
			b = nb
		}
		k, err := io.ReadFull(r, b[len(b):cap(b)])
		b = b[:len(b)+k]
		if err != nil {
			return nil, unexpected(err)
		}
	}
	return b, nil
}

// unexpected turns io.EOF inside a message into io.ErrUnexpectedEOF.
func unexpected(err error) error {
	if err == io.EOF {
		return io.ErrUnexpectedEOF
	}
	return err
}
