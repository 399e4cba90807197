package arrowio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/array"
	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"
	flatbuffers "github.com/google/flatbuffers/go"

	"manyfold/io/table"
)

// ipcMsg locates one message of an IPC file or stream: its metadata
// flatbuffer and its body.
type ipcMsg struct {
	meta, body []byte
}

// messages splits the bytes of a stream, or of a file after its leading
// magic, into their messages (the footer of a file is not one).
func messages(t *testing.T, data []byte) []ipcMsg {
	t.Helper()
	pos := 0
	if bytes.HasPrefix(data, ipc.Magic) {
		pos = 8
	}
	var out []ipcMsg
	for pos+8 <= len(data) && binary.LittleEndian.Uint32(data[pos:]) == 0xffffffff {
		n := int(binary.LittleEndian.Uint32(data[pos+4:]))
		if n == 0 {
			break
		}
		meta := data[pos+8 : pos+8+n]
		c := newCheck(meta)
		root := c.root()
		var body int64
		if o := flatbuffers.UOffsetT(root.Offset(slotMsgBodyLength)); o != 0 {
			body = root.GetInt64(o + root.Pos)
		}
		start := pos + 8 + n
		out = append(out, ipcMsg{meta: meta, body: data[start : start+int(body)]})
		pos = start + int(body)
	}
	return out
}

// recordBatch returns the RecordBatch table of a record or dictionary batch
// message, and whether the message is one.
func recordBatch(meta []byte) (flatbuffers.Table, bool) {
	c := newCheck(meta)
	root := c.root()
	o := flatbuffers.UOffsetT(root.Offset(slotMsgHeaderType))
	if o == 0 {
		return flatbuffers.Table{}, false
	}
	kind := root.GetByte(o + root.Pos)
	var ht flatbuffers.Table
	root.Union(&ht, flatbuffers.UOffsetT(root.Offset(slotMsgHeader)))
	switch kind {
	case headerBatch:
		return ht, true
	case headerDict:
		d := flatbuffers.UOffsetT(ht.Offset(slotDictData))
		return flatbuffers.Table{Bytes: meta, Pos: ht.Indirect(d + ht.Pos)}, true
	}
	return flatbuffers.Table{}, false
}

// keep leaves the length of a batch as it is.
const keep = math.MinInt64

// patch describes a change to the batches of a message: the batch length,
// the lengths and null counts of field nodes, the place of buffers, and the
// uncompressed length claimed by the prefix of buffers of a compressed body.
type patch struct {
	dict     bool             // patch dictionary batches instead of record batches
	length   int64            // RecordBatch.length
	nodes    map[int]int64    // node index -> length
	nulls    map[int]int64    // node index -> null count
	prefixes map[int]int64    // buffer index -> uncompressed length prefix
	buffers  map[int][2]int64 // buffer index -> (offset, length)
	payload  map[int][]byte   // buffer index -> bytes after the length prefix
}

