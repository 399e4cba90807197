package pqio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/andybalholm/brotli"
	"github.com/apache/arrow/go/v17/arrow"
	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// pageEdit changes one page of a file being rebuilt: g, c and p are its
// row group, column and page (0-based), h its header and body its stored
// bytes. It returns the body to write.
type pageEdit func(g, c, p int, h *format.PageHeader, body []byte) []byte

// rebuild rewrites a Parquet file page by page through edit, moving the
// chunks' offsets and sizes in the footer to match; md, when not nil, may
// change the footer last.
func rebuild(t testing.TB, data []byte, edit pageEdit, md func(*format.FileMetaData)) []byte {
	t.Helper()
	n := int(binary.LittleEndian.Uint32(data[len(data)-8:]))
	var meta format.FileMetaData
	if err := thrift.Unmarshal(&compact, data[len(data)-8-n:len(data)-8], &meta); err != nil {
		t.Fatal(err)
	}
	out := []byte("PAR1")
	for g := range meta.RowGroups {
		rg := &meta.RowGroups[g]
		for c := range rg.Columns {
			cm := &rg.Columns[c].MetaData
			start, size := chunkRange(cm)
			begin := int64(len(out))
			cm.DataPageOffset, cm.DictionaryPageOffset = -1, 0
			for pos, p := start, 0; pos < start+size; p++ {
				h, hlen, err := readPageHeader(bytes.NewReader(data), pos, start+size, new([]byte))
				if err != nil {
					t.Fatal(err)
				}
				body := bytes.Clone(data[pos+int64(hlen) : pos+int64(hlen)+int64(h.CompressedPageSize)])
				pos += int64(hlen) + int64(h.CompressedPageSize)
				body = edit(g, c, p, h, body)
				h.CompressedPageSize = int32(len(body))
				if h.Type == format.DictionaryPage {
					cm.DictionaryPageOffset = int64(len(out))
				} else if cm.DataPageOffset < 0 {
					cm.DataPageOffset = int64(len(out))
				}
				hb, err := thrift.Marshal(&compact, h)
				if err != nil {
					t.Fatal(err)
				}
				out = append(append(out, hb...), body...)
			}
			cm.TotalCompressedSize = int64(len(out)) - begin
			rg.Columns[c].FileOffset = begin
		}
	}
	if md != nil {
		md(&meta)
	}
	fb, err := thrift.Marshal(&compact, &meta)
	if err != nil {
		t.Fatal(err)
	}
	out = append(out, fb...)
	out = binary.LittleEndian.AppendUint32(out, uint32(len(fb)))
	return append(out, "PAR1"...)
}

// withCRC sets a page's CRC to that of its (edited) body.
func withCRC(h *format.PageHeader, body []byte) []byte {
	h.CRC = pageCRC(body)
	return body
}

// crcFile writes a small file of a dictionary text column, an int column
// with nulls and a bool column, two row groups of several pages each.
func crcFile(t testing.TB, compression string) []byte {
	t.Helper()
	withGeometry(t, 256, 1<<17, 1<<20)
	const n = 3000
	schema := &table.Schema{Fields: []table.Field{
		{Name: "s", Kind: table.String}, {Name: "i", Kind: table.Int64, Nullable: true}, {Name: "b", Kind: table.Bool},
	}}
	var cols []table.Column
	for i, k := range []table.Kind{table.String, table.Int64, table.Bool} {
		cs := sample(k, n, uint64(i+1))
		if k == table.Int64 {
			for j := range cs {
				if j%7 == 3 {
					cs[j] = cell{null: true}
				}
			}
		}
		cols = append(cols, col(t, k, ownForm(k), cs))
	}
	return writeCols(t, schema, cols, n, 700, WriterOptions{RowGroupRows: 1500, Compression: compression})
}

