package pqio

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/parquet"
	"github.com/apache/arrow/go/v17/parquet/compress"
	"github.com/apache/arrow/go/v17/parquet/file"
	"github.com/apache/arrow/go/v17/parquet/metadata"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// copySources returns Parquet files to copy chunks from, with their cells:
// one of ours and files of Arrow's writer (data pages v1 and v2, Snappy
// and gzip), an independent implementation.
func copySources(t *testing.T) map[string]struct {
	data  []byte
	cells [][]cell
} {
	out := map[string]struct {
		data  []byte
		cells [][]cell
	}{}
	const n = 7000
	var fields []table.Field
	var cols []table.Column
	var cells [][]cell
	for i, kind := range kinds {
		cs := sample(kind, n, uint64(i+3))
		for j := range cs {
			if j%11 == 4 {
				cs[j] = cell{null: true}
			}
		}
		fields = append(fields, table.Field{Name: "c" + strconv.Itoa(i), Kind: kind, Nullable: true})
		cols = append(cols, col(t, kind, ownForm(kind), cs))
		cells = append(cells, cs)
	}
	withGeometry(t, 2048, 1<<17, 1<<20)
	out["ours"] = struct {
		data  []byte
		cells [][]cell
	}{writeCols(t, &table.Schema{Fields: fields}, cols, n, 999, WriterOptions{RowGroupRows: 2500}), cells}
	for _, v := range []struct {
		name string
		ver  parquet.DataPageVersion
		c    compress.Compression
	}{{"arrow-v1-snappy", parquet.DataPageV1, compress.Codecs.Snappy}, {"arrow-v2-gzip", parquet.DataPageV2, compress.Codecs.Gzip}} {
		data, cs := arrowFile(t, v.ver, v.c)
		out[v.name] = struct {
			data  []byte
			cells [][]cell
		}{data, cs}
	}
	return out
}

// TestCopyChunks copies every column of each source into an output that
// adds a column of its own, with the source's codec and with others, and
// reads the output back with our reader and Arrow's.
func TestCopyChunks(t *testing.T) {
	dir := t.TempDir()
	for name, src := range copySources(t) {
		path := filepath.Join(dir, name+".parquet")
		if err := os.WriteFile(path, src.data, 0o644); err != nil {
			t.Fatal(err)
		}
		in := openBytes(t, name, src.data)
		inSchema := in.Schema()
		in.Close()
		for _, comp := range []string{"snappy", "zstd", "none"} {
			t.Run(name+"/"+comp, func(t *testing.T) {
				s, err := OpenSource(path)
				if err != nil {
					t.Fatal(err)
				}
				defer s.Close()
				fields := append([]table.Field(nil), inSchema.Fields...)
				copied := make([]bool, len(fields))
				for i, f := range fields {
					if err := s.CanCopy(f.Name); err != nil {
						t.Fatalf("CanCopy(%s): %v", f.Name, err)
					}
					copied[i] = true
				}
				fields = append(fields, table.Field{Name: "row", Kind: table.Int64})
				copied = append(copied, false)
				n := int(s.NumRows())
				var buf bytes.Buffer
				w, err := NewWriter(&buf, &table.Schema{Fields: fields}, WriterOptions{Compression: comp, Source: s, Copy: copied})
				if err != nil {
					t.Fatal(err)
				}
				// Batches that do not line up with the row groups.
				for i := 0; i < n; i += 1234 {
					k := min(1234, n-i)
					b := &table.Batch{Rows: k, FirstRow: int64(i + 1), Cols: make([]table.Column, len(fields))}
					rows := make([]int64, k)
					for j := range rows {
						rows[j] = int64(i + j)
					}
					b.Cols[len(fields)-1] = table.Column{Form: table.FormInt64, Ints: rows}
					if err := w.Write(b); err != nil {
						t.Fatal(err)
					}
				}
				if err := w.Close(); err != nil {
					t.Fatal(err)
				}
				r := openBytes(t, "copy.parquet", buf.Bytes())
				res := readAll(t, r)
				for i, f := range inSchema.Fields {
					compareCells(t, f.Name, res.cols[i], src.cells[i])
				}
				last := res.cols[len(fields)-1]
				for i, c := range last {
					if c.text != strconv.Itoa(i) {
						t.Fatalf("row column: row %d holds %v", i, c)
					}
				}
				// The row groups are the source's, every chunk in the
				// output's codec.
				meta := r.pf.Metadata()
				r.Close()
				if len(meta.RowGroups) != len(s.parts[0].meta.RowGroups) {
					t.Fatalf("%d row groups, the source has %d", len(meta.RowGroups), len(s.parts[0].meta.RowGroups))
				}
				for g, rg := range meta.RowGroups {
					if rg.NumRows != s.parts[0].meta.RowGroups[g].NumRows {
						t.Fatalf("row group %d: %d rows, the source's %d", g, rg.NumRows, s.parts[0].meta.RowGroups[g].NumRows)
					}
					for _, cc := range rg.Columns {
						if cc.MetaData.Codec != codecs[comp].id {
							t.Fatalf("row group %d column %v: codec %v, want %v", g, cc.MetaData.PathInSchema, cc.MetaData.Codec, codecs[comp].id)
						}
					}
				}
				// Arrow's reader reads the same values.
				total := 0
				arrowRead(t, buf.Bytes(), "", nil, func(rec arrow.Record) {
					for i := range inSchema.Fields {
						got := arrowCells(t, rec.Column(i))
						compareCells(t, "arrow "+inSchema.Fields[i].Name, got, src.cells[i][total:total+len(got)])
					}
					total += int(rec.NumRows())
				})
				if total != n {
					t.Fatalf("arrow read %d rows, want %d", total, n)
				}
				// And its low-level reader accepts the chunk metadata.
				fr, err := file.NewParquetReader(bytes.NewReader(buf.Bytes()))
				if err != nil {
					t.Fatal(err)
				}
				if fr.NumRows() != int64(n) {
					t.Fatalf("arrow: %d rows", fr.NumRows())
				}
				fr.Close()
			})
		}
	}
}