// apply patches every batch message of data in place (the first one only
// when first is set).
func (p patch) apply(t *testing.T, data []byte, first bool) {
	t.Helper()
	done := 0
	for _, m := range messages(t, data) {
		rb, ok := recordBatch(m.meta)
		if !ok {
			continue
		}
		isDict := func() bool {
			root := newCheck(m.meta).root()
			o := flatbuffers.UOffsetT(root.Offset(slotMsgHeaderType))
			return root.GetByte(o+root.Pos) == headerDict
		}()
		if isDict != p.dict {
			continue
		}
		if p.length != keep {
			o := flatbuffers.UOffsetT(rb.Offset(slotBatchLength))
			if o == 0 {
				t.Fatal("the batch length is not stored")
			}
			binary.LittleEndian.PutUint64(m.meta[rb.Pos+o:], uint64(p.length))
		}
		if len(p.nodes) > 0 {
			start := rb.Vector(flatbuffers.UOffsetT(rb.Offset(slotBatchNodes)))
			for i, n := range p.nodes {
				binary.LittleEndian.PutUint64(m.meta[int(start)+i*nodeSize:], uint64(n))
			}
		}
		if len(p.nulls) > 0 {
			start := rb.Vector(flatbuffers.UOffsetT(rb.Offset(slotBatchNodes)))
			for i, n := range p.nulls {
				binary.LittleEndian.PutUint64(m.meta[int(start)+i*nodeSize+8:], uint64(n))
			}
		}
		bstart := int(rb.Vector(flatbuffers.UOffsetT(rb.Offset(slotBatchBuffers))))
		for i, ol := range p.buffers {
			binary.LittleEndian.PutUint64(m.meta[bstart+i*bufferSize:], uint64(ol[0]))
			binary.LittleEndian.PutUint64(m.meta[bstart+i*bufferSize+8:], uint64(ol[1]))
		}
		for i, u := range p.prefixes {
			off := binary.LittleEndian.Uint64(m.meta[bstart+i*bufferSize:])
			if binary.LittleEndian.Uint64(m.meta[bstart+i*bufferSize+8:]) < 8 {
				t.Fatalf("buffer %d is not compressed", i)
			}
			binary.LittleEndian.PutUint64(m.body[off:], uint64(u))
		}
		for i, pl := range p.payload {
			off := binary.LittleEndian.Uint64(m.meta[bstart+i*bufferSize:])
			if binary.LittleEndian.Uint64(m.meta[bstart+i*bufferSize+8:]) < 8+uint64(len(pl)) {
				t.Fatalf("buffer %d is shorter than the payload", i)
			}
			copy(m.body[off+8:], pl)
		}
		done++
		if first {
			break
		}
	}
	if done == 0 {
		t.Fatal("no batch to patch")
	}
}

// recordOf makes a record of the given columns with Arrow's builders.
func recordOf(t testing.TB, schema *arrow.Schema, rows int) arrow.Record {
	t.Helper()
	mem := memory.NewGoAllocator()
	cols := make([]arrow.Array, schema.NumFields())
	for i, f := range schema.Fields() {
		b := array.NewBuilder(mem, f.Type)
		for r := 0; r < rows; r++ {
			switch b := b.(type) {
			case *array.NullBuilder:
				b.AppendNull()
			case *array.Int64Builder:
				b.Append(int64(r % 3))
			case *array.Float64Builder:
				b.Append(0)
			case *array.StringBuilder:
				b.Append("PC-0050" + string(rune('0'+r%10)))
			case *array.StringViewBuilder:
				b.Append(fmt.Sprintf("sender-%013d", r))
			case *array.BinaryDictionaryBuilder:
				if err := b.AppendString([]string{"R-North-7", "R-Ring-11"}[r%2]); err != nil {
					t.Fatal(err)
				}
			default:
				t.Fatalf("builder %T", b)
			}
		}
		cols[i] = b.NewArray()
		b.Release()
	}
	return array.NewRecord(schema, cols, int64(rows))
}

// smallArrow writes one batch of the given rows in the file or stream
// format with Arrow's own writers.
func smallArrow(t testing.TB, schema *arrow.Schema, rows int, stream bool, opts ...ipc.Option) []byte {
	t.Helper()
	rec := recordOf(t, schema, rows)
	defer rec.Release()
	return writeRecord(t, rec, stream, opts...)
}

// writeRecord writes rec as a file or a stream with Arrow's own writers.
func writeRecord(t testing.TB, rec arrow.Record, stream bool, opts ...ipc.Option) []byte {
	t.Helper()
	opts = append(opts, ipc.WithSchema(rec.Schema()))
	var buf bytes.Buffer
	if stream {
		w := ipc.NewWriter(&buf, opts...)
		if err := w.Write(rec); err != nil {
			t.Fatal(err)
		}
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		return buf.Bytes()
	}
	path := filepath.Join(t.TempDir(), "small.arrow")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	w, err := ipc.NewFileWriter(f, opts...)
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(rec); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// readBounded reads data to the end through Open, touching every value,
// and returns the first error and the bytes allocated meanwhile.
func readBounded(t *testing.T, data []byte, name string) (error, uint64) {
	t.Helper()
	path := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	err := func() error {
		r, err := Open(path)
		if err != nil {
			return err
		}
		defer r.Close()
		for {
			b, err := r.Next()
			if err == io.EOF {
				return nil
			}
			if err != nil {
				return err
			}
			for ci := range b.Cols {
				for i := 0; i < b.Rows; i++ {
					b.Cols[ci].AppendText(nil, i)
				}
			}
		}
	}()
	runtime.ReadMemStats(&after)
	return err, after.TotalAlloc - before.TotalAlloc
}

// memoryBound is the most a hostile input of a few kilobytes may make the
// reader allocate.
const memoryBound = 32 << 20

var (
	nullSchema     = arrow.NewSchema([]arrow.Field{{Name: "comment", Type: arrow.Null, Nullable: true}}, nil)
	nullIntSchema  = arrow.NewSchema([]arrow.Field{{Name: "comment", Type: arrow.Null, Nullable: true}, {Name: "parcels", Type: arrow.PrimitiveTypes.Int64}}, nil)
	zeroSchema     = arrow.NewSchema([]arrow.Field{{Name: "weight_kg", Type: arrow.PrimitiveTypes.Float64}}, nil)
	intSchema      = arrow.NewSchema([]arrow.Field{{Name: "parcels", Type: arrow.PrimitiveTypes.Int64}}, nil)
	textSchema     = arrow.NewSchema([]arrow.Field{{Name: "postcode", Type: arrow.BinaryTypes.String}}, nil)
	dictTextSchema = arrow.NewSchema([]arrow.Field{{Name: "route", Type: &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int32, ValueType: arrow.BinaryTypes.String}}}, nil)
)