// TestPageCRCWritten checks that every page the writer writes records the
// CRC-32 (IEEE) of its stored bytes, the Parquet format's definition, and
// that Arrow's Parquet reader reads the file whole.
func TestPageCRCWritten(t *testing.T) {
	for _, comp := range []string{"snappy", "zstd", "none"} {
		pages := 0
		data := crcFile(t, comp)
		rows := 0
		arrowRead(t, data, "", nil, func(rec arrow.Record) { rows += int(rec.NumRows()) })
		if rows != 3000 {
			t.Fatalf("%s: Arrow's reader read %d rows, want 3000", comp, rows)
		}
		rebuild(t, data, func(g, c, p int, h *format.PageHeader, body []byte) []byte {
			pages++
			if h.CRC == 0 || uint32(h.CRC) != crc32.ChecksumIEEE(body) {
				t.Errorf("%s: row group %d, column %d, page %d: CRC 0x%08x, bytes 0x%08x", comp, g, c, p, uint32(h.CRC), crc32.ChecksumIEEE(body))
			}
			return body
		}, nil)
		if pages < 10 {
			t.Fatalf("%s: only %d pages", comp, pages)
		}
	}
}

// flipPage returns a copy of data with one byte of page p of column c in
// row group 1 changed, its CRC left as it was.
func flipPage(t testing.TB, data []byte, c, p int) []byte {
	return rebuild(t, data, func(g, cc, pp int, h *format.PageHeader, body []byte) []byte {
		if g == 1 && cc == c && pp == p {
			body[len(body)/2] ^= 0x10
		}
		return body
	}, nil)
}

// TestPageCRCMismatch damages one byte of a page (a dictionary page, then
// a data page) and checks that the reader and the chunk copier, with the
// same codec and recompressing, both refuse the file, naming the column,
// the row group and the page.
func TestPageCRCMismatch(t *testing.T) {
	data := crcFile(t, "snappy")
	for _, tc := range []struct {
		name string
		c, p int
		want string
	}{{"dictionary page", 0, 0, `column "s": row group 2: page 1`}, {"data page", 1, 2, `column "i": row group 2: page 3`}} {
		bad := flipPage(t, data, tc.c, tc.p)
		t.Run(tc.name+"/reader", func(t *testing.T) {
			r := openBytes(t, "bad.parquet", bad)
			defer r.Close()
			var err error
			for err == nil {
				_, err = r.Next()
			}
			if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), "bad.parquet: "+tc.want) || !strings.Contains(err.Error(), "checksum") {
				t.Fatalf("Next: %v, want ErrCorrupt naming %s and the checksum", err, tc.want)
			}
		})
		path := filepath.Join(t.TempDir(), "bad.parquet")
		if err := os.WriteFile(path, bad, 0o644); err != nil {
			t.Fatal(err)
		}
		for _, comp := range []string{"snappy", "zstd"} {
			t.Run(tc.name+"/copy-"+comp, func(t *testing.T) {
				err := copyAll(t, path, comp)
				want := strings.Replace(tc.want, ": row group", ", row group", 1)
				if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), "checksum") {
					t.Fatalf("copy: %v, want ErrCorrupt naming %s and the checksum", err, want)
				}
			})
		}
	}
}

// copyAll copies every column of the file at path into a new file of the
// given compression and returns the error of the copy.
func copyAll(t testing.TB, path, comp string) error {
	t.Helper()
	s, err := OpenSource(path)
	if err != nil {
		return err
	}
	defer s.Close()
	r, err := Open(path)
	if err != nil {
		return err
	}
	fields := r.Schema().Fields
	r.Close()
	copied := make([]bool, len(fields))
	for i, f := range fields {
		if err := s.CanCopy(f.Name); err != nil {
			return err
		}
		copied[i] = true
	}
	w, err := NewWriter(io.Discard, &table.Schema{Fields: fields}, WriterOptions{Compression: comp, Source: s, Copy: copied})
	if err != nil {
		return err
	}
	n := int(s.NumRows())
	b := &table.Batch{Rows: n, FirstRow: 1, Cols: make([]table.Column, len(fields))}
	if err := w.Write(b); err != nil {
		return err
	}
	return w.Close()
}

