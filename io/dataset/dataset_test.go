package dataset_test

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"

	"manyfold/io/csvio"
	"manyfold/io/dataset"
	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// null marks a null cell in the rows a test writes and reads.
const null = "NULL"

// part is one file of a dataset a test writes: its path below the
// dataset's root (its extension picks the format), its columns and its rows
// of cells (null for a null).
type part struct {
	path   string
	fields []table.Field
	rows   [][]string
	rg     int // Parquet row group rows, 0 for the default
}

// writePart writes p below root through tableio, the way the command
// writes its outputs, and returns its path.
func writePart(t testing.TB, root string, p part) string {
	t.Helper()
	path := filepath.Join(root, filepath.FromSlash(p.path))
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	b := &table.Batch{Rows: len(p.rows), FirstRow: 1, Cols: make([]table.Column, len(p.fields))}
	for j := range p.fields {
		c := table.Column{Form: table.FormText, Offsets: []int32{0}}
		for i, row := range p.rows {
			if row[j] == null {
				if c.Nulls == nil {
					c.Nulls = make([]bool, len(p.rows))
				}
				c.Nulls[i] = true
			} else {
				c.Data = append(c.Data, row[j]...)
			}
			c.Offsets = append(c.Offsets, int32(len(c.Data)))
		}
		b.Cols[j] = c
	}
	out, err := tableio.Create(path, &table.Schema{Fields: p.fields}, tableio.WriteOptions{Parquet: pqio.WriterOptions{RowGroupRows: p.rg}})
	if err != nil {
		t.Fatal(err)
	}
	if err := out.Write(b); err != nil {
		out.Abort()
		t.Fatal(err)
	}
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	return path
}

// touch writes a file that is not a table (a marker, a checksum).
func touch(t testing.TB, root, rel string) {
	t.Helper()
	path := filepath.Join(root, filepath.FromSlash(rel))
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, []byte("not a table\x00"), 0o644); err != nil {
		t.Fatal(err)
	}
}

// openOpts returns an open function for dataset.New that opens each file
// through tableio with the given options.
func openOpts(opts tableio.ReadOptions) func(string) (table.Reader, error) {
	return func(p string) (table.Reader, error) { return tableio.Open(p, opts) }
}

// openFile opens one file of a dataset through tableio.
var openFile = openOpts(tableio.ReadOptions{})

// result is what a test reads from a table.
type result struct {
	names   []string
	cols    [][]string // per column, every row's cell (null for a null)
	batches []int      // rows per batch
}

// readAll reads every batch of r, checking that FirstRow counts the rows
// of the batches before (across files) and that each column holds the
// batch's rows, and returns the cells.
func readAll(t testing.TB, r table.Reader) result {
	t.Helper()
	res := result{names: r.Schema().Names()}
	res.cols = make([][]string, len(res.names))
	next := int64(1)
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("Next: %v", err)
		}
		if b.FirstRow != next {
			t.Fatalf("batch %d: FirstRow %d, want %d", len(res.batches)+1, b.FirstRow, next)
		}
		next += int64(b.Rows)
		if len(b.Cols) != len(res.names) {
			t.Fatalf("batch of %d columns, the schema has %d", len(b.Cols), len(res.names))
		}
		for j := range b.Cols {
			c := &b.Cols[j]
			if c.Len() != b.Rows || (c.Nulls != nil && len(c.Nulls) != b.Rows) {
				t.Fatalf("column %q: %d rows, %d null marks in a batch of %d", res.names[j], c.Len(), len(c.Nulls), b.Rows)
			}
			if kind := r.Schema().Fields[j].Kind; !formFits(c.Form, kind) {
				t.Fatalf("column %q of kind %v in form %v", res.names[j], kind, c.Form)
			}
			for i := range b.Rows {
				cell := null
				if !c.IsNull(i) {
					cell = string(c.AppendText(nil, i))
				}
				res.cols[j] = append(res.cols[j], cell)
			}
		}
		res.batches = append(res.batches, b.Rows)
	}
	return res
}

// formFits reports whether a column of the kind may be delivered in the
// form: as text, a dictionary, or the kind's own form.
func formFits(f table.Form, k table.Kind) bool {
	switch f {
	case table.FormText, table.FormDict:
		return true
	case table.FormInt64:
		return k == table.Int64
	case table.FormFloat64:
		return k == table.Float64
	}
	return k == table.Bool
}

// readFile reads one file through tableio, restricted to cols (nil: all).
func readFile(t testing.TB, path string, opts tableio.ReadOptions, cols []int) result {
	t.Helper()
	r, err := tableio.Open(path, opts)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if cols != nil {
		if err := r.Select(cols); err != nil {
			t.Fatal(err)
		}
	}
	return readAll(t, r)
}

// fieldsAB are the columns of most parts: a text and an integer, both
// nullable.
var fieldsAB = []table.Field{{Name: "a", Kind: table.String, Nullable: true}, {Name: "b", Kind: table.Int64, Nullable: true}}

// rowsOf returns n rows of fieldsAB, the file's tag in column a, with a
// null every fifth b.
func rowsOf(tag string, n int) [][]string {
	rows := make([][]string, n)
	for i := range rows {
		b := fmt.Sprint(i * 7)
		if i%5 == 3 {
			b = null
		}
		rows[i] = []string{fmt.Sprintf("%s-%d", tag, i), b}
	}
	return rows
}

// rel returns the paths of files relative to root, with slashes.
func rel(t testing.TB, root string, files []dataset.File) []string {
	t.Helper()
	var out []string
	for _, f := range files {
		r, err := filepath.Rel(root, f.Path)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, filepath.ToSlash(r))
	}
	return out
}

// keysText writes a file's keys as name=value (name=<null> for a null),
// comma-separated.
func keysText(keys []dataset.Key) string {
	var s []string
	for _, k := range keys {
		if k.Null {
			s = append(s, k.Name+"=<null>")
		} else {
			s = append(s, k.Name+"="+k.Value)
		}
	}
	return strings.Join(s, ",")
}

