package dataset

import (
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"

	"manyfold/io/pqio"
	"manyfold/io/table"
)

// Reader reads the files of a dataset as one table: each file's rows in
// turn, then the folder keys as text columns after the files' own. Every
// file must have the same columns, in the same order and of the same kinds
// (a column nullable in one file is nullable in the table). Files are
// opened one at a time; New opens each once first to check its columns
// and learn its row count.
//
// A batch's FirstRow counts the rows of the dataset, the files before
// included, so that row numbers (and the folds drawn from them) are those
// of the files concatenated; batches carry no line numbers. A file's
// reader names the file and its own row or line in the errors it reports.
// The Dict IDs of a file's dictionary columns are renumbered so that they
// stay unique across files.
type Reader struct {
	files  []File
	open   func(path string) (table.Reader, error)
	schema table.Schema // the files' columns, then the keys
	width  int          // the files' columns
	rows   []int64      // per file, -1 when not known before reading
	sel    []int        // positions in the full schema, nil for all
	fsel   []int        // the files' columns that sel reads, in order
	at     int          // the file being read (len(files) at the end)
	cur    table.Reader
	out    table.Batch
	ids    map[uint64]uint64 // the current file's Dict IDs, renumbered
	nextID uint64
	seen   [][]table.Field // per file, its columns as first opened
	wide   widener         // integers read as floats
	nested []pqio.Nested
	cols   []int          // the columns read: sel, or every position
	keyCol []table.Column // per key, the current file's value
	zeros  []int32
	trues  []bool
	row    int64   // rows returned
	starts []int64 // per file opened, the rows before it
	done   int64   // rows of the files read to the end
	bytes  int64   // bytes of the files read to the end
	size   int64   // bytes of every file
	closed bool
}

// New opens the dataset of files with open (which opens one file as a
// table), checks that every file has the columns of the first, and returns
// the reader. A file with a column missing, added, renamed or of another
// kind is an error naming the file and the column, with two exceptions: a
// column of integers in one file and of floats in another is a float
// column (CSV infers each file's kinds from its own values), and a file
// without rows (its kinds inferred from nothing) takes the others' kinds.
func New(files []File, open func(path string) (table.Reader, error)) (*Reader, error) {
	if len(files) == 0 {
		return nil, ErrNoFiles
	}
	d := &Reader{files: files, open: open, rows: make([]int64, len(files)), ids: map[uint64]uint64{}}
	d.seen = make([][]table.Field, len(files))
	for i, f := range files {
		r, err := open(f.Path)
		if err != nil {
			return nil, err
		}
		d.seen[i] = append([]table.Field(nil), r.Schema().Fields...)
		if d.rows[i] = table.RowCount(r); d.rows[i] < 0 && isEmpty(r) {
			d.rows[i] = 0
		}
		var nested []pqio.Nested
		if pr, ok := table.Find[*pqio.Reader](r); ok {
			nested = pr.Nested()
		}
		r.Close()
		if i == 0 {
			d.nested = nested
		} else if !slices.Equal(nested, d.nested) {
			return nil, fmt.Errorf("%s: %w: its nested columns (%s) differ from those of %s (%s)", f.Path, table.ErrCorrupt, nestedNames(nested), files[0].Path, nestedNames(d.nested))
		}
		if !sameKeys(f.Keys, files[0].Keys) {
			return nil, fmt.Errorf("%s: %w: folder keys %s, but %s has %s", f.Path, table.ErrCorrupt, keyNames(f.Keys), files[0].Path, keyNames(files[0].Keys))
		}
		d.size += f.Size
	}
	if err := d.merge(); err != nil {
		return nil, d.dataErrorFirst(err)
	}
	d.width = len(d.schema.Fields)
	for _, k := range files[0].Keys {
		if i := d.schema.Index(k.Name); i >= d.width {
			return nil, fmt.Errorf("%s: %w: folder key %q is given twice", files[0].Path, table.ErrCorrupt, k.Name)
		} else if i >= 0 {
			return nil, fmt.Errorf("%s: %w: folder key %q is also a column of the files", files[0].Path, table.ErrCorrupt, k.Name)
		}
		nullable := false
		for _, f := range files {
			for _, fk := range f.Keys {
				nullable = nullable || (fk.Name == k.Name && fk.Null)
			}
		}
		d.schema.Fields = append(d.schema.Fields, table.Field{Name: k.Name, Kind: table.String, Nullable: nullable})
	}
	d.keyCol = make([]table.Column, len(files[0].Keys))
	for i := range d.schema.Fields {
		d.cols = append(d.cols, i)
	}
	return d, nil
}