// TestRecompressedCRC copies a file of ours into another codec and checks
// that each recompressed page records the CRC of its new bytes.
func TestRecompressedCRC(t *testing.T) {
	path := filepath.Join(t.TempDir(), "in.parquet")
	if err := os.WriteFile(path, crcFile(t, "snappy"), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := OpenSource(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	fields := r.Schema().Fields
	r.Close()
	var buf bytes.Buffer
	w, err := NewWriter(&buf, &table.Schema{Fields: fields}, WriterOptions{Compression: "zstd", Source: s, Copy: []bool{true, true, true}})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(&table.Batch{Rows: int(s.NumRows()), FirstRow: 1, Cols: make([]table.Column, 3)}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	rebuild(t, buf.Bytes(), func(g, c, p int, h *format.PageHeader, body []byte) []byte {
		if h.CRC == 0 || uint32(h.CRC) != crc32.ChecksumIEEE(body) {
			t.Errorf("row group %d, column %d, page %d: CRC 0x%08x, bytes 0x%08x", g, c, p, uint32(h.CRC), crc32.ChecksumIEEE(body))
		}
		return body
	}, nil)
	readAll(t, openBytes(t, "out.parquet", buf.Bytes()))
}

// allocDuring returns the bytes allocated while f runs.
func allocDuring(f func()) uint64 {
	var a, b runtime.MemStats
	runtime.ReadMemStats(&a)
	f()
	runtime.ReadMemStats(&b)
	return b.TotalAlloc - a.TotalAlloc
}

// hostileCase is a file built from a small valid one by patching page
// headers, page bodies or the footer, and the text its error must hold.
type hostileCase struct {
	name string
	comp string // the valid file's compression
	edit pageEdit
	md   func(*format.FileMetaData)
	want string
	// patch, when set, replaces edit and md: it damages the file itself.
	patch func(t testing.TB, data []byte) []byte
	// copyWant, when set, is in the error of copying the file's chunks
	// into a zstd file (copies without recompressing decode nothing, and
	// may succeed).
	copyWant string
}

// build returns the damaged file made from data.
func (tc *hostileCase) build(t testing.TB, data []byte) []byte {
	if tc.patch != nil {
		return tc.patch(t, data)
	}
	return rebuild(t, data, tc.edit, tc.md)
}

// onPage applies f to the first page of type typ of column c in row group
// 0, and fixes the page's CRC.
func onPage(c int, typ format.PageType, f func(h *format.PageHeader, body []byte) []byte) pageEdit {
	done := false
	return func(g, cc, pp int, h *format.PageHeader, body []byte) []byte {
		if g == 0 && cc == c && h.Type == typ && !done {
			done = true
			return withCRC(h, f(h, body))
		}
		return body
	}
}

// hugeRun is the header of an RLE run of 2^31-1 values, then its value.
func hugeRun(value ...byte) []byte {
	return append(binary.AppendUvarint(nil, (1<<31-1)<<1), value...)
}

var hostileCases = []hostileCase{
	{name: "definition level run of 2^31-1", comp: "none",
		edit: onPage(1, format.DataPage, func(h *format.PageHeader, body []byte) []byte {
			l := binary.LittleEndian.Uint32(body)
			run := hugeRun(1)
			out := binary.LittleEndian.AppendUint32(nil, uint32(len(run)))
			return append(append(out, run...), body[4+l:]...)
		}),
		want: `column "i": row group 1: page 2: definition levels: file is corrupt or truncated: runs declare more than the page's`},
	{name: "dictionary index run of 2^31-1", comp: "none",
		edit: onPage(0, format.DataPage, func(h *format.PageHeader, body []byte) []byte {
			return append([]byte{body[0]}, hugeRun(0)...)
		}),
		want: `column "s": row group 1: page 2: dictionary indices: file is corrupt or truncated: runs declare more`},
	{name: "index run of 2^31-1 after bit-packed levels", comp: "none",
		edit: onPage(1, format.DataPage, func(h *format.PageHeader, body []byte) []byte {
			h.DataPageHeader.V.DefinitionLevelEncoding = format.BitPacked
			l := binary.LittleEndian.Uint32(body)
			return append(bytes.Clone(body[:4+l]), append([]byte{body[4+l]}, hugeRun(0, 0)...)...)
		}),
		want: `column "i": row group 1: page 2: dictionary indices: file is corrupt or truncated: runs declare more`},
	{name: "data page of 2^31-1 values", comp: "snappy",
		edit: onPage(0, format.DataPage, func(h *format.PageHeader, body []byte) []byte {
			h.DataPageHeader.V.NumValues = 1<<31 - 1
			return body
		}),
		md: func(m *format.FileMetaData) {
			m.RowGroups[0].NumRows, m.NumRows = 1<<31-1, 1<<31-1+m.RowGroups[1].NumRows
		},
		want:     `column "s": row group 1: page 2: file is corrupt or truncated: page declares 2147483647 values in`,
		copyWant: `column "s", row group 1: file is corrupt or truncated: pages hold 2147485083 values, the metadata says 1500`},
	{name: "data page of more values than its row group", comp: "snappy",
		edit: onPage(2, format.DataPage, func(h *format.PageHeader, body []byte) []byte {
			h.DataPageHeader.V.NumValues = 1 << 20
			return body
		}),
		want:     `column "b": row group 1: page 1: file is corrupt or truncated: page declares 1048576 values in a row group of 1500 rows`,
		copyWant: `column "b", row group 1: file is corrupt or truncated: pages hold 1048576 values`},
	{name: "page of 2 GiB uncompressed", comp: "snappy",
		edit: onPage(1, format.DataPage, func(h *format.PageHeader, body []byte) []byte {
			h.UncompressedPageSize = 1<<31 - 1
			return body
		}),
		want:     `column "i": row group 1: page 2: file is corrupt or truncated: page declares 2147483647 bytes uncompressed`,
		copyWant: `column "i", row group 1: page 2 (byte`},
	{name: "Snappy block claiming 4 GiB", comp: "snappy",
		edit: onPage(1, format.DataPage, func(h *format.PageHeader, body []byte) []byte {
			return append(binary.AppendUvarint(nil, 1<<32-1), body[1:]...)
		}),
		want:     `column "i": row group 1: page 2: file is corrupt or truncated: page decompresses to 4294967295 bytes`,
		copyWant: `page decompresses to 4294967295 bytes`},
	{name: "zstd frame claiming 1 GiB", comp: "zstd",
		edit: onPage(1, format.DataPage, func(h *format.PageHeader, body []byte) []byte {
			// A single-segment frame header with an 8-byte content size.
			frame := []byte{0x28, 0xb5, 0x2f, 0xfd, 0xe0}
			return append(binary.LittleEndian.AppendUint64(frame, 1<<30), 1, 0, 0)
		}),
		want: `column "i": row group 1: page 2: file is corrupt or truncated: decompressing a page`},
	{name: "dictionary page of 2^31-1 values", comp: "snappy",
		edit: onPage(0, format.DictionaryPage, func(h *format.PageHeader, body []byte) []byte {
			h.DictionaryPageHeader.V.NumValues = 1<<31 - 1
			return body
		}),
		want: `column "s": row group 1: page 1: file is corrupt or truncated: dictionary page declares 2147483647 values`},
	{name: "page past its chunk", comp: "snappy",
		// rebuild follows the sizes: the header's bytes are patched in
		// place instead.
		patch:    func(t testing.TB, data []byte) []byte { return patchFirstPageSize(t, data, 2) },
		want:     `column "b": row group 1: page 1: file is corrupt or truncated: page of 223 bytes runs past its column chunk`,
		copyWant: `column "b", row group 1: page 1 (byte`},
}

// TestHostilePages reads and copies files whose page headers or bodies
// claim far more values or bytes than they hold, and checks that each is
// refused as corrupt, naming the column, row group and page, having
// allocated a few megabytes at most.
func TestHostilePages(t *testing.T) {
	const limit = 32 << 20
	for _, tc := range hostileCases {
		t.Run(tc.name, func(t *testing.T) {
			data := crcFile(t, tc.comp)
			bad := tc.build(t, data)
			var err error
			alloc := allocDuring(func() {
				r := openBytes(t, "bad.parquet", bad)
				defer r.Close()
				for err == nil {
					_, err = r.Next()
				}
			})
			if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("Next: %v\nwant ErrCorrupt with %q", err, tc.want)
			}
			if alloc > limit {
				t.Fatalf("reading allocated %d bytes", alloc)
			}
			path := filepath.Join(t.TempDir(), "bad.parquet")
			if err := os.WriteFile(path, bad, 0o644); err != nil {
				t.Fatal(err)
			}
			alloc = allocDuring(func() { err = copyAll(t, path, "zstd") })
			if alloc > limit {
				t.Fatalf("copying allocated %d bytes", alloc)
			}
			if tc.copyWant != "" && (!errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), tc.copyWant)) {
				t.Fatalf("copy: %v\nwant ErrCorrupt with %q", err, tc.copyWant)
			}
		})
	}
}