// TestList lists directories and patterns: subfolders walked, paths in
// byte order, the entries of engines (a leading _ or .) skipped,
// key=value folders as keys, and the datasets it refuses.
func TestList(t *testing.T) {
	for _, tc := range []struct {
		name  string
		files []string // relative to the root; each holds a few bytes
		dirs  []string // empty folders
		links []string // symbolic links, each "LINK TARGET" (the target relative to the link's folder)
		path  string   // relative to the root ("" for the root itself)
		want  []string // relative paths, each followed by " " and its keys
		err   error    // an error it wraps, when the listing fails
		msg   []string // what the error names
	}{
		{
			name:  "nested folders in path order",
			files: []string{"b/part-1.csv", "a/part-2.csv", "a/part-10.csv", "part-0.csv", "a/b/c/deep.csv"},
			want:  []string{"a/b/c/deep.csv ", "a/part-10.csv ", "a/part-2.csv ", "b/part-1.csv ", "part-0.csv "},
		},
		{
			name: "engine entries skipped",
			files: []string{"part-0.parquet", "_SUCCESS", ".part-0.parquet.crc", "_temporary/0/part-9.parquet",
				".hidden/part-8.parquet", "_delta_log/00.json", "sub/_committed_1", "sub/.x.crc", "sub/part-1.parquet"},
			want: []string{"part-0.parquet ", "sub/part-1.parquet "},
		},
		{
			name:  "hive keys",
			files: []string{"year=2024/month=02/p.parquet", "year=2024/month=10/p.parquet", "year=2023/month=12/p.parquet"},
			want: []string{"year=2023/month=12/p.parquet year=2023,month=12", "year=2024/month=02/p.parquet year=2024,month=02",
				"year=2024/month=10/p.parquet year=2024,month=10"},
		},
		{
			name:  "escaped and null values",
			files: []string{"city=New%2FYork/p.csv", "city=__HIVE_DEFAULT_PARTITION__/p.csv", "city=a%3Db/p.csv", "city=/p.csv", "city=a+b/p.csv"},
			want: []string{"city=/p.csv city=", "city=New%2FYork/p.csv city=New/York", "city=__HIVE_DEFAULT_PARTITION__/p.csv city=<null>",
				"city=a%3Db/p.csv city=a=b", "city=a+b/p.csv city=a+b"},
		},
		{
			name:  "escaped key name",
			files: []string{"my%20key=1/p.csv"},
			want:  []string{"my%20key=1/p.csv my key=1"},
		},
		{
			name:  "folders without = are not keys",
			files: []string{"data/k=1/x/p.csv", "data/k=2/y/p.csv"},
			want:  []string{"data/k=1/x/p.csv k=1", "data/k=2/y/p.csv k=2"},
		},
		{
			name:  "bad escape",
			files: []string{"k=%zz/p.csv"},
			msg:   []string{`"k=%zz"`},
		},
		{
			name:  "keys differ",
			files: []string{"a=1/p.csv", "b=1/p.csv"},
			err:   table.ErrCorrupt,
			msg:   []string{"b=1/p.csv", "folder keys b", "has a"},
		},
		{
			name:  "keys and none",
			files: []string{"a=1/p.csv", "z.csv"},
			err:   table.ErrCorrupt,
			msg:   []string{"z.csv", "folder keys none"},
		},
		{
			name:  "keys in another order",
			files: []string{"a=1/b=1/p.csv", "b=2/a=2/p.csv"},
			err:   table.ErrCorrupt,
		},
		{
			name: "empty directory",
			dirs: []string{"empty"},
			path: "empty",
			err:  dataset.ErrNoFiles,
		},
		{
			name:  "only markers",
			files: []string{"_SUCCESS", "_temporary/0/part-0.csv", ".crc"},
			err:   dataset.ErrNoFiles,
		},
		{
			name:  "pattern of files",
			files: []string{"part-1.csv", "part-0.csv", "other.csv", "_part-2.csv", "sub/part-3.csv"},
			path:  "part-*.csv",
			want:  []string{"part-0.csv ", "part-1.csv "},
		},
		{
			name:  "pattern of directories",
			files: []string{"year=2024/a.csv", "year=2024/sub/b.csv", "year=2023/c.csv", "year=2023/_SUCCESS", "other/d.csv", "_year=1/e.csv"},
			path:  "year=*",
			want:  []string{"year=2023/c.csv year=2023", "year=2024/a.csv year=2024", "year=2024/sub/b.csv year=2024"},
		},
		{
			name:  "pattern over folders",
			files: []string{"k=1/p.csv", "k=2/p.csv", "k=2/q.txt"},
			path:  "k=?/*.csv",
			want:  []string{"k=1/p.csv k=1", "k=2/p.csv k=2"},
		},
		{
			// A wildcard matches a folder of an engine's as it matches
			// any other: the match is skipped all the same.
			name:  "pattern through engine folders",
			files: []string{"k=1/p.csv", "_temporary/p.csv", ".staging/p.csv"},
			path:  "*/*.csv",
			want:  []string{"k=1/p.csv k=1"},
		},
		{
			name:  "pattern names its own folder",
			files: []string{"_tmp/k=1/p.csv"},
			path:  "_tmp/*/p.csv",
			want:  []string{"_tmp/k=1/p.csv k=1"},
		},
		{
			name:  "pattern spells out an engine's name",
			files: []string{"k=1/_meta/p.csv", "k=2/_meta/p.csv", "k=2/_other/p.csv"},
			path:  "*/_meta/*.csv",
			want:  []string{"k=1/_meta/p.csv k=1", "k=2/_meta/p.csv k=2"},
		},
		{
			name:  "key folder in the fixed part",
			files: []string{"k=1/j=2/p.csv"},
			path:  "k=1/*/p.csv",
			want:  []string{"k=1/j=2/p.csv j=2"},
		},
		{
			name:  "pattern without matches",
			files: []string{"a.csv"},
			path:  "*.parquet",
			err:   dataset.ErrNoFiles,
		},
		{
			name:  "bad pattern",
			files: []string{"a.csv"},
			path:  "[",
			err:   filepath.ErrBadPattern,
		},
		{
			// A directory named like a pattern is the dataset's root,
			// not a pattern: its own name is no key.
			name:  "directory named like a pattern",
			files: []string{"run=[1]/k=1/p.csv"},
			path:  "run=[1]",
			want:  []string{"run=[1]/k=1/p.csv k=1"},
		},
		{
			name:  "root is a link to a directory",
			files: []string{"real/k=1/p.csv", "real/_SUCCESS"},
			links: []string{"latest real"},
			path:  "latest",
			want:  []string{"latest/k=1/p.csv k=1"},
		},
		{
			name:  "pattern's matches are links to directories",
			files: []string{"store/a/p.csv", "store/b/p.csv"},
			links: []string{"ds/k=1 ../store/a", "ds/k=2 ../store/b"},
			path:  "ds/k=*",
			want:  []string{"ds/k=1/p.csv k=1", "ds/k=2/p.csv k=2"},
		},
		{
			// A "latest" link beside the run it points to: the run's files
			// once, at their first path.
			name:  "a match links to another match",
			files: []string{"out/run1/p.csv", "out/run2/p.csv"},
			links: []string{"out/latest run2"},
			path:  "out/*",
			want:  []string{"out/latest/p.csv ", "out/run1/p.csv "},
		},
		{
			name:  "links to files",
			files: []string{"store/a.csv"},
			links: []string{"ds/k=1/p.csv ../../store/a.csv"},
			path:  "ds",
			want:  []string{"ds/k=1/p.csv k=1"},
		},
		{
			name:  "root given itself starts with _",
			files: []string{"_out/p.csv"},
			path:  "_out",
			want:  []string{"_out/p.csv "},
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			root := t.TempDir()
			for _, f := range tc.files {
				touch(t, root, f)
			}
			for _, d := range tc.dirs {
				if err := os.MkdirAll(filepath.Join(root, d), 0o755); err != nil {
					t.Fatal(err)
				}
			}
			for _, l := range tc.links {
				link, target, _ := strings.Cut(l, " ")
				link = filepath.Join(root, filepath.FromSlash(link))
				if err := os.MkdirAll(filepath.Dir(link), 0o755); err != nil {
					t.Fatal(err)
				}
				if err := os.Symlink(filepath.FromSlash(target), link); err != nil {
					t.Skipf("symbolic links: %v", err)
				}
			}
			path := filepath.Join(root, filepath.FromSlash(tc.path))
			files, err := dataset.List(path)
			if tc.want == nil {
				if err == nil {
					t.Fatalf("List = %v, want an error", rel(t, root, files))
				}
				if tc.err != nil && !errors.Is(err, tc.err) {
					t.Errorf("List: %v, want it to wrap %v", err, tc.err)
				}
				for _, m := range tc.msg {
					if !strings.Contains(err.Error(), m) {
						t.Errorf("List: %v, want it to name %s", err, m)
					}
				}
				return
			}
			if err != nil {
				t.Fatalf("List: %v", err)
			}
			var got []string
			for i, r := range rel(t, root, files) {
				got = append(got, r+" "+keysText(files[i].Keys))
				if files[i].Size != int64(len("not a table\x00")) {
					t.Errorf("%s: Size %d", r, files[i].Size)
				}
			}
			if !slices.Equal(got, tc.want) {
				t.Errorf("List:\n got %q\nwant %q", got, tc.want)
			}
		})
	}
}