// TestCopyRowCount checks that an output with fewer or more rows than its
// source fails instead of writing a file whose columns disagree.
func TestCopyRowCount(t *testing.T) {
	dir := t.TempDir()
	src := copySources(t)["ours"]
	path := filepath.Join(dir, "src.parquet")
	if err := os.WriteFile(path, src.data, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, rows := range []int{6999, 7001} {
		s, err := OpenSource(path)
		if err != nil {
			t.Fatal(err)
		}
		fields := []table.Field{{Name: "c0", Kind: table.String, Nullable: true}, {Name: "x", Kind: table.Int64}}
		var buf bytes.Buffer
		w, err := NewWriter(&buf, &table.Schema{Fields: fields}, WriterOptions{Source: s, Copy: []bool{true, false}})
		if err != nil {
			t.Fatal(err)
		}
		b := &table.Batch{Rows: rows, Cols: []table.Column{{}, {Form: table.FormInt64, Ints: make([]int64, rows)}}}
		err = w.Write(b)
		if err == nil {
			err = w.Close()
		}
		if err == nil || !strings.Contains(err.Error(), "rows") {
			t.Fatalf("%d rows: %v, want an error about the rows", rows, err)
		}
		s.Close()
	}
}

// TestCanCopyChecksPages damages a chunk's metadata so that its pages no
// longer fill it or hold its values, and expects CanCopy to refuse it.
func TestCanCopyChecksPages(t *testing.T) {
	dir := t.TempDir()
	src := copySources(t)["ours"]
	path := filepath.Join(dir, "src.parquet")
	if err := os.WriteFile(path, src.data, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, damage := range []struct {
		name string
		f    func(md *format.ColumnMetaData)
	}{
		{"size short", func(md *format.ColumnMetaData) { md.TotalCompressedSize -= 3 }},
		{"size long", func(md *format.ColumnMetaData) { md.TotalCompressedSize += 5 }},
		{"values", func(md *format.ColumnMetaData) { md.NumValues++ }},
		{"offset", func(md *format.ColumnMetaData) { md.DataPageOffset += 2; md.DictionaryPageOffset += 2 }},
	} {
		s, err := OpenSource(path)
		if err != nil {
			t.Fatal(err)
		}
		if err := s.CanCopy("c1"); err != nil {
			t.Fatalf("undamaged: %v", err)
		}
		damage.f(&s.parts[0].meta.RowGroups[1].Columns[1].MetaData)
		err = s.CanCopy("c1")
		if err == nil || !strings.Contains(err.Error(), `"c1"`) {
			t.Errorf("%s: CanCopy = %v, want an error naming the column", damage.name, err)
		}
		s.Close()
	}
	s, err := OpenSource(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if err := s.CanCopy("nope"); err == nil {
		t.Error("CanCopy of a missing column succeeded")
	}
}

// TestChunkStatistics checks the minimum, maximum and null count that the
// writer records, read back through Arrow's metadata reader.
func TestChunkStatistics(t *testing.T) {
	fields := []table.Field{
		{Name: "i", Kind: table.Int64, Nullable: true},
		{Name: "f", Kind: table.Float64},
		{Name: "s", Kind: table.String, Nullable: true},
	}
	cols := []table.Column{
		{Form: table.FormInt64, Ints: []int64{5, -7, 0, 99}, Nulls: []bool{false, false, true, false}},
		{Form: table.FormFloat64, Floats: []float64{0.5, 0, -2.25, 1e300}},
		col(t, table.String, table.FormText, []cell{{text: "route-9"}, {null: true}, {text: "route-10"}, {text: "b"}}),
	}
	data := writeCols(t, &table.Schema{Fields: fields}, cols, 4, 4, WriterOptions{})
	fr, err := file.NewParquetReader(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	defer fr.Close()
	rg := fr.MetaData().RowGroup(0)
	want := []struct {
		nulls    int64
		min, max string
	}{{1, "-7", "99"}, {0, "-2.25", "1e+300"}, {1, "b", "route-9"}}
	for i, w := range want {
		cc, err := rg.ColumnChunk(i)
		if err != nil {
			t.Fatal(err)
		}
		st, err := cc.Statistics()
		if err != nil || st == nil {
			t.Fatalf("column %d: statistics %v, %v", i, st, err)
		}
		if st.NullCount() != w.nulls {
			t.Errorf("column %d: null count %d, want %d", i, st.NullCount(), w.nulls)
		}
		lo, hi := fmt.Sprint(statValue(st, true)), fmt.Sprint(statValue(st, false))
		if lo != w.min || hi != w.max {
			t.Errorf("column %d: min %s max %s, want %s %s", i, lo, hi, w.min, w.max)
		}
	}
}

// statValue returns the minimum or maximum of Arrow's chunk statistics.
func statValue(st metadata.TypedStatistics, min bool) any {
	switch s := st.(type) {
	case *metadata.Int64Statistics:
		if min {
			return s.Min()
		}
		return s.Max()
	case *metadata.Float64Statistics:
		if min {
			return s.Min()
		}
		return s.Max()
	case *metadata.ByteArrayStatistics:
		if min {
			return string(s.Min())
		}
		return string(s.Max())
	}
	return fmt.Sprintf("%T", st)
}