// patchFirstPageSize makes the first page of column c in row group 0 claim
// a byte more than its chunk holds, in place.
func patchFirstPageSize(t testing.TB, data []byte, c int) []byte {
	t.Helper()
	n := int(binary.LittleEndian.Uint32(data[len(data)-8:]))
	var meta format.FileMetaData
	if err := thrift.Unmarshal(&compact, data[len(data)-8-n:len(data)-8], &meta); err != nil {
		t.Fatal(err)
	}
	start, size0 := chunkRange(&meta.RowGroups[0].Columns[c].MetaData)
	h, hlen, err := readPageHeader(bytes.NewReader(data), start, start+size0, new([]byte))
	if err != nil {
		t.Fatal(err)
	}
	h.CompressedPageSize = int32(size0) + 1
	hb, err := thrift.Marshal(&compact, h)
	if err != nil {
		t.Fatal(err)
	}
	if len(hb) != hlen {
		t.Fatalf("header grows from %d to %d bytes", hlen, len(hb))
	}
	out := bytes.Clone(data)
	copy(out[start:], hb)
	return out
}

// TestSourceFooterLength opens as a Source a file whose footer length
// claims nearly 4 GiB: refused as corrupt before anything of that size is
// allocated.
func TestSourceFooterLength(t *testing.T) {
	data := bytes.Clone(crcFile(t, "snappy"))
	binary.LittleEndian.PutUint32(data[len(data)-8:], 1<<32-1)
	path := filepath.Join(t.TempDir(), "footer.parquet")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	var err error
	alloc := allocDuring(func() {
		var s *Source
		if s, err = OpenSource(path); err == nil {
			s.Close()
		}
	})
	if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), "footer of 4294967295 bytes") {
		t.Fatalf("OpenSource: %v, want ErrCorrupt naming the footer's length", err)
	}
	if alloc > 1<<20 {
		t.Fatalf("OpenSource allocated %d bytes", alloc)
	}
}