// TestNoFilesIsEmpty checks that ErrNoFiles is classed with the empty
// inputs, as the command's exit codes read it.
func TestNoFilesIsEmpty(t *testing.T) {
	_, err := dataset.List(t.TempDir())
	if !errors.Is(err, dataset.ErrNoFiles) || !errors.Is(err, table.ErrEmpty) {
		t.Fatalf("List of an empty directory: %v, want ErrNoFiles wrapping table.ErrEmpty", err)
	}
	if _, err := dataset.New(nil, openFile); !errors.Is(err, table.ErrEmpty) {
		t.Fatalf("New of no files: %v, want table.ErrEmpty", err)
	}
}

// TestIs tells datasets (directories, patterns that name no file) from
// files.
func TestIs(t *testing.T) {
	root := t.TempDir()
	touch(t, root, "a.csv")
	touch(t, root, "odd[1].csv")
	for _, tc := range []struct {
		path          string
		is, isPattern bool
	}{
		{"", true, false},
		{"a.csv", false, false},
		{"missing.csv", false, false},
		{"*.csv", true, true},
		{"a.cs?", true, true},
		{"[ab].csv", true, true},
		{"odd[1].csv", false, true}, // a file, though its name is a pattern
	} {
		path := filepath.Join(root, tc.path)
		if got := dataset.Is(path); got != tc.is {
			t.Errorf("Is(%q) = %v, want %v", tc.path, got, tc.is)
		}
		if got := dataset.IsPattern(path); got != tc.isPattern {
			t.Errorf("IsPattern(%q) = %v, want %v", tc.path, got, tc.isPattern)
		}
	}
}

// TestRoot names the folder a dataset's files lie under.
func TestRoot(t *testing.T) {
	root := t.TempDir()
	touch(t, root, "run[1]/k=1/a.csv")
	touch(t, root, "data/k=1/a.csv")
	for _, tc := range []struct{ path, want string }{
		{"data", "data"},
		{"data/", "data"},
		{"data/k=*/*.csv", "data"},
		{"data/*", "data"},
		{"da?a/k=1", ""},
		{"data/k=1/a.csv", "data/k=1/a.csv"},
		{"run[1]", "run[1]"}, // a directory, though its name is a pattern
	} {
		path := filepath.Join(root, filepath.FromSlash(tc.path))
		if tc.path == "data/" {
			path = filepath.Join(root, "data") + string(filepath.Separator)
		}
		if got, want := dataset.Root(path), filepath.Join(root, filepath.FromSlash(tc.want)); got != want {
			t.Errorf("Root(%q) = %q, want %q", tc.path, got, want)
		}
	}
}

