package pqio

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"runtime/metrics"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// fuzzAllocLimit bounds what reading or copying one fuzzed file may
// allocate: far above what the page limits allow a file of a few
// kilobytes, far below the gigabytes a length taken on trust costs.
const fuzzAllocLimit = 512 << 20

// fuzzSeeds returns small valid files: ours (three codecs, text, int with
// nulls and bool columns, dictionary and PLAIN pages, two row groups, with
// and without CRCs) and files of parquet-go's writer (its types, unsigned
// 64-bit integers, delta encodings).
func fuzzSeeds(t testing.TB) [][]byte {
	withGeometry(t, 128, 1<<17, 1<<20)
	var out [][]byte
	schema := &table.Schema{Fields: []table.Field{
		{Name: "s", Kind: table.String, Nullable: true}, {Name: "i", Kind: table.Int64, Nullable: true},
		{Name: "f", Kind: table.Float64}, {Name: "b", Kind: table.Bool},
	}}
	const n = 40
	var cols []table.Column
	for i, k := range kinds {
		cs := sample(k, n, uint64(i+1))
		if schema.Fields[i].Nullable {
			for j := range cs {
				if j%5 == 2 {
					cs[j] = cell{null: true}
				}
			}
		}
		cols = append(cols, col(t, k, ownForm(k), cs))
	}
	for _, comp := range []string{"snappy", "zstd", "none"} {
		data := writeCols(t, schema, cols, n, 16, WriterOptions{RowGroupRows: 25, Compression: comp})
		// Without CRCs too, so that changed page bytes reach the decoder.
		noCRC := rebuild(t, data, func(_, _, _ int, h *format.PageHeader, body []byte) []byte {
			h.CRC = 0
			return body
		}, nil)
		out = append(out, data, noCRC)
		if comp == "none" {
			for _, id := range []format.CompressionCodec{format.Gzip, format.Brotli, format.Lz4Raw} {
				out = append(out, recompressed(t, data, id))
			}
		}
	}
	for _, rows := range []any{
		[]typedRow{{Code: [3]byte{'A', 'B', 'C'}, U32: 7, I32Dict: -5, F64Dict: 0.25, Day: 3, Tags: []string{"x"}}},
		[]unsignedRow{{U64: 1<<64 - 1, Dict: 1 << 63}, {U64: 5, Dict: 5}},
		[]deltaRow{{S: "key-1", I: 3}, {S: "key-12", I: 9}, {S: "kex", I: -4}},
	} {
		var buf bytes.Buffer
		var err error
		switch rows := rows.(type) {
		case []typedRow:
			err = parquet.Write(&buf, rows)
		case []unsignedRow:
			err = parquet.Write(&buf, rows)
		case []deltaRow:
			err = parquet.Write(&buf, rows, parquet.Compression(&parquet.Uncompressed))
		}
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, buf.Bytes())
	}
	return out
}

// recompressed returns an uncompressed file of ours with every page
// compressed with codec id (and no CRCs).
func recompressed(t testing.TB, data []byte, id format.CompressionCodec) []byte {
	c := parquet.LookupCompressionCodec(id)
	return rebuild(t, data, func(_, _, _ int, h *format.PageHeader, body []byte) []byte {
		h.CRC = 0
		out, err := c.Encode(nil, body)
		if err != nil {
			t.Fatal(err)
		}
		return out
	}, func(m *format.FileMetaData) {
		for g := range m.RowGroups {
			for c := range m.RowGroups[g].Columns {
				m.RowGroups[g].Columns[c].MetaData.Codec = id
			}
		}
	})
}

// allocated returns the bytes the heap has allocated so far, without
// stopping the world.
func allocated() uint64 {
	s := []metrics.Sample{{Name: "/gc/heap/allocs:bytes"}}
	metrics.Read(s)
	return s[0].Value.Uint64()
}