// deltaRow is written with delta encodings: DELTA_BYTE_ARRAY text and
// DELTA_BINARY_PACKED integers.
type deltaRow struct {
	S string `parquet:"s,delta"`
	I int64  `parquet:"i,delta"`
}

// appendDelta appends a DELTA_BINARY_PACKED run of count values, first
// then each d more than the one before: blocks of 128 values in 4
// miniblocks, each miniblock of bit width 0 (layout from the Parquet
// format's Encodings.md).
func appendDelta(b []byte, first, d int64, count int) []byte {
	b = binary.AppendUvarint(b, 128)
	b = binary.AppendUvarint(b, 4)
	b = binary.AppendUvarint(b, uint64(count))
	b = binary.AppendVarint(b, first)
	for left := count - 1; left > 0; left -= 128 {
		b = binary.AppendVarint(b, d)
		b = append(b, 0, 0, 0, 0)
	}
	return b
}

// setCount makes a data page (either version) declare n values, none
// null.
func setCount(h *format.PageHeader, n int32) {
	if h.DataPageHeader.Valid {
		h.DataPageHeader.V.NumValues = n
	}
	if h.DataPageHeaderV2.Valid {
		h.DataPageHeaderV2.V.NumValues, h.DataPageHeaderV2.V.NumRows, h.DataPageHeaderV2.V.NumNulls = n, n, 0
	}
}