// TestReaderRows reads datasets of CSV and Parquet files: every file's rows
// in path order (an empty file in the middle adds none), the rows of the
// files one after the other and FirstRow counting across them (row
// numbers, and so the folds drawn from them, are those of the files
// concatenated), the folder keys as text columns after the files' own,
// NumRows and InputBytes.
func TestReaderRows(t *testing.T) {
	for _, ext := range []string{"csv", "parquet"} {
		t.Run(ext, func(t *testing.T) {
			root := t.TempDir()
			parts := []part{
				{path: "day=2/part-0." + ext, fields: fieldsAB, rows: rowsOf("d2", 7), rg: 3},
				{path: "day=1/part-1." + ext, fields: fieldsAB, rows: rowsOf("d1b", 5), rg: 2},
				{path: "day=1/part-0." + ext, fields: fieldsAB, rows: rowsOf("d1a", 4)},
				{path: "day=1/part-2." + ext, fields: fieldsAB, rows: nil}, // empty, in the middle
				{path: "day=__HIVE_DEFAULT_PARTITION__/part-0." + ext, fields: fieldsAB, rows: rowsOf("dn", 3)},
			}
			var paths []string
			for _, p := range parts {
				paths = append(paths, writePart(t, root, p))
			}
			touch(t, root, "_SUCCESS")
			touch(t, root, "day=1/.part-0."+ext+".crc")
			// 3 rows a batch in CSV; Parquet gives a batch a row group.
			opts := tableio.ReadOptions{CSV: csvio.Options{BatchRows: 3}}
			files, err := dataset.List(root)
			if err != nil {
				t.Fatal(err)
			}
			order := []int{2, 1, 3, 0, 4} // the parts by path
			if got, want := len(files), len(order); got != want {
				t.Fatalf("%d files, want %d", got, want)
			}
			d, err := dataset.New(files, openOpts(opts))
			if err != nil {
				t.Fatal(err)
			}
			defer d.Close()

			wantFields := []table.Field{fieldsAB[0], fieldsAB[1], {Name: "day", Kind: table.String, Nullable: true}}
			if got := d.Schema().Fields; !slices.Equal(got, wantFields) {
				t.Fatalf("schema %v, want %v", got, wantFields)
			}
			var total int64
			var size int64
			want := result{cols: make([][]string, 3)}
			for _, i := range order {
				one := readFile(t, paths[i], opts, nil)
				if d := len(one.cols[0]); d != len(parts[i].rows) {
					t.Fatalf("%s: %d rows read, %d written", parts[i].path, d, len(parts[i].rows))
				}
				want.cols[0] = append(want.cols[0], one.cols[0]...)
				want.cols[1] = append(want.cols[1], one.cols[1]...)
				day := strings.TrimSuffix(strings.TrimPrefix(parts[i].path, "day="), "/"+filepath.Base(parts[i].path))
				if day == "__HIVE_DEFAULT_PARTITION__" {
					day = null
				}
				for range parts[i].rows {
					want.cols[2] = append(want.cols[2], day)
				}
				total += int64(len(parts[i].rows))
				want.batches = append(want.batches, one.batches...)
				fi, err := os.Stat(paths[i])
				if err != nil {
					t.Fatal(err)
				}
				size += fi.Size()
			}
			// A few cells written out, so that the comparison above
			// compares something.
			if want.cols[0][0] != "d1a-0" || want.cols[0][4] != "d1b-0" || want.cols[1][3] != null || want.cols[2][15] != "2" || want.cols[2][16] != null {
				t.Fatalf("cells read from the files one by one: %q", want.cols)
			}
			wantRows := total
			if ext == "csv" {
				wantRows = -1 // CSV does not know its rows before reading
			}
			if n := d.NumRows(); n != wantRows {
				t.Errorf("NumRows %d, want %d", n, wantRows)
			}
			if r, s := d.InputBytes(); r != 0 || s != size {
				t.Errorf("InputBytes before reading: %d of %d, want 0 of %d", r, s, size)
			}
			got := readAll(t, d)
			for j := range want.cols {
				if !slices.Equal(got.cols[j], want.cols[j]) {
					t.Errorf("column %q:\n got %q\nwant %q", wantFields[j].Name, got.cols[j], want.cols[j])
				}
			}
			if !slices.Equal(got.batches, want.batches) {
				t.Errorf("batches of %v rows, want the files' %v", got.batches, want.batches)
			}
			if r, s := d.InputBytes(); r != size || s != size {
				t.Errorf("InputBytes at the end: %d of %d, want %d of %d", r, s, size, size)
			}
			if _, err := d.Next(); err != io.EOF {
				t.Errorf("Next after the end: %v, want io.EOF", err)
			}
		})
	}
}

// TestOpenDataset reads a dataset through tableio.Open, by directory and
// by pattern, as the command does.
func TestOpenDataset(t *testing.T) {
	root := t.TempDir()
	writePart(t, root, part{path: "k=x/a.parquet", fields: fieldsAB, rows: rowsOf("x", 4)})
	writePart(t, root, part{path: "k=y/a.parquet", fields: fieldsAB, rows: rowsOf("y", 2)})
	for _, path := range []string{root, filepath.Join(root, "k=*"), filepath.Join(root, "*", "*.parquet")} {
		r, err := tableio.Open(path, tableio.ReadOptions{})
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		got := readAll(t, r)
		r.Close()
		want := []string{"x-0", "x-1", "x-2", "x-3", "y-0", "y-1"}
		if !slices.Equal(got.cols[0], want) || !slices.Equal(got.names, []string{"a", "b", "k"}) || got.cols[2][3] != "x" || got.cols[2][4] != "y" {
			t.Errorf("%s: %v %q", path, got.names, got.cols)
		}
	}
}

// TestReaderColumnsDiffer gives a later file a column missing, added,
// renamed or of another kind: New refuses it with a *table.DataError that
// names the file and the column.
func TestReaderColumnsDiffer(t *testing.T) {
	str := func(name string) table.Field { return table.Field{Name: name, Kind: table.String, Nullable: true} }
	i64 := func(name string) table.Field { return table.Field{Name: name, Kind: table.Int64, Nullable: true} }
	row := func(fields []table.Field) [][]string {
		r := make([]string, len(fields))
		for j := range r {
			r[j] = "1"
		}
		return [][]string{r}
	}
	first := []table.Field{str("a"), i64("b"), str("c")}
	for _, tc := range []struct {
		name   string
		fields []table.Field
		column string
	}{
		{"missing last", []table.Field{str("a"), i64("b")}, "c"},
		{"missing middle", []table.Field{str("a"), str("c")}, "c"},
		{"added", []table.Field{str("a"), i64("b"), str("c"), str("d")}, "d"},
		{"renamed", []table.Field{str("a"), i64("B"), str("c")}, "B"},
		{"text for integers", []table.Field{str("a"), str("b"), str("c")}, "b"},
		{"booleans for text", []table.Field{str("a"), i64("b"), {Name: "c", Kind: table.Bool, Nullable: true}}, "c"},
		{"other order", []table.Field{str("a"), str("c"), i64("b")}, "c"},
	} {
		for _, keyed := range []bool{false, true} {
			t.Run(fmt.Sprintf("%s/keys=%v", tc.name, keyed), func(t *testing.T) {
				root := t.TempDir()
				dir := ""
				if keyed {
					dir = "k=1/"
				}
				writePart(t, root, part{path: dir + "p0.parquet", fields: first, rows: row(first)})
				writePart(t, root, part{path: dir + "p1.parquet", fields: first, rows: row(first)})
				bad := writePart(t, root, part{path: dir + "p2.parquet", fields: tc.fields, rows: row(tc.fields)})
				files, err := dataset.List(root)
				if err != nil {
					t.Fatal(err)
				}
				d, err := dataset.New(files, openFile)
				if err == nil {
					d.Close()
					t.Fatal("New accepted the file")
				}
				var de *table.DataError
				if !errors.As(err, &de) || de.File != bad || de.Column != tc.column || !errors.Is(err, table.ErrCorrupt) {
					t.Fatalf("New: %v (%#v), want a DataError of %s, column %q, wrapping ErrCorrupt", err, de, bad, tc.column)
				}
				if !strings.Contains(err.Error(), files[0].Path) {
					t.Errorf("New: %v, want it to name the first file too", err)
				}
			})
		}
	}
}