// TestHostileLengths patches the lengths of small valid files, in both
// formats, to values the bytes cannot hold: reading must fail with
// ErrCorrupt naming the file, the batch and the column, and allocate little.
func TestHostileLengths(t *testing.T) {
	none := map[int]int64(nil)
	cases := []struct {
		name   string
		schema *arrow.Schema
		rows   int
		opts   []ipc.Option
		patch  patch
		want   []string // in the message besides the file name
	}{
		{"null column of 2^33 rows", nullSchema, 3, nil,
			patch{length: 1 << 33, nodes: map[int]int64{0: 1 << 33}}, []string{"record batch 1", `column "comment"`}},
		{"null column of 2^28 rows", nullSchema, 3, nil,
			patch{length: 1 << 28, nodes: map[int]int64{0: 1 << 28}}, []string{"record batch 1", `column "comment"`}},
		{"null column of 2^28 rows beside an int column", nullIntSchema, 3, nil,
			patch{length: 1 << 28, nodes: map[int]int64{0: 1 << 28, 1: 1 << 28}}, []string{"record batch 1", `column "parcels"`}},
		{"batch longer than its columns", nullIntSchema, 3, nil,
			patch{length: 1 << 28, nodes: none}, []string{"record batch 1", `column "comment"`}},
		{"int column longer than its values", intSchema, 3, nil,
			patch{length: 1 << 40, nodes: map[int]int64{0: 1 << 40}}, []string{"record batch 1", `column "parcels"`}},
		{"negative batch length", intSchema, 3, nil,
			patch{length: -5, nodes: none}, []string{"record batch 1"}},
		{"more nulls than rows", intSchema, 3, nil,
			patch{length: keep, nulls: map[int]int64{0: 4}}, []string{"record batch 1", `column "parcels"`}},
		{"text column longer than its offsets", textSchema, 3, nil,
			patch{length: 1 << 31, nodes: map[int]int64{0: 1 << 31}}, []string{"record batch 1", `column "postcode"`}},
		{"dictionary longer than its offsets", dictTextSchema, 3, nil,
			patch{dict: true, length: 1 << 33, nodes: map[int]int64{0: 1 << 33}}, []string{"dictionary batch 1", `column "route"`}},
		{"zstd buffer claiming 8 GiB", intSchema, 1000, []ipc.Option{ipc.WithZstd()},
			patch{length: keep, prefixes: map[int]int64{1: 1 << 33}}, []string{"record batch 1", `column "parcels"`}},
		{"zstd buffer claiming 8 GiB - 1", intSchema, 1000, []ipc.Option{ipc.WithZstd()},
			patch{length: keep, prefixes: map[int]int64{1: 1<<33 - 1}}, []string{"record batch 1", `column "parcels"`}},
		{"lz4 buffer claiming 8 GiB", intSchema, 1000, []ipc.Option{ipc.WithLZ4()},
			patch{length: keep, prefixes: map[int]int64{1: 1 << 33}}, []string{"record batch 1", `column "parcels"`}},
		{"zstd buffer claiming more than its rows need", intSchema, 1000, []ipc.Option{ipc.WithZstd()},
			patch{length: keep, prefixes: map[int]int64{1: 100_000}}, []string{"record batch 1", `column "parcels"`}},
		{"zstd text buffer claiming 8 GiB", textSchema, 1000, []ipc.Option{ipc.WithZstd()},
			patch{length: keep, prefixes: map[int]int64{2: 1 << 33}}, []string{"record batch 1", `column "postcode"`}},
		{"lz4 dictionary buffer claiming 8 GiB", dictTextSchema, 1000, []ipc.Option{ipc.WithLZ4()},
			patch{dict: true, length: keep, prefixes: map[int]int64{1: 1 << 33}}, []string{"dictionary batch 1", `column "route"`}},
		{"zstd frame asking for a window of 512 MiB", intSchema, 1000, []ipc.Option{ipc.WithZstd()},
			patch{length: keep, prefixes: map[int]int64{1: 8000}, payload: map[int][]byte{1: zstdRLE(19<<3, 8000)}}, []string{"record batch 1", `column "parcels"`, "window"}},
		{"zstd frame with a content size of 512 MiB", intSchema, 1000, []ipc.Option{ipc.WithZstd()},
			patch{length: keep, prefixes: map[int]int64{1: 8000}, payload: map[int][]byte{1: zstdSingle(1<<29, 8000)}}, []string{"record batch 1", `column "parcels"`, "window"}},
		{"compressed buffer claiming a negative length", intSchema, 1000, []ipc.Option{ipc.WithZstd()},
			patch{length: keep, prefixes: map[int]int64{1: -2}}, []string{"record batch 1", `column "parcels"`}},
	}
	for _, tc := range cases {
		for _, stream := range []bool{false, true} {
			format := map[bool]string{false: "file", true: "stream"}[stream]
			t.Run(tc.name+"/"+format, func(t *testing.T) {
				data := smallArrow(t, tc.schema, tc.rows, stream, tc.opts...)
				tc.patch.apply(t, data, true)
				err, alloc := readBounded(t, data, "hostile.arrow")
				if alloc > memoryBound {
					t.Errorf("reading %d bytes allocated %d MB", len(data), alloc>>20)
				}
				if !errors.Is(err, table.ErrCorrupt) {
					t.Fatalf("error %v, want ErrCorrupt", err)
				}
				for _, w := range append([]string{"hostile.arrow"}, tc.want...) {
					if !strings.Contains(err.Error(), w) {
						t.Errorf("error %q does not say %q", err, w)
					}
				}
				t.Log(err)
				if strings.Contains(err.Error(), "\n") {
					t.Errorf("error %q spans lines", err)
				}
			})
		}
	}
}