// TestHostileDeltaPages reads files whose delta-encoded pages claim
// 2^31-1 values, or whose text values, each repeating the one before it
// plus a byte, add up to 2 GiB from a page of 70 KB: refused as corrupt,
// within 32 MB.
func TestHostileDeltaPages(t *testing.T) {
	var rows []deltaRow
	for i := range 100 {
		rows = append(rows, deltaRow{S: fmt.Sprintf("key-%03d", i), I: int64(3 * i)})
	}
	var buf bytes.Buffer
	if err := parquet.Write(&buf, rows, parquet.Compression(&parquet.Uncompressed)); err != nil {
		t.Fatal(err)
	}
	const n = 1 << 16
	isData := func(h *format.PageHeader) bool {
		return h.Type == format.DataPage || h.Type == format.DataPageV2
	}
	for _, tc := range []struct {
		name string
		edit pageEdit
		md   func(*format.FileMetaData)
		want string
	}{
		{"delta run of 2^31-1 integers", func(g, c, p int, h *format.PageHeader, body []byte) []byte {
			if c != 1 || !isData(h) {
				return body
			}
			// The header of a run of 100 values, its count made 2^31-1.
			run := appendDelta(nil, 0, 3, 100)
			body = binary.AppendUvarint(append([]byte(nil), run[:3]...), 1<<31-1)
			body = append(body, run[4:]...)
			h.UncompressedPageSize = int32(len(body))
			return withCRC(h, body)
		}, nil, `column "i": row group 1: page 1: delta values: file is corrupt or truncated: delta run declares 2147483647 values`},
		{"delta byte arrays of 2 GiB", func(g, c, p int, h *format.PageHeader, body []byte) []byte {
			if c != 0 || !isData(h) {
				return body
			}
			body = appendDelta(nil, 0, 1, n)                     // prefix lengths 0, 1, 2, ...
			body = appendDelta(body, 1, 0, n)                    // suffix lengths 1, 1, 1, ...
			body = append(body, bytes.Repeat([]byte("a"), n)...) // the suffixes
			setCount(h, n)
			h.UncompressedPageSize = int32(len(body))
			return withCRC(h, body)
		}, func(m *format.FileMetaData) { m.NumRows, m.RowGroups[0].NumRows = n, n },
			`column "s": row group 1: page 1: file is corrupt or truncated: delta byte arrays of 2147516416 bytes`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			bad := rebuild(t, buf.Bytes(), tc.edit, tc.md)
			var err error
			alloc := allocDuring(func() {
				r := openBytes(t, "delta.parquet", bad)
				defer r.Close()
				for err == nil {
					_, err = r.Next()
				}
			})
			if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("Next: %v\nwant ErrCorrupt with %q", err, tc.want)
			}
			if alloc > 32<<20 {
				t.Fatalf("reading allocated %d bytes", alloc)
			}
		})
	}
	// The undamaged file reads back.
	res := readAll(t, openBytes(t, "delta.parquet", buf.Bytes()))
	if got := res.cols[0][99].text; got != "key-099" {
		t.Fatalf("last text %q", got)
	}
}

// TestFooterListSize opens files whose footer declares a list of 2^31-1
// schema elements (the decoder would make that list before reading it) or
// is cut short: refused as corrupt by the reader and by Source, within a
// megabyte.
func TestFooterListSize(t *testing.T) {
	data := crcFile(t, "none")
	n := int(binary.LittleEndian.Uint32(data[len(data)-8:]))
	body, fb := data[:len(data)-8-n], data[len(data)-8-n:len(data)-8]
	var meta format.FileMetaData
	if err := thrift.Unmarshal(&compact, fb, &meta); err != nil {
		t.Fatal(err)
	}
	// Field 2 (schema), a list of structs: header 0x19, then the list's
	// size and element type, 0x4C for 4 elements (the thrift compact
	// protocol's layout).
	at := bytes.Index(fb, []byte{0x19, byte(len(meta.Schema))<<4 | 0x0C})
	if at < 0 || len(meta.Schema) != 4 {
		t.Fatalf("schema list not found in the footer (%d elements)", len(meta.Schema))
	}
	huge := append([]byte{0x19, 0xFC}, binary.AppendUvarint(nil, 1<<31-1)...)
	for name, footer := range map[string][]byte{
		"list of 2^31-1": append(append(bytes.Clone(fb[:at]), huge...), fb[at+2:]...),
		"cut short":      fb[:len(fb)-5],
	} {
		t.Run(name, func(t *testing.T) {
			bad := append(bytes.Clone(body), footer...)
			bad = binary.LittleEndian.AppendUint32(bad, uint32(len(footer)))
			bad = append(bad, "PAR1"...)
			var err error
			alloc := allocDuring(func() {
				_, err = openReaderAt("footer.parquet", bytes.NewReader(bad), int64(len(bad)))
			})
			if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), "footer.parquet: file is corrupt or truncated: malformed footer") {
				t.Fatalf("open: %v, want ErrCorrupt naming the malformed footer", err)
			}
			path := filepath.Join(t.TempDir(), "footer.parquet")
			if err := os.WriteFile(path, bad, 0o644); err != nil {
				t.Fatal(err)
			}
			alloc += allocDuring(func() { _, err = OpenSource(path) })
			if !errors.Is(err, table.ErrCorrupt) {
				t.Fatalf("OpenSource: %v, want ErrCorrupt", err)
			}
			if alloc > 1<<20 {
				t.Fatalf("allocated %d bytes", alloc)
			}
		})
	}
}

