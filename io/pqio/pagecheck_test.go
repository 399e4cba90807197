package pqio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"hash/crc32"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

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
// CRC-32 (IEEE) of its stored bytes, the Parquet format's definition.
func TestPageCRCWritten(t *testing.T) {
	for _, comp := range []string{"snappy", "zstd", "none"} {
		pages := 0
		rebuild(t, crcFile(t, comp), func(g, c, p int, h *format.PageHeader, body []byte) []byte {
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