// zstdRLE is a ZSTD frame with the window descriptor wd whose one block
// repeats a zero byte n times (RFC 8878, 3.1.1).
func zstdRLE(wd byte, n int) []byte {
	h := 1 | 1<<1 | n<<3 // last block, RLE, size
	return []byte{0x28, 0xb5, 0x2f, 0xfd, 0x00, wd, byte(h), byte(h >> 8), byte(h >> 16), 0}
}

// zstdSingle is a single-segment ZSTD frame claiming a content size of
// size bytes, whose one block repeats a zero byte n times.
func zstdSingle(size uint32, n int) []byte {
	h := 1 | 1<<1 | n<<3
	f := []byte{0x28, 0xb5, 0x2f, 0xfd, 0x20 | 2<<6}
	f = binary.LittleEndian.AppendUint32(f, size)
	return append(f, byte(h), byte(h>>8), byte(h>>16), 0)
}

// TestLengthsWithinBounds reads valid files near the limits: a null-only
// batch, and compressed columns in both codecs, zeros compressing about as
// far as each codec goes.
func TestLengthsWithinBounds(t *testing.T) {
	cases := []struct {
		name   string
		schema *arrow.Schema
		rows   int
		opts   []ipc.Option
	}{
		{"null column", nullSchema, 5000, nil},
		{"null beside int", nullIntSchema, 100_000, nil},
		{"zstd int", intSchema, 100_000, []ipc.Option{ipc.WithZstd()}},
		{"lz4 int", intSchema, 100_000, []ipc.Option{ipc.WithLZ4()}},
		{"zstd zeros", zeroSchema, 1 << 20, []ipc.Option{ipc.WithZstd()}},
		{"lz4 zeros", zeroSchema, 1 << 20, []ipc.Option{ipc.WithLZ4()}},
		{"zstd text", textSchema, 10_000, []ipc.Option{ipc.WithZstd()}},
		{"lz4 dictionary", dictTextSchema, 10_000, []ipc.Option{ipc.WithLZ4()}},
	}
	for _, tc := range cases {
		for _, stream := range []bool{false, true} {
			t.Run(tc.name, func(t *testing.T) {
				data := smallArrow(t, tc.schema, tc.rows, stream, tc.opts...)
				path := filepath.Join(t.TempDir(), "ok.arrow")
				if err := os.WriteFile(path, data, 0o644); err != nil {
					t.Fatal(err)
				}
				r, err := Open(path)
				if err != nil {
					t.Fatal(err)
				}
				defer r.Close()
				rows := 0
				for {
					b, err := r.Next()
					if err == io.EOF {
						break
					}
					if err != nil {
						t.Fatal(err)
					}
					rows += b.Rows
				}
				if rows != tc.rows {
					t.Errorf("%d rows, want %d", rows, tc.rows)
				}
			})
		}
	}
}