// merge sets the dataset's columns from the files' (Columns).
func (d *Reader) merge() error {
	parts := make([]Part, len(d.files))
	for i, f := range d.files {
		parts[i] = Part{Path: f.Path, Fields: d.seen[i], Empty: d.rows[i] == 0}
	}
	fields, err := Columns(parts)
	d.schema.Fields = fields
	return err
}

// ErrParts is wrapped by the errors of files whose columns differ from
// the other files' of their dataset; it wraps table.ErrCorrupt.
var ErrParts error = partsError{}

type partsError struct{}

func (partsError) Error() string { return "every file of a dataset must hold the same columns" }
func (partsError) Unwrap() error { return table.ErrCorrupt }

// dataErrorFirst returns, for err naming a file whose columns differ, the
// first error that reading the file gives, if any: a CSV file's ragged
// row makes it infer other kinds, and the row says more than the kinds.
func (d *Reader) dataErrorFirst(err error) error {
	var de *table.DataError
	if !errors.As(err, &de) {
		return err
	}
	r, oerr := d.open(de.File)
	if oerr != nil {
		return oerr
	}
	defer r.Close()
	for {
		if _, rerr := r.Next(); rerr == io.EOF {
			return err
		} else if rerr != nil {
			return rerr
		}
	}
}

// isEmpty reports whether r holds no rows (it reads its first batch).
func isEmpty(r table.Reader) bool {
	_, err := r.Next()
	return err == io.EOF
}

// nestedNames lists nested columns for a message.
func nestedNames(n []pqio.Nested) string {
	if len(n) == 0 {
		return "none"
	}
	names := make([]string, len(n))
	for i, c := range n {
		names[i] = c.Name
	}
	return strings.Join(names, ", ")
}

// Nested returns the nested columns of the files, when they are Parquet
// (the same in every file; see pqio.Reader.Nested): they are not read, and
// only a Parquet output can copy them.
func (d *Reader) Nested() []pqio.Nested { return d.nested }

// Files returns the dataset's files.
func (d *Reader) Files() []File { return d.files }

// Schema returns the files' columns and the folder keys (or those
// selected).
func (d *Reader) Schema() *table.Schema { return selected(&d.schema, d.sel) }

// Select restricts the reader to the columns at the given positions.
func (d *Reader) Select(cols []int) error {
	if d.cur != nil || d.at > 0 {
		return errors.New("dataset: Select after Next")
	}
	var fsel []int
	for i, c := range cols {
		if c < 0 || c >= len(d.schema.Fields) {
			return fmt.Errorf("dataset: no column %d", c)
		}
		if slices.Contains(cols[:i], c) {
			return fmt.Errorf("dataset: column %d selected twice", c)
		}
		if c < d.width {
			fsel = append(fsel, c)
		}
	}
	// Not nil, even for no columns: nil is every column.
	d.sel, d.fsel = append([]int{}, cols...), fsel
	d.cols = d.sel
	return nil
}

// NumRows returns the rows of every file, or -1 when a file does not
// know its count before it is read.
func (d *Reader) NumRows() int64 {
	var n int64
	for _, r := range d.rows {
		if r < 0 {
			return -1
		}
		n += r
	}
	return n
}

// InputBytes returns the bytes read so far (whole files, and the current
// file's count where its reader keeps one) and the size of every file.
func (d *Reader) InputBytes() (read, size int64) {
	read = d.bytes
	if d.cur != nil {
		if ic, ok := table.Find[table.InputCounter](d.cur); ok {
			r, _ := ic.InputBytes()
			read += r
		}
	}
	return read, d.size
}

// EstimateRows returns the row count when every file knows its own, and
// otherwise an estimate from the rows per byte of the files read so far,
// or 0.
func (d *Reader) EstimateRows() int64 {
	if n := d.NumRows(); n >= 0 {
		return n
	}
	if d.done == 0 || d.bytes == 0 {
		return 0
	}
	return int64(float64(d.done) / float64(d.bytes) * float64(d.size))
}

// Next returns the next batch of the current file, opening the files in
// turn; io.EOF after the last.
func (d *Reader) Next() (*table.Batch, error) {
	if d.closed {
		return nil, errors.New("dataset: Next after Close")
	}
	for d.at < len(d.files) {
		if d.cur == nil {
			if err := d.openFile(); err != nil {
				return nil, err
			}
		}
		b, err := d.cur.Next()
		if err == io.EOF {
			d.cur.Close()
			d.cur = nil
			d.bytes += d.files[d.at].Size
			d.done = d.row
			d.at++
			continue
		}
		if err != nil {
			return nil, err
		}
		first := d.row + 1
		d.row += int64(b.Rows)
		return d.batch(b, first), nil
	}
	return nil, io.EOF
}