// TestNumRowsBounded: a footer that claims 2^40 rows does not make
// NumRows, the hint callers size tables by, claim them.
func TestNumRowsBounded(t *testing.T) {
	data := crcFile(t, "snappy")
	r := openBytes(t, "good.parquet", data)
	if n := r.NumRows(); n != 3000 {
		t.Fatalf("NumRows = %d, want 3000", n)
	}
	r.Close()
	bad := rebuild(t, data, func(_, _, _ int, _ *format.PageHeader, body []byte) []byte { return body },
		func(m *format.FileMetaData) { m.NumRows, m.RowGroups[0].NumRows = 1<<40, 1<<40-1500 })
	r = openBytes(t, "rows.parquet", bad)
	defer r.Close()
	if n, most := r.NumRows(), 8*int64(len(bad))+sparseValues; n > most {
		t.Fatalf("NumRows = %d, more than %d", n, most)
	}
	var err error
	for err == nil {
		_, err = r.Next()
	}
	if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), "fewer rows than the footer records") {
		t.Fatalf("Next: %v, want the missing rows", err)
	}
}

// TestChunkCodecs: the decoder reads every chunk of a column with the
// codec of its first chunk, so a chunk of another codec is refused (here
// an uncompressed file whose second row group's chunks claim Snappy, the
// pages of which would be checked decompressed and decoded raw).
func TestChunkCodecs(t *testing.T) {
	bad := rebuild(t, crcFile(t, "none"), func(_, _, _ int, _ *format.PageHeader, body []byte) []byte { return body },
		func(m *format.FileMetaData) {
			for c := range m.RowGroups[1].Columns {
				m.RowGroups[1].Columns[c].MetaData.Codec = format.Snappy
			}
		})
	r := openBytes(t, "codecs.parquet", bad)
	defer r.Close()
	var err error
	for err == nil {
		_, err = r.Next()
	}
	if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), `column "s": row group 2: file is corrupt or truncated: column chunk compressed with SNAPPY where the column's first is UNCOMPRESSED`) {
		t.Fatalf("Next: %v, want the codecs named", err)
	}
}

// TestDeltaDictionaryPage: a dictionary page that says its values are
// delta encoded, in a run claiming 2^31-1 of them, is checked as a data
// page's values are.
func TestDeltaDictionaryPage(t *testing.T) {
	bad := rebuild(t, crcFile(t, "none"), onPage(1, format.DictionaryPage, func(h *format.PageHeader, body []byte) []byte {
		h.DictionaryPageHeader.V.Encoding = format.DeltaBinaryPacked
		run := appendDelta(nil, 0, 3, 100)
		body = binary.AppendUvarint(append([]byte(nil), run[:3]...), 1<<31-1)
		body = append(body, run[4:]...)
		h.DictionaryPageHeader.V.NumValues = 100
		h.UncompressedPageSize = int32(len(body))
		return body
	}), nil)
	var err error
	alloc := allocDuring(func() {
		r := openBytes(t, "dict.parquet", bad)
		defer r.Close()
		for err == nil {
			_, err = r.Next()
		}
	})
	if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), `column "i": row group 1: page 1: delta values: file is corrupt or truncated: delta run declares 2147483647 values`) {
		t.Fatalf("Next: %v, want the delta run refused", err)
	}
	if alloc > 32<<20 {
		t.Fatalf("reading allocated %d bytes", alloc)
	}
}