// TestReaderFileChanged replaces a file between New and its reading: the
// columns are checked again when it is opened, and a change is a
// *table.DataError naming the file and the column.
func TestReaderFileChanged(t *testing.T) {
	for _, tc := range []struct {
		name   string
		fields []table.Field
		row    []string
		column string
	}{
		{"kind", []table.Field{fieldsAB[0], {Name: "b", Kind: table.Float64}}, []string{"x", "1.5"}, "b"},
		{"name", []table.Field{fieldsAB[0], {Name: "B", Kind: table.Int64}}, []string{"x", "1"}, "B"},
		{"added", []table.Field{fieldsAB[0], fieldsAB[1], {Name: "c", Kind: table.Int64}}, []string{"x", "1", "2"}, "c"},
		{"removed", fieldsAB[:1], []string{"x"}, "b"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			root := t.TempDir()
			writePart(t, root, part{path: "k=1/p0.parquet", fields: fieldsAB, rows: rowsOf("a", 2)})
			writePart(t, root, part{path: "k=2/p1.parquet", fields: fieldsAB, rows: rowsOf("b", 2)})
			files, err := dataset.List(root)
			if err != nil {
				t.Fatal(err)
			}
			d, err := dataset.New(files, openFile)
			if err != nil {
				t.Fatal(err)
			}
			defer d.Close()
			writePart(t, root, part{path: "k=2/p1.parquet", fields: tc.fields, rows: [][]string{tc.row}})
			var rows int
			for {
				b, err := d.Next()
				if err == io.EOF {
					t.Fatal("the changed file was read")
				}
				if err != nil {
					var de *table.DataError
					if !errors.As(err, &de) || de.File != files[1].Path || de.Column != tc.column || !errors.Is(err, table.ErrCorrupt) {
						t.Fatalf("Next: %v, want a DataError naming %s and column %s, wrapping ErrCorrupt", err, files[1].Path, tc.column)
					}
					break
				}
				rows += b.Rows
			}
			if rows != 2 {
				t.Errorf("%d rows read before the changed file, want 2", rows)
			}
		})
	}
}