// TestViewsSharingText points every view of a text view column at the whole
// of its data buffer: the text the views make is limited by the column's
// bytes, not only by 2 GiB.
func TestViewsSharingText(t *testing.T) {
	schema := arrow.NewSchema([]arrow.Field{{Name: "sender", Type: arrow.BinaryTypes.StringView}}, nil)
	for _, stream := range []bool{false, true} {
		data := smallArrow(t, schema, 2000, stream)
		err, _ := readBounded(t, data, "views.arrow")
		if err != nil {
			t.Fatalf("the valid file: %v", err)
		}
		for _, m := range messages(t, data) {
			rb, ok := recordBatch(m.meta)
			if !ok {
				continue
			}
			bufs := rb.Vector(flatbuffers.UOffsetT(rb.Offset(slotBatchBuffers)))
			buf := func(i int) (int, int) {
				p := int(bufs) + i*bufferSize
				return int(binary.LittleEndian.Uint64(m.meta[p:])), int(binary.LittleEndian.Uint64(m.meta[p+8:]))
			}
			voff, vlen := buf(1)
			_, dlen := buf(2)
			for v := voff; v+16 <= voff+vlen; v += 16 {
				binary.LittleEndian.PutUint32(m.body[v:], uint32(dlen))
				copy(m.body[v+4:v+8], "send")
				binary.LittleEndian.PutUint32(m.body[v+8:], 0)
				binary.LittleEndian.PutUint32(m.body[v+12:], 0)
			}
		}
		err, alloc := readBounded(t, data, "views.arrow")
		if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), `record batch 1: column "sender"`) {
			t.Errorf("error %v, want ErrCorrupt naming the batch and the column", err)
		}
		if alloc > memoryBound {
			t.Errorf("reading %d bytes allocated %d MB", len(data), alloc>>20)
		}
	}
}

// TestOverlappingBlocks lists one record batch twice in a file's footer:
// each block must own its bytes, so that reading every block reads the
// file once.
func TestOverlappingBlocks(t *testing.T) {
	data, _ := writeArrow(t, eventSchema, eventBatches, false)
	footerLen := int(binary.LittleEndian.Uint32(data[len(data)-10:]))
	footer := data[len(data)-10-footerLen : len(data)-10]
	c := newCheck(footer)
	root := c.root()
	start, n, err := c.vector(&root, slotFooterRecords, blockSize)
	if err != nil || n < 2 {
		t.Fatalf("%d record blocks, %v", n, err)
	}
	copy(footer[start+blockSize:start+2*blockSize], footer[start:start+blockSize])
	err = readErr(t, data)
	if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), "overlap") {
		t.Fatalf("error %v, want ErrCorrupt saying blocks overlap", err)
	}
}