// corruptOrEmpty fails t unless err is one of the errors a bad input may
// give: a corrupt or empty file, or bad data (a column without a name).
func corruptOrEmpty(t *testing.T, what string, err error) {
	t.Helper()
	var de *table.DataError
	if !errors.Is(err, table.ErrCorrupt) && !errors.Is(err, table.ErrEmpty) && !errors.As(err, &de) {
		t.Fatalf("%s: %v: neither corrupt nor empty nor bad data", what, err)
	}
}

// FuzzReader reads every batch of every column of a byte string, and of a
// selection of its columns, through the package's reader: a bad file must
// give a corrupt or empty error, never a panic, and cost a bounded amount
// of memory; every value of a batch it accepts must be readable.
func FuzzReader(f *testing.F) {
	for _, s := range fuzzSeeds(f) {
		f.Add(s, uint8(0))
		f.Add(s, uint8(1))
	}
	f.Fuzz(func(t *testing.T, data []byte, mode uint8) {
		before := allocated()
		defer func() {
			if a := allocated() - before; a > fuzzAllocLimit {
				t.Fatalf("%d bytes allocated for a file of %d", a, len(data))
			}
		}()
		r, err := openReaderAt("fuzz.parquet", bytes.NewReader(data), int64(len(data)))
		if err != nil {
			corruptOrEmpty(t, "open", err)
			return
		}
		defer r.Close()
		if mode&1 != 0 {
			// The columns in reverse order, every other one.
			var sel []int
			for i := len(r.Schema().Fields) - 1; i >= 0; i -= 2 {
				sel = append(sel, i)
			}
			if err := r.Select(sel); err != nil {
				t.Fatal(err)
			}
		}
		var text []byte
		for {
			b, err := r.Next()
			if err == io.EOF {
				return
			}
			if err != nil {
				corruptOrEmpty(t, "Next", err)
				return
			}
			for c := range b.Cols {
				col := &b.Cols[c]
				if n := col.Len(); n != b.Rows {
					t.Fatalf("column %d holds %d rows in a batch of %d", c, n, b.Rows)
				}
				for i := 0; i < b.Rows; i++ {
					text = col.AppendText(text[:0], i)
				}
			}
		}
	})
}

// FuzzSource copies every column of a byte string that Source.CanCopy
// accepts into a file of another codec (each page decompressed and
// compressed again) and of the same codec (pages copied as they are): a
// bad file must give a corrupt error at the latest when copied, never a
// panic, and cost a bounded amount of memory.
func FuzzSource(f *testing.F) {
	for _, s := range fuzzSeeds(f) {
		f.Add(s, uint8(0))
		f.Add(s, uint8(1))
	}
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, data []byte, mode uint8) {
		before := allocated()
		defer func() {
			if a := allocated() - before; a > fuzzAllocLimit {
				t.Fatalf("%d bytes allocated for a file of %d", a, len(data))
			}
		}()
		path := filepath.Join(dir, "fuzz.parquet")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		s, err := OpenSource(path)
		if err != nil {
			return
		}
		defer s.Close()
		r, err := Open(path)
		if err != nil {
			return
		}
		fields := append([]table.Field(nil), r.Schema().Fields...)
		r.Close()
		var keep []table.Field
		for _, fl := range fields {
			if s.CanCopy(fl.Name) == nil {
				keep = append(keep, fl)
			}
		}
		if len(keep) == 0 || s.NumRows() > 1<<16 || s.NumRows() < 0 {
			return
		}
		comp := []string{"zstd", "snappy"}[mode&1]
		copied := make([]bool, len(keep))
		for i := range copied {
			copied[i] = true
		}
		w, err := NewWriter(io.Discard, &table.Schema{Fields: keep}, WriterOptions{Compression: comp, Source: s, Copy: copied})
		if err != nil {
			t.Fatal(err)
		}
		err = w.Write(&table.Batch{Rows: int(s.NumRows()), FirstRow: 1, Cols: make([]table.Column, len(keep))})
		if cerr := w.Close(); err == nil {
			err = cerr
		}
		if err != nil {
			corruptOrEmpty(t, "copy", err)
		}
	})
}
