package pqio

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// sourcePart is one Parquet file of a several-file Source a test writes.
type sourcePart struct {
	rows, rg int           // rows, and rows a row group
	fields   []table.Field // nil: partFields
	seed     uint64
}

// partFields are the columns of the parts: every kind, nullable.
func partFields() []table.Field {
	var fields []table.Field
	for i, kind := range kinds {
		fields = append(fields, table.Field{Name: "c" + strconv.Itoa(i), Kind: kind, Nullable: true})
	}
	return fields
}

// writePart writes p at path and returns its cells, column by column.
func writePart(t testing.TB, path string, p sourcePart) [][]cell {
	t.Helper()
	fields := p.fields
	if fields == nil {
		fields = partFields()
	}
	var cols []table.Column
	var cells [][]cell
	for i, f := range fields {
		cs := sample(f.Kind, p.rows, p.seed+uint64(i))
		for j := range cs {
			if f.Nullable && j%9 == 2 {
				cs[j] = cell{null: true}
			}
		}
		cols = append(cols, col(t, f.Kind, ownForm(f.Kind), cs))
		cells = append(cells, cs)
	}
	data := writeCols(t, &table.Schema{Fields: fields}, cols, p.rows, 777, WriterOptions{RowGroupRows: p.rg})
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return cells
}

// rowGroupRows returns the rows of each row group of a file's metadata.
func rowGroupRows(meta *format.FileMetaData) []int64 {
	var out []int64
	for _, rg := range meta.RowGroups {
		out = append(out, rg.NumRows)
	}
	return out
}

// fileChunk returns the bytes of leaf column col's chunk in row group g of
// a file held in memory.
func fileChunk(data []byte, meta *format.FileMetaData, g, col int) []byte {
	md := meta.RowGroups[g].Columns[col].MetaData
	start, size := chunkRange(&md)
	return data[start : start+size]
}