// TestReaderKinds reads files whose kinds differ as far as the dataset
// allows: integers in one file and floats in another are floats (as CSV
// infers each file's kinds from its own values), a file without rows takes
// the others' kinds, and other differences are refused naming the file and
// the column.
func TestReaderKinds(t *testing.T) {
	flt := table.Field{Name: "b", Kind: table.Float64, Nullable: true}
	txt := table.Field{Name: "b", Kind: table.String, Nullable: true}
	type file struct {
		ext  string
		b    table.Field
		rows []string // column b; column a holds the row's number
	}
	for _, tc := range []struct {
		name  string
		files []file
		kind  table.Kind // the dataset's column b
		bad   int        // the file refused, 0 for none
	}{
		{"integers then floats", []file{{"parquet", fieldsAB[1], []string{"1", "-2"}}, {"parquet", flt, []string{"0.5"}}}, table.Float64, 0},
		{"floats then integers", []file{{"parquet", flt, []string{"0.5", null}}, {"parquet", fieldsAB[1], []string{"3", null}}}, table.Float64, 0},
		{"csv integers and floats", []file{{"csv", fieldsAB[1], []string{"7"}}, {"csv", flt, []string{"2.25"}}, {"csv", fieldsAB[1], []string{"8"}}}, table.Float64, 0},
		{"empty file of text", []file{{"parquet", fieldsAB[1], []string{"1"}}, {"parquet", txt, nil}, {"parquet", fieldsAB[1], []string{"2"}}}, table.Int64, 0},
		{"empty first file", []file{{"parquet", txt, nil}, {"parquet", flt, []string{"1.5"}}}, table.Float64, 0},
		{"empty csv file", []file{{"csv", fieldsAB[1], []string{"1"}}, {"csv", fieldsAB[1], nil}, {"csv", fieldsAB[1], []string{"2"}}}, table.Int64, 0},
		{"integers then text", []file{{"parquet", fieldsAB[1], []string{"1"}}, {"parquet", txt, []string{"x"}}}, 0, 2},
		{"integers, floats, text", []file{{"parquet", fieldsAB[1], []string{"1"}}, {"parquet", flt, []string{"1.5"}}, {"parquet", txt, []string{"x"}}}, 0, 3},
		{"text, then integers", []file{{"csv", txt, []string{"x"}}, {"parquet", fieldsAB[1], []string{"1"}}}, 0, 2},
	} {
		t.Run(tc.name, func(t *testing.T) {
			root := t.TempDir()
			var paths []string
			var want []string
			for i, f := range tc.files {
				var rows [][]string
				for j, v := range f.rows {
					rows = append(rows, []string{fmt.Sprintf("r%d-%d", i, j), v})
				}
				paths = append(paths, writePart(t, root, part{path: fmt.Sprintf("p%d.%s", i, f.ext), fields: []table.Field{fieldsAB[0], f.b}, rows: rows}))
				want = append(want, f.rows...)
			}
			files, err := dataset.List(root)
			if err != nil {
				t.Fatal(err)
			}
			d, err := dataset.New(files, openFile)
			if tc.bad > 0 {
				var de *table.DataError
				if !errors.As(err, &de) || de.File != paths[tc.bad-1] || de.Column != "b" || !errors.Is(err, table.ErrCorrupt) {
					t.Fatalf("New: %v, want a DataError naming %s and column b", err, paths[tc.bad-1])
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			defer d.Close()
			if k := d.Schema().Fields[1].Kind; k != tc.kind {
				t.Fatalf("column b: %v, want %v", k, tc.kind)
			}
			got := readAll(t, d) // checks the columns' forms against the kinds
			if !slices.Equal(got.cols[1], want) {
				t.Errorf("column b: %q, want %q", got.cols[1], want)
			}
			// Each file read on its own as a part of the dataset
			// (Conform, as a shard of a distributed run is): the
			// dataset's kinds, the same cells; all columns and b alone.
			for _, sel := range [][]int{nil, {1}} {
				var each []string
				for _, p := range paths {
					r, err := openFile(p)
					if err != nil {
						t.Fatal(err)
					}
					c, err := dataset.Conform(r, d.Schema().Fields)
					if err != nil {
						t.Fatal(err)
					}
					if sel != nil {
						if err := c.Select(sel); err != nil {
							t.Fatal(err)
						}
					}
					res := readAll(t, c)
					r.Close()
					each = append(each, res.cols[len(res.cols)-1]...)
				}
				if !slices.Equal(each, want) {
					t.Errorf("column b, files conformed one by one (select %v): %q, want %q", sel, each, want)
				}
			}
		})
	}
}

// TestReaderNullable: a column nullable in any file is nullable in the
// dataset, whichever file declares it.
func TestReaderNullable(t *testing.T) {
	req := []table.Field{{Name: "a", Kind: table.String}, {Name: "b", Kind: table.Int64}}
	opt := []table.Field{{Name: "a", Kind: table.String}, {Name: "b", Kind: table.Int64, Nullable: true}}
	for _, tc := range []struct {
		name   string
		fields [][]table.Field
		want   []bool
	}{
		{"none", [][]table.Field{req, req, req}, []bool{false, false}},
		{"last", [][]table.Field{req, req, opt}, []bool{false, true}},
		{"first", [][]table.Field{opt, req, req}, []bool{false, true}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			root := t.TempDir()
			for i, f := range tc.fields {
				writePart(t, root, part{path: fmt.Sprintf("p%d.parquet", i), fields: f, rows: [][]string{{"x", "1"}}})
			}
			files, err := dataset.List(root)
			if err != nil {
				t.Fatal(err)
			}
			d, err := dataset.New(files, openFile)
			if err != nil {
				t.Fatal(err)
			}
			defer d.Close()
			for j, f := range d.Schema().Fields {
				if f.Nullable != tc.want[j] {
					t.Errorf("column %q: Nullable %v, want %v", f.Name, f.Nullable, tc.want[j])
				}
			}
			if got := readAll(t, d); len(got.cols[0]) != 3 {
				t.Errorf("%d rows, want 3", len(got.cols[0]))
			}
		})
	}
}

// TestReaderSelect selects file and key columns in any order, key columns
// first, key columns only and none at all.
func TestReaderSelect(t *testing.T) {
	for _, ext := range []string{"parquet", "csv"} {
		t.Run(ext, func(t *testing.T) { testReaderSelect(t, ext) })
	}
}

func testReaderSelect(t *testing.T, ext string) {
	root := t.TempDir()
	fields := []table.Field{fieldsAB[0], fieldsAB[1], {Name: "c", Kind: table.Float64, Nullable: true}}
	rows := func(tag string, n int) [][]string {
		var out [][]string
		for i, r := range rowsOf(tag, n) {
			out = append(out, append(r, fmt.Sprint(float64(i)+0.5)))
		}
		return out
	}
	writePart(t, root, part{path: "y=2023/m=1/p." + ext, fields: fields, rows: rows("a", 3)})
	writePart(t, root, part{path: "y=2023/m=2/p." + ext, fields: fields, rows: nil})
	writePart(t, root, part{path: "y=2024/m=__HIVE_DEFAULT_PARTITION__/p." + ext, fields: fields, rows: rows("b", 2), rg: 1})
	files, err := dataset.List(root)
	if err != nil {
		t.Fatal(err)
	}
	// The whole table, to select from.
	d, err := dataset.New(files, openFile)
	if err != nil {
		t.Fatal(err)
	}
	all := readAll(t, d)
	d.Close()
	if !slices.Equal(all.names, []string{"a", "b", "c", "y", "m"}) || !slices.Equal(all.cols[4], []string{"1", "1", "1", null, null}) ||
		!slices.Equal(all.cols[3], []string{"2023", "2023", "2023", "2024", "2024"}) {
		t.Fatalf("whole table: %v %q", all.names, all.cols)
	}
	for _, sel := range [][]int{{0, 1, 2, 3, 4}, {2, 0}, {3, 1}, {4, 3, 2, 1, 0}, {0, 4, 1}, {3}, {4, 3}, {1}, {}} {
		t.Run(fmt.Sprint(sel), func(t *testing.T) {
			d, err := dataset.New(files, openFile)
			if err != nil {
				t.Fatal(err)
			}
			defer d.Close()
			if err := d.Select(sel); err != nil {
				t.Fatal(err)
			}
			var names []string
			for _, c := range sel {
				names = append(names, all.names[c])
			}
			if got := d.Schema().Names(); !slices.Equal(got, names) {
				t.Fatalf("schema %v, want %v", got, names)
			}
			got := readAll(t, d)
			// A batch a row group (the empty file has none), or a
			// batch a CSV file.
			want := map[string][]int{"parquet": {3, 1, 1}, "csv": {3, 2}}[ext]
			if !slices.Equal(got.batches, want) {
				t.Errorf("batches %v, want %v", got.batches, want)
			}
			for i, c := range sel {
				if !slices.Equal(got.cols[i], all.cols[c]) {
					t.Errorf("column %q: %q, want %q", all.names[c], got.cols[i], all.cols[c])
				}
			}
		})
	}
	d, err = dataset.New(files, openFile)
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	for _, sel := range [][]int{{5}, {-1}, {0, 9}, {1, 1}, {0, 3, 3}} { // out of range, or twice (the table.Reader contract)
		if err := d.Select(sel); err == nil {
			t.Errorf("Select(%v) accepted", sel)
		}
	}
	if _, err := d.Next(); err != nil {
		t.Fatal(err)
	}
	if err := d.Select([]int{0}); err == nil {
		t.Error("Select after Next accepted")
	}
}

// TestReaderKeyColumns reads the key columns' cells: one dictionary entry
// a file, a null partition as nulls, an escaped value unescaped, and the
// declared kind and nullability.
func TestReaderKeyColumns(t *testing.T) {
	root := t.TempDir()
	writePart(t, root, part{path: "city=New%2FYork/n=1/p.csv", fields: fieldsAB, rows: rowsOf("a", 2)})
	writePart(t, root, part{path: "city=__HIVE_DEFAULT_PARTITION__/n=2/p.csv", fields: fieldsAB, rows: rowsOf("b", 3)})
	writePart(t, root, part{path: "city=/n=3/p.csv", fields: fieldsAB, rows: rowsOf("c", 1)})
	files, err := dataset.List(root)
	if err != nil {
		t.Fatal(err)
	}
	d, err := dataset.New(files, openFile)
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	want := []table.Field{{Name: "city", Kind: table.String, Nullable: true}, {Name: "n", Kind: table.String}}
	if got := d.Schema().Fields[2:]; !slices.Equal(got, want) {
		t.Fatalf("key fields %v, want %v", got, want)
	}
	got := readAll(t, d)
	// Paths in byte order: "city=/", "city=New%2FYork/", "city=__HIVE...".
	if w := []string{"", "New/York", "New/York", null, null, null}; !slices.Equal(got.cols[2], w) {
		t.Errorf("city: %q, want %q", got.cols[2], w)
	}
	if w := []string{"3", "1", "1", "2", "2", "2"}; !slices.Equal(got.cols[3], w) {
		t.Errorf("n: %q, want %q", got.cols[3], w)
	}
}

// TestDuplicateKey refuses folder keys that would make two columns of the
// same name.
func TestDuplicateKey(t *testing.T) {
	for _, tc := range []struct{ path, msg string }{
		{"a=1/p.csv", `folder key "a" is also a column`},
		{"k=1/k=2/p.csv", `folder key "k" is given twice`},
	} {
		root := t.TempDir()
		writePart(t, root, part{path: tc.path, fields: fieldsAB, rows: rowsOf("x", 1)})
		files, err := dataset.List(root)
		if err != nil {
			t.Fatal(err)
		}
		_, err = dataset.New(files, openFile)
		if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), tc.msg) {
			t.Errorf("%s: New: %v, want ErrCorrupt and %s", tc.path, err, tc.msg)
		}
	}
}