// openFile opens the file at d.at, checks its columns again (the file
// may have changed since New) and restricts it to the selection.
func (d *Reader) openFile() error {
	f := d.files[d.at]
	for len(d.starts) <= d.at {
		d.starts = append(d.starts, d.row)
	}
	r, err := d.open(f.Path)
	if err != nil {
		return err
	}
	if col, ok := changedColumn(r.Schema().Fields, d.seen[d.at]); ok {
		r.Close()
		return &table.DataError{File: f.Path, Column: col, Err: fmt.Errorf("%w: the file's columns changed while the dataset was read", table.ErrCorrupt)}
	}
	if d.sel != nil {
		if err := r.Select(d.fsel); err != nil {
			r.Close()
			return err
		}
	}
	d.cur = r
	clear(d.ids)
	// The folder keys' values for this file, each a dictionary of one
	// entry with an ID of its own.
	for k, key := range f.Keys {
		d.nextID++
		c := table.Column{Form: table.FormDict, Dict: &table.Dict{Data: []byte(key.Value), Offsets: []int32{0, int32(len(key.Value))}, ID: d.nextID}}
		if key.Null {
			c.Nulls = []bool{}
		}
		d.keyCol[k] = c
	}
	return nil
}

// changedColumn names the first column of now that differs from was in
// name or kind, or that one of them lacks; ok is false when none does.
func changedColumn(now, was []table.Field) (name string, ok bool) {
	for j := range max(len(now), len(was)) {
		switch {
		case j >= len(now):
			return was[j].Name, true
		case j >= len(was) || now[j].Name != was[j].Name || now[j].Kind != was[j].Kind:
			return now[j].Name, true
		}
	}
	return "", false
}

// batch returns b renumbered into the dataset's rows, with its
// dictionaries renumbered and the selection's key columns added.
func (d *Reader) batch(b *table.Batch, first int64) *table.Batch {
	out := &d.out
	out.Rows, out.FirstRow, out.Lines = b.Rows, first, nil
	out.Cols = out.Cols[:0]
	fi := 0
	for _, c := range d.cols {
		if c < d.width {
			out.Cols = append(out.Cols, b.Cols[fi])
			col := &out.Cols[len(out.Cols)-1]
			d.renumber(col)
			d.wide.conform(col, c, d.schema.Fields[c].Kind)
			fi++
			continue
		}
		out.Cols = append(out.Cols, d.keyColumn(c-d.width, b.Rows))
	}
	return out
}

// keyColumn returns rows copies of the current file's value of folder key
// k: a dictionary of one entry, or nulls.
func (d *Reader) keyColumn(k, rows int) table.Column {
	c := d.keyCol[k]
	for len(d.zeros) < rows {
		d.zeros = append(d.zeros, 0)
		d.trues = append(d.trues, true)
	}
	c.Indices = d.zeros[:rows]
	if c.Nulls != nil {
		c.Nulls = d.trues[:rows]
	}
	return c
}

// renumber gives a file's dictionary an ID of the dataset's own, the same
// for the same ID within a file.
func (d *Reader) renumber(c *table.Column) {
	if c.Form != table.FormDict || c.Dict == nil || c.Dict.ID == 0 {
		return
	}
	id, ok := d.ids[c.Dict.ID]
	if !ok {
		d.nextID++
		id = d.nextID
		d.ids[c.Dict.ID] = id
	}
	dict := *c.Dict
	dict.ID = id
	c.Dict = &dict
}

// Locate returns the file that holds row (counted from 1 across the files,
// as the batches' FirstRow counts) and the row's number in that file, for a
// row already read: an error found in the rows past the reader names the
// file and its own row with it.
func (d *Reader) Locate(row int64) (path string, fileRow int64, ok bool) {
	if row <= 0 || row > d.row || len(d.starts) == 0 {
		return "", 0, false
	}
	i := len(d.starts) - 1
	for i > 0 && d.starts[i] >= row {
		i--
	}
	return d.files[i].Path, row - d.starts[i], true
}

// IsFile reports whether path is one of the dataset's files.
func (d *Reader) IsFile(path string) bool {
	return slices.ContainsFunc(d.files, func(f File) bool { return f.Path == path })
}

// Close closes the file being read; Next fails after it.
func (d *Reader) Close() error {
	d.closed = true
	if d.cur == nil {
		return nil
	}
	err := d.cur.Close()
	d.cur = nil
	return err
}