// TestGuardNestedSchema reads the flat column of a file whose other
// columns are nested, with dictionaries inside them: the batch checks must
// follow the nodes and buffers of every type as the library loads them.
func TestGuardNestedSchema(t *testing.T) {
	rec := nestedRecord(t)
	defer rec.Release()
	for _, opts := range [][]ipc.Option{nil, {ipc.WithZstd()}, {ipc.WithLZ4()}} {
		for _, stream := range []bool{false, true} {
			data := writeRecord(t, rec, stream, opts...)
			r, err := NewReader(bytes.NewReader(data), "nested.arrow")
			if err != nil {
				t.Fatal(err)
			}
			if err := r.Select([]int{3, 4, 5, 6}); err != nil {
				t.Fatal(err)
			}
			b, err := r.Next()
			if err != nil {
				t.Fatalf("stream=%v: %v", stream, err)
			}
			if b.Rows != 3 || b.Cols[3].Ints[2] != 5 || string(b.Cols[0].AppendText(nil, 2)) != "R-2" {
				t.Errorf("stream=%v: rows %d, %v", stream, b.Rows, b.Cols[3].Ints)
			}
			if _, err := r.Next(); err != io.EOF {
				t.Errorf("stream=%v: %v, want io.EOF", stream, err)
			}
			r.Close()
		}
	}
}

// nestedRecord is a record of nested columns, with dictionaries inside
// them, beside flat ones (the last four).
func nestedRecord(t testing.TB) arrow.Record {
	t.Helper()
	dict := &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int16, ValueType: arrow.BinaryTypes.String}
	schema := arrow.NewSchema([]arrow.Field{
		{Name: "stops", Type: arrow.ListOf(arrow.PrimitiveTypes.Int64), Nullable: true},
		{Name: "depot", Type: arrow.StructOf(
			arrow.Field{Name: "code", Type: arrow.PrimitiveTypes.Int32, Nullable: true},
			arrow.Field{Name: "region", Type: dict, Nullable: true},
			arrow.Field{Name: "none", Type: arrow.Null, Nullable: true}), Nullable: true},
		{Name: "tags", Type: arrow.MapOf(arrow.BinaryTypes.String, arrow.PrimitiveTypes.Int32), Nullable: true},
		{Name: "route", Type: dict, Nullable: true},
		{Name: "seal", Type: &arrow.FixedSizeBinaryType{ByteWidth: 3}, Nullable: true},
		{Name: "sender", Type: arrow.BinaryTypes.StringView, Nullable: true},
		{Name: "parcels", Type: arrow.PrimitiveTypes.Int64, Nullable: true},
	}, nil)
	rows := `[
		{"stops": [1, 2], "depot": {"code": 7, "region": "north", "none": null}, "tags": [{"key": "a", "value": 1}], "route": "R-1", "seal": "YWJj", "sender": "a sender of more than twelve bytes", "parcels": 3},
		{"stops": null, "depot": null, "tags": null, "route": null, "seal": null, "sender": null, "parcels": null},
		{"stops": [], "depot": {"code": null, "region": "south", "none": null}, "tags": [], "route": "R-2", "seal": "eHl6", "sender": "s", "parcels": 5}
	]`
	rec, _, err := array.RecordFromJSON(memory.NewGoAllocator(), schema, strings.NewReader(rows))
	if err != nil {
		t.Fatal(err)
	}
	return rec
}

// TestStreamBatchInPlaceOfDictionary drops the dictionary message of a
// stream, so that a record batch arrives where the library expects the
// dictionary and would load it as one: the reader refuses it first.
func TestStreamBatchInPlaceOfDictionary(t *testing.T) {
	data := smallArrow(t, dictTextSchema, 4, true)
	var out []byte
	for _, m := range messages(t, data) {
		root := newCheck(m.meta).root()
		if root.GetByte(flatbuffers.UOffsetT(root.Offset(slotMsgHeaderType))+root.Pos) == headerDict {
			continue
		}
		out = binary.LittleEndian.AppendUint32(out, 0xffffffff)
		out = binary.LittleEndian.AppendUint32(out, uint32(len(m.meta)))
		out = append(append(out, m.meta...), m.body...)
	}
	out = append(out, 0xff, 0xff, 0xff, 0xff, 0, 0, 0, 0)
	err, _ := readBounded(t, out, "nodict.arrows")
	if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), "the dictionaries do not follow the schema") {
		t.Fatalf("error %v, want ErrCorrupt saying the dictionary is missing", err)
	}
}