// TestReaderNumRows: the sum of the files' rows, or -1 as soon as one file
// (CSV) does not know its rows before reading.
func TestReaderNumRows(t *testing.T) {
	root := t.TempDir()
	writePart(t, root, part{path: "a.parquet", fields: fieldsAB, rows: rowsOf("a", 4)})
	writePart(t, root, part{path: "b.parquet", fields: fieldsAB, rows: rowsOf("b", 3)})
	for _, tc := range []struct {
		path string
		want int64
	}{{"*.parquet", 7}, {"*", -1}} {
		if tc.want < 0 {
			writePart(t, root, part{path: "c.csv", fields: fieldsAB, rows: rowsOf("c", 2)})
		}
		files, err := dataset.List(filepath.Join(root, tc.path))
		if err != nil {
			t.Fatal(err)
		}
		d, err := dataset.New(files, openFile)
		if err != nil {
			t.Fatal(err)
		}
		if n := d.NumRows(); n != tc.want {
			t.Errorf("%s: NumRows %d, want %d", tc.path, n, tc.want)
		}
		if n := d.EstimateRows(); tc.want >= 0 && n != tc.want {
			t.Errorf("%s: EstimateRows %d, want %d", tc.path, n, tc.want)
		}
		d.Close()
	}
}

// TestReaderEstimateRows estimates the rows of CSV files from the rows
// per byte of the files read to the end, not counting the rows already
// read of the file being read against bytes that leave it out.
func TestReaderEstimateRows(t *testing.T) {
	root := t.TempDir()
	// Two files of the same size and rows.
	writePart(t, root, part{path: "a.csv", fields: fieldsAB, rows: rowsOf("a", 10)})
	writePart(t, root, part{path: "b.csv", fields: fieldsAB, rows: rowsOf("b", 10)})
	files, err := dataset.List(root)
	if err != nil {
		t.Fatal(err)
	}
	if files[0].Size != files[1].Size {
		t.Fatalf("sizes %d and %d", files[0].Size, files[1].Size)
	}
	d, err := dataset.New(files, openOpts(tableio.ReadOptions{CSV: csvio.Options{BatchRows: 3}}))
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	if n := d.EstimateRows(); n != 0 {
		t.Errorf("EstimateRows before reading: %d, want 0", n)
	}
	read := 0
	for read < 13 { // the first file and a batch of the second
		b, err := d.Next()
		if err != nil {
			t.Fatal(err)
		}
		read += b.Rows
	}
	// 10 rows in the first file's bytes, twice those bytes in all: 20
	// (19 if the division rounds down).
	if n := d.EstimateRows(); n != 20 && n != 19 {
		t.Errorf("EstimateRows after the first file and a batch of the second: %d, want 20", n)
	}
}

// TestReaderDictIDs: the readers of two files may give the same Dict ID
// to different dictionaries (Arrow's number theirs from 1 in each file);
// the dataset gives each file's its own, keeps a file's ID the same
// across its batches, and leaves the files' batches as they were.
func TestReaderDictIDs(t *testing.T) {
	schema := &table.Schema{Fields: []table.Field{{Name: "s", Kind: table.String}}}
	dict := func(id uint64, entries ...string) *table.Dict {
		d := &table.Dict{Offsets: []int32{0}, ID: id}
		for _, e := range entries {
			d.Data = append(d.Data, e...)
			d.Offsets = append(d.Offsets, int32(len(d.Data)))
		}
		return d
	}
	batch := func(d *table.Dict, idx ...int32) *table.Batch {
		return &table.Batch{Rows: len(idx), Cols: []table.Column{{Form: table.FormDict, Dict: d, Indices: idx}}}
	}
	a7, a8, b7 := dict(7, "x", "y"), dict(8, "z"), dict(7, "p", "q", "r")
	tables := map[string][]*table.Batch{
		"a": {batch(a7, 0, 1), batch(a7, 1), batch(a8, 0), batch(a7, 0)},
		"b": {batch(b7, 2, 0), batch(b7, 1)},
		"c": {batch(dict(0, "u"), 0)}, // ID 0: no ID, left as it is
	}
	open := func(p string) (table.Reader, error) { return table.NewMemReader(schema, tables[p]...), nil }
	keys := func(v string) []dataset.Key { return []dataset.Key{{Name: "k", Value: v}} }
	d, err := dataset.New([]dataset.File{{Path: "a", Keys: keys("1")}, {Path: "b", Keys: keys("2")}, {Path: "c", Keys: keys("3")}}, open)
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	if n := d.NumRows(); n != -1 {
		t.Errorf("NumRows %d, want -1 (memory tables do not count)", n)
	}
	var ids, keyIDs []uint64
	var cells []string
	for {
		b, err := d.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		c := &b.Cols[0]
		ids = append(ids, c.Dict.ID)
		keyIDs = append(keyIDs, b.Cols[1].Dict.ID)
		for i := range b.Rows {
			cells = append(cells, string(c.Bytes(i))+"/"+string(b.Cols[1].Bytes(i)))
		}
	}
	if w := []string{"x/1", "y/1", "y/1", "z/1", "x/1", "r/2", "p/2", "q/2", "u/3"}; !slices.Equal(cells, w) {
		t.Errorf("cells %q, want %q", cells, w)
	}
	// Batches: a7 a7 a8 a7 (file a), b7 b7 (file b), the one without an
	// ID (file c).
	if len(ids) != 7 {
		t.Fatalf("%d batches, want 7", len(ids))
	}
	a, a2, b := ids[0], ids[2], ids[4]
	if a == 0 || a2 == 0 || b == 0 || ids[1] != a || ids[3] != a || a2 == a || ids[5] != b || b == a || b == a2 {
		t.Errorf("dictionary IDs %v: want a file's own ID the same in its batches and different from every other", ids)
	}
	if ids[6] != 0 {
		t.Errorf("a dictionary without an ID got %d", ids[6])
	}
	// The key columns' dictionaries: one a file, the same in the file's
	// batches, none equal to another file's.
	if keyIDs[1] != keyIDs[0] || keyIDs[3] != keyIDs[0] || keyIDs[5] != keyIDs[4] || keyIDs[0] == keyIDs[4] || keyIDs[6] == keyIDs[4] || keyIDs[6] == keyIDs[0] {
		t.Errorf("key dictionary IDs %v", keyIDs)
	}
	for _, k := range keyIDs {
		if k == 0 || slices.Contains(ids, k) {
			t.Errorf("key dictionary ID %d: zero, or a column's too (%v)", k, ids)
		}
	}
	if a7.ID != 7 || b7.ID != 7 || a8.ID != 8 {
		t.Errorf("the files' dictionaries were changed: IDs %d %d %d", a7.ID, b7.ID, a8.ID)
	}
}