// writeFromSource writes a file of schema from a Source, the columns
// copy marks copied from it and the others from cols (all rows), in
// batches that do not line up with the row groups.
func writeFromSource(t testing.TB, s *Source, schema *table.Schema, copy []bool, cols []table.Column, comp string) []byte {
	t.Helper()
	var buf bytes.Buffer
	w, err := NewWriter(&buf, schema, WriterOptions{Compression: comp, Source: s, Copy: copy})
	if err != nil {
		t.Fatal(err)
	}
	n := int(s.NumRows())
	for i := 0; i < n; i += 1234 {
		k := min(1234, n-i)
		b := &table.Batch{Rows: k, FirstRow: int64(i + 1), Cols: make([]table.Column, len(schema.Fields))}
		for j := range b.Cols {
			if !copy[j] {
				b.Cols[j] = slice(cols[j], i, i+k)
			}
		}
		if err := w.Write(b); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// TestSourcesConcatenate copies every column of a Source of three files
// (one without rows, the others of uneven row groups), in each order of
// the parts, with the parts' codec and another: the output's rows are the
// files' rows one file after the other, its row groups the files' row
// groups in order, a chunk copied as it is where the codec is the same;
// a column encoded beside the copied ones lines up with them, and Arrow's
// reader reads the output too.
func TestSourcesConcatenate(t *testing.T) {
	withGeometry(t, 2048, 1<<17, 1<<20)
	dir := t.TempDir()
	parts := map[string]sourcePart{
		"a": {rows: 2300, rg: 1000, seed: 11},
		"e": {rows: 0, rg: 1000, seed: 0},
		"b": {rows: 1700, rg: 600, seed: 29},
	}
	cells := map[string][][]cell{}
	for name, p := range parts {
		cells[name] = writePart(t, filepath.Join(dir, name+".parquet"), p)
	}
	fields := partFields()
	for _, order := range []string{"aeb", "eab", "bae", "abe"} {
		for _, comp := range []string{"snappy", "zstd"} {
			t.Run(order+"/"+comp, func(t *testing.T) {
				var paths []string
				want := make([][]cell, len(fields))
				var wantGroups []int64
				for _, name := range order {
					paths = append(paths, filepath.Join(dir, string(name)+".parquet"))
					for i := range fields {
						want[i] = append(want[i], cells[string(name)][i]...)
					}
				}
				s, err := OpenSources(paths)
				if err != nil {
					t.Fatal(err)
				}
				defer s.Close()
				for _, p := range s.parts {
					wantGroups = append(wantGroups, rowGroupRows(p.meta)...)
				}
				if len(wantGroups) != 6 || s.NumRows() != 4000 || !strings.HasPrefix(s.Name(), "3 files from "+paths[0]) {
					t.Fatalf("Source %q of %d rows, row groups %v", s.Name(), s.NumRows(), wantGroups)
				}
				out := append([]table.Field(nil), fields...)
				copied := make([]bool, len(out))
				for i, f := range fields {
					if err := s.CanCopy(f.Name); err != nil {
						t.Fatalf("CanCopy(%s): %v", f.Name, err)
					}
					copied[i] = true
				}
				// A column of the output's own, the row number.
				out = append(out, table.Field{Name: "row", Kind: table.Int64})
				copied = append(copied, false)
				rowCells := make([]cell, 4000)
				for i := range rowCells {
					rowCells[i] = cell{text: strconv.Itoa(i)}
				}
				cols := make([]table.Column, len(out))
				cols[len(out)-1] = col(t, table.Int64, table.FormInt64, rowCells)
				data := writeFromSource(t, s, &table.Schema{Fields: out}, copied, cols, comp)

				r := openBytes(t, "copy.parquet", data)
				res := readAll(t, r)
				meta := r.pf.Metadata()
				r.Close()
				for i, f := range fields {
					compareCells(t, f.Name, res.cols[i], want[i])
				}
				compareCells(t, "row", res.cols[len(out)-1], rowCells)
				if got := rowGroupRows(meta); !slices.Equal(got, wantGroups) {
					t.Fatalf("row groups of %v rows, want the parts' %v", got, wantGroups)
				}
				// The copied chunks: the parts' own bytes when the codec
				// is theirs, in the output's codec always.
				g := 0
				for _, p := range s.parts {
					pdata, err := os.ReadFile(p.name)
					if err != nil {
						t.Fatal(err)
					}
					for pg := range p.meta.RowGroups {
						for c := range fields {
							cc := meta.RowGroups[g].Columns[c].MetaData
							if cc.Codec != codecs[comp].id {
								t.Fatalf("row group %d column %d: codec %v", g, c, cc.Codec)
							}
							same := bytes.Equal(fileChunk(data, meta, g, c), fileChunk(pdata, p.meta, pg, c))
							if same != (comp == "snappy") {
								t.Errorf("row group %d column %d: chunk the same as %s's: %v", g, c, p.name, same)
							}
						}
						g++
					}
				}
				// Arrow's reader reads the same rows.
				total := 0
				arrowRead(t, data, "", nil, func(rec arrow.Record) {
					for i, f := range fields {
						compareCells(t, "arrow "+f.Name, arrowCells(t, rec.Column(i)), want[i][total:total+int(rec.NumRows())])
					}
					total += int(rec.NumRows())
				})
				if total != 4000 {
					t.Fatalf("arrow read %d rows, want 4000", total)
				}
			})
		}
	}
}

// TestSourcesLayoutDiffers gives a column a layout in a later file that
// differs from the first file's: CanCopy refuses that column, naming the
// file where it differs and the column, and still copies the others; the
// refused column is written from its values instead.
func TestSourcesLayoutDiffers(t *testing.T) {
	withGeometry(t, 2048, 1<<17, 1<<20)
	base := partFields()
	with := func(i int, f table.Field) []table.Field {
		fs := slices.Clone(base)
		fs[i] = f
		return fs
	}
	for _, tc := range []struct {
		name   string
		fields [][]table.Field // of the three files
		differ map[string]int  // column: the file (0-based) named
	}{
		{"required in a later file", [][]table.Field{base, with(0, table.Field{Name: "c0", Kind: table.String}), base}, map[string]int{"c0": 1}},
		{"optional in a later file", [][]table.Field{with(1, table.Field{Name: "c1", Kind: table.Int64}), base, base}, map[string]int{"c1": 1}},
		{"other physical type in the third", [][]table.Field{base, base, with(1, table.Field{Name: "c1", Kind: table.Float64, Nullable: true})}, map[string]int{"c1": 2}},
		{"two columns, two files", [][]table.Field{base, with(3, table.Field{Name: "c3", Kind: table.Bool}), with(2, table.Field{Name: "c2", Kind: table.Int64, Nullable: true})}, map[string]int{"c3": 1, "c2": 2}},
		{"missing in a later file", [][]table.Field{base, base[:3], base}, map[string]int{"c3": 1}},
		{"moved in a later file", [][]table.Field{base, {base[1], base[0], base[2], base[3]}, base}, map[string]int{"c0": 1, "c1": 1}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			var paths []string
			rows := []int{500, 700, 300}
			want := map[string][]cell{}
			for i, fs := range tc.fields {
				path := filepath.Join(dir, fmt.Sprintf("part-%d.parquet", i))
				cs := writePart(t, path, sourcePart{rows: rows[i], rg: 200, fields: fs, seed: uint64(10 * i)})
				for j, f := range fs {
					want[f.Name] = append(want[f.Name], cs[j]...)
				}
				paths = append(paths, path)
			}
			s, err := OpenSources(paths)
			if err != nil {
				t.Fatal(err)
			}
			defer s.Close()
			// The output: the first file's columns, those that differ
			// encoded from their values (as text), the others copied.
			var out []table.Field
			var copied []bool
			var cols []table.Column
			for _, f := range base {
				err := s.CanCopy(f.Name)
				part, differs := tc.differ[f.Name]
				if !differs {
					if err != nil {
						t.Fatalf("CanCopy(%s): %v, want it copied", f.Name, err)
					}
					out, copied, cols = append(out, f), append(copied, true), append(cols, table.Column{})
					continue
				}
				if err == nil || !strings.Contains(err.Error(), paths[part]) || !strings.Contains(err.Error(), strconv.Quote(f.Name)) {
					t.Fatalf("CanCopy(%s) = %v, want an error naming %s and the column", f.Name, err, paths[part])
				}
				if len(want[f.Name]) != 1500 {
					continue // not in every file: not written
				}
				f.Kind, f.Nullable = table.String, true
				out, copied, cols = append(out, f), append(copied, false), append(cols, col(t, table.String, table.FormText, want[f.Name]))
			}
			data := writeFromSource(t, s, &table.Schema{Fields: out}, copied, cols, "snappy")
			r := openBytes(t, "out.parquet", data)
			res := readAll(t, r)
			r.Close()
			for i, f := range out {
				compareCells(t, f.Name, res.cols[i], want[f.Name])
			}
		})
	}
}

// TestSourcesClose checks that Close closes every file, and that
// OpenSources closes the files it opened when a later one fails.
func TestSourcesClose(t *testing.T) {
	dir := t.TempDir()
	var paths []string
	for i := range 3 {
		path := filepath.Join(dir, fmt.Sprintf("p%d.parquet", i))
		writePart(t, path, sourcePart{rows: 50 * i, rg: 40, seed: uint64(i)})
		paths = append(paths, path)
	}
	s, err := OpenSources(paths)
	if err != nil {
		t.Fatal(err)
	}
	if len(s.parts) != 3 {
		t.Fatalf("%d parts", len(s.parts))
	}
	// A part's file is open only while it is read: none once opened (a
	// Source of thousands of parts would otherwise hold thousands of
	// files), one while its chunks are checked.
	for _, p := range s.parts {
		if p.f != nil {
			t.Errorf("%s open after OpenSources", p.name)
		}
	}
	if err := s.parts[1].open(); err != nil {
		t.Fatal(err)
	}
	f := s.parts[1].f
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	for _, p := range s.parts {
		if p.f != nil {
			t.Errorf("%s open after Close", p.name)
		}
	}
	if _, err := f.Stat(); !errors.Is(err, os.ErrClosed) {
		t.Errorf("the part's file after Close: Stat %v, want os.ErrClosed", err)
	}

	bad := filepath.Join(dir, "bad.parquet")
	if err := os.WriteFile(bad, []byte("PAR1 not a Parquet file at all PAR1"), 0o644); err != nil {
		t.Fatal(err)
	}
	fds := func() int {
		e, err := os.ReadDir("/proc/self/fd")
		if err != nil {
			t.Skip("no /proc/self/fd to count open files")
		}
		return len(e)
	}
	before := fds()
	for _, ps := range [][]string{{paths[0], paths[1], bad}, {paths[0], filepath.Join(dir, "missing.parquet")}} {
		s, err := OpenSources(ps)
		if err == nil {
			s.Close()
			t.Fatalf("OpenSources(%v) succeeded", ps)
		}
		if !strings.Contains(err.Error(), ps[len(ps)-1]) {
			t.Errorf("OpenSources: %v, want it to name %s", err, ps[len(ps)-1])
		}
	}
	if after := fds(); after != before {
		t.Errorf("%d files open before the failed OpenSources, %d after", before, after)
	}
	if _, err := OpenSources(nil); err == nil {
		t.Error("OpenSources of no files succeeded")
	}
}