// TestHostileCodecs reads files whose first page is a corrupt LZ4 block
// (the decoder's own loop doubles its buffer on any error, without end) or
// a Brotli stream of 40 MB of zeros where the header says 630 bytes:
// refused as corrupt, within 32 MB.
func TestHostileCodecs(t *testing.T) {
	var bomb bytes.Buffer
	bw := brotli.NewWriterLevel(&bomb, 1)
	if _, err := bw.Write(make([]byte, 40<<20)); err != nil {
		t.Fatal(err)
	}
	if err := bw.Close(); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		codec format.CompressionCodec
		body  []byte
		want  string
	}{
		{format.Lz4Raw, []byte{0xF0, 0xFF, 0xFF, 0xFF, 0x0F, 1, 2, 3}, "decompressing a page"},
		{format.Brotli, bomb.Bytes(), "page decompresses to more than the"},
	} {
		t.Run(tc.codec.String(), func(t *testing.T) {
			bad := rebuild(t, crcFile(t, "none"), onPage(0, format.DictionaryPage, func(h *format.PageHeader, body []byte) []byte {
				return tc.body
			}), func(m *format.FileMetaData) {
				for g := range m.RowGroups {
					for c := range m.RowGroups[g].Columns {
						m.RowGroups[g].Columns[c].MetaData.Codec = tc.codec
					}
				}
			})
			var err error
			alloc := allocDuring(func() {
				r := openBytes(t, "codec.parquet", bad)
				defer r.Close()
				for err == nil {
					_, err = r.Next()
				}
			})
			if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), `column "s": row group 1: page 1: file is corrupt or truncated: `+tc.want) {
				t.Fatalf("Next: %v\nwant ErrCorrupt with %q", err, tc.want)
			}
			if alloc > 32<<20 {
				t.Fatalf("reading allocated %d bytes", alloc)
			}
		})
	}
}

// TestColumnNames: a column without a name, or two columns of one name,
// are bad data (as in a CSV header): no column could be named or written
// out. Found by FuzzSource (testdata/fuzz/FuzzSource/176db0de2e4d363c).
func TestColumnNames(t *testing.T) {
	data := crcFile(t, "none")
	same := func(_, _, _ int, _ *format.PageHeader, body []byte) []byte { return body }
	for name, tc := range map[string]struct {
		md   func(*format.FileMetaData)
		want string
	}{
		"empty": {func(m *format.FileMetaData) { m.Schema[2].Name = "" }, "names.parquet: column 2 has an empty name"},
		"twice": {func(m *format.FileMetaData) { m.Schema[3].Name = m.Schema[1].Name }, `names.parquet: column "s": named twice, columns 1 and 3`},
	} {
		t.Run(name, func(t *testing.T) {
			bad := rebuild(t, data, same, tc.md)
			_, err := openReaderAt("names.parquet", bytes.NewReader(bad), int64(len(bad)))
			var de *table.DataError
			if !errors.As(err, &de) || err.Error() != tc.want {
				t.Fatalf("open: %v, want a DataError %q", err, tc.want)
			}
		})
	}
}

// TestRowCounts: a footer whose row count is not the sum of its row
// groups' is corrupt, for the reader and for Source (a copy wrote the
// footer's count of rows from row groups holding fewer). Found by
// FuzzSource (testdata/fuzz/FuzzSource/b70c0d118167655e).
func TestRowCounts(t *testing.T) {
	bad := rebuild(t, crcFile(t, "none"), func(_, _, _ int, _ *format.PageHeader, body []byte) []byte { return body },
		func(m *format.FileMetaData) { m.NumRows = 5 })
	const want = "file is corrupt or truncated: the footer records 5 rows, its row groups 3000"
	if _, err := openReaderAt("rows.parquet", bytes.NewReader(bad), int64(len(bad))); !errors.Is(err, table.ErrCorrupt) || err.Error() != "rows.parquet: "+want {
		t.Fatalf("open: %v", err)
	}
	path := filepath.Join(t.TempDir(), "rows.parquet")
	if err := os.WriteFile(path, bad, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := OpenSource(path); !errors.Is(err, table.ErrCorrupt) || !strings.HasSuffix(err.Error(), want) {
		t.Fatalf("OpenSource: %v", err)
	}
}