// tagged and plain are rows of Parquet parts with and without a nested
// column (a list), written by parquet-go.
type tagged struct {
	ID   int64    `parquet:"id"`
	Tags []string `parquet:"tags,list"`
	City string   `parquet:"city"`
}

type plain struct {
	ID   int64  `parquet:"id"`
	City string `parquet:"city"`
}

// writeRows writes rows as a Parquet file at path with parquet-go.
func writeRows[T any](t *testing.T, path string, rows []T) {
	t.Helper()
	if err := parquet.WriteFile(path, rows); err != nil {
		t.Fatal(err)
	}
}

// TestReaderNested: the parts' nested columns (not read, copied whole by a
// Parquet output) must be the same in every part.
func TestReaderNested(t *testing.T) {
	root := t.TempDir()
	writeRows(t, filepath.Join(root, "p0.parquet"), []tagged{{1, []string{"a"}, "x"}, {2, nil, "y"}})
	writeRows(t, filepath.Join(root, "p1.parquet"), []tagged{{3, []string{"b", "c"}, "z"}})
	files, err := dataset.List(root)
	if err != nil {
		t.Fatal(err)
	}
	d, err := dataset.New(files, openFile)
	if err != nil {
		t.Fatal(err)
	}
	if n := d.Nested(); !slices.Equal(n, []pqio.Nested{{Name: "tags", Kind: "list", Before: 1}}) {
		t.Errorf("Nested %v", n)
	}
	got := readAll(t, d)
	d.Close()
	if !slices.Equal(got.names, []string{"id", "city"}) || !slices.Equal(got.cols[1], []string{"x", "y", "z"}) {
		t.Errorf("%v %q", got.names, got.cols)
	}

	p2 := filepath.Join(root, "p2.parquet")
	writeRows(t, p2, []plain{{4, "w"}})
	if files, err = dataset.List(root); err != nil {
		t.Fatal(err)
	}
	_, err = dataset.New(files, openFile)
	if !errors.Is(err, table.ErrCorrupt) || !strings.Contains(err.Error(), p2) || !strings.Contains(err.Error(), "tags") {
		t.Errorf("New with a part without the nested column: %v, want ErrCorrupt naming %s and tags", err, p2)
	}
}

// TestReaderNextAfterClose: Next after Close is an error, not the rows of
// the closed file again from its start.
func TestReaderNextAfterClose(t *testing.T) {
	root := t.TempDir()
	writePart(t, root, part{path: "a.parquet", fields: fieldsAB, rows: rowsOf("a", 4), rg: 2})
	writePart(t, root, part{path: "b.parquet", fields: fieldsAB, rows: rowsOf("b", 2)})
	files, err := dataset.List(root)
	if err != nil {
		t.Fatal(err)
	}
	d, err := dataset.New(files, openFile)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := d.Next(); err != nil {
		t.Fatal(err)
	}
	if err := d.Close(); err != nil {
		t.Fatal(err)
	}
	if b, err := d.Next(); err == nil {
		t.Errorf("Next after Close: a batch of %d rows from row %d, want an error", b.Rows, b.FirstRow)
	}
	if err := d.Close(); err != nil {
		t.Errorf("Close again: %v", err)
	}
}

// TestReaderLocate: a row counted across the files (as the batches'
// FirstRow counts) is found in its file, at its row there, past an empty
// file too; rows not yet read are not.
func TestReaderLocate(t *testing.T) {
	root := t.TempDir()
	var files []dataset.File
	for i, n := range []int{3, 0, 2, 4} {
		p := writePart(t, root, part{path: fmt.Sprintf("p%d.parquet", i), fields: fieldsAB, rows: rowsOf("x", n)})
		files = append(files, dataset.File{Path: p})
	}
	d, err := dataset.New(files, openFile)
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	if _, _, ok := d.Locate(1); ok {
		t.Error("a row not read yet was located")
	}
	for {
		if _, err := d.Next(); err != nil {
			break
		}
	}
	for _, c := range []struct {
		row  int64
		file int
		at   int64
	}{{1, 0, 1}, {3, 0, 3}, {4, 2, 1}, {5, 2, 2}, {6, 3, 1}, {9, 3, 4}} {
		path, at, ok := d.Locate(c.row)
		if !ok || path != files[c.file].Path || at != c.at {
			t.Errorf("row %d: %s row %d (%v), want %s row %d", c.row, path, at, ok, files[c.file].Path, c.at)
		}
	}
	if _, _, ok := d.Locate(10); ok {
		t.Error("row 10 of 9 located")
	}
}
