package arrowio

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"time"

	"github.com/apache/arrow/go/v17/arrow"
	"github.com/apache/arrow/go/v17/arrow/array"
	"github.com/apache/arrow/go/v17/arrow/ipc"

	"manyfold/io/table"
)

// reader implements table.Reader over an Arrow file or stream reader.
type reader struct {
	name   string
	closer io.Closer // the file opened by Open or spoolFile, if any

	file   *ipc.FileReader // file format
	nrec   int
	irec   int
	stream *ipc.Reader // stream format

	full    []field // every column of the file
	schema  table.Schema
	sel     []int // positions in full of the schema's columns
	started bool
	closed  bool
	err     error // sticky error from Next

	rec    arrow.Record // current record, owned
	batch  table.Batch
	cols   []colState // per selected column
	rows   int64      // rows returned so far
	nbatch int        // record batches read so far
	lastID uint64     // last dictionary ID handed out
}

// field is one column of the file as manyfold sees it.
type field struct {
	table.Field
	typ         arrow.DataType
	unsupported error // non-nil when the column's type cannot be read
}

// colState holds the buffers reused for one selected column, and its
// current dictionary.
type colState struct {
	nulls  []bool
	ints   []int64
	floats []float64
	bools  []bool
	offs   []int32
	data   []byte
	idx    []int32

	dictData  arrow.ArrayData // the dictionary behind dict, retained
	dict      table.Dict
	dictNulls []bool // null entries of dict, nil when none
	dictOffs  []int32
}

func newReader(name string, s *arrow.Schema) (*reader, error) {
	if s == nil {
		return nil, fmt.Errorf("%s: %w: no schema", name, table.ErrCorrupt)
	}
	r := &reader{name: name}
	r.full = make([]field, s.NumFields())
	for i, f := range s.Fields() {
		kind, err := kindOf(f.Type)
		if err != nil {
			err = fmt.Errorf("%s: column %q: %w", name, f.Name, err)
		}
		r.full[i] = field{Field: table.Field{Name: f.Name, Kind: kind, Nullable: f.Nullable}, typ: f.Type, unsupported: err}
	}
	all := make([]int, len(r.full))
	for i := range all {
		all[i] = i
	}
	r.selectCols(all)
	return r, nil
}

// kindOf maps an Arrow type onto a kind, or explains why it cannot.
func kindOf(dt arrow.DataType) (table.Kind, error) {
	switch dt.ID() {
	case arrow.STRING, arrow.LARGE_STRING, arrow.BINARY, arrow.LARGE_BINARY,
		arrow.STRING_VIEW, arrow.BINARY_VIEW, arrow.FIXED_SIZE_BINARY, arrow.NULL:
		return table.String, nil
	case arrow.INT8, arrow.INT16, arrow.INT32, arrow.INT64,
		arrow.UINT8, arrow.UINT16, arrow.UINT32, arrow.UINT64,
		arrow.TIME32, arrow.TIME64, arrow.DURATION:
		return table.Int64, nil
	case arrow.DATE32, arrow.DATE64, arrow.TIMESTAMP:
		return table.String, nil // ISO 8601 text (timeText)
	case arrow.FLOAT16, arrow.FLOAT32, arrow.FLOAT64:
		return table.Float64, nil
	case arrow.BOOL:
		return table.Bool, nil
	case arrow.DICTIONARY:
		dt := dt.(*arrow.DictionaryType)
		switch dt.ValueType.ID() {
		case arrow.STRING, arrow.LARGE_STRING, arrow.BINARY, arrow.LARGE_BINARY:
			return table.String, nil
		}
		return table.String, fmt.Errorf("dictionary of %s values is not supported (only text dictionaries are)", typeName(dt.ValueType))
	case arrow.LIST, arrow.LARGE_LIST, arrow.FIXED_SIZE_LIST, arrow.LIST_VIEW, arrow.LARGE_LIST_VIEW,
		arrow.STRUCT, arrow.MAP, arrow.SPARSE_UNION, arrow.DENSE_UNION:
		return table.String, fmt.Errorf("nested type %s cannot be read; select other columns", typeName(dt))
	}
	return table.String, fmt.Errorf("type %s is not supported; select other columns", typeName(dt))
}

// typeName is the text of an Arrow type for a message of one line: quoted
// when a field name inside it holds characters that need escaping.
func typeName(dt arrow.DataType) string {
	s := dt.String()
	if q := strconv.Quote(s); q[1:len(q)-1] != s {
		return q
	}
	return s
}

func (r *reader) selectCols(cols []int) {
	r.sel = append(r.sel[:0], cols...)
	r.schema.Fields = make([]table.Field, len(cols))
	for i, c := range cols {
		r.schema.Fields[i] = r.full[c].Field
	}
	r.cols = make([]colState, len(cols))
	r.batch.Cols = make([]table.Column, len(cols))
}

// Schema returns the (selected) columns.
func (r *reader) Schema() *table.Schema { return &r.schema }

// Select restricts the reader to the columns at the given positions of the
// full schema. Selecting a column of an unsupported type is an error.
func (r *reader) Select(cols []int) error {
	if r.started {
		return fmt.Errorf("%s: Select called after Next", r.name)
	}
	for _, c := range cols {
		if c < 0 || c >= len(r.full) {
			return fmt.Errorf("%s: no column %d (the file has %d)", r.name, c, len(r.full))
		}
		if err := r.full[c].unsupported; err != nil {
			return err
		}
	}
	r.selectCols(cols)
	return nil
}

// Next returns the next record batch converted to a table.Batch.
func (r *reader) Next() (*table.Batch, error) {
	if r.err != nil {
		return nil, r.err
	}
	if r.closed {
		return nil, fmt.Errorf("%s: reader is closed", r.name)
	}
	if !r.started {
		r.started = true
		for _, c := range r.sel {
			if err := r.full[c].unsupported; err != nil {
				r.err = err
				return nil, err
			}
		}
	}
	b, err := r.next()
	if err != nil {
		r.err = err
	}
	return b, err
}

func (r *reader) next() (b *table.Batch, err error) {
	defer func() {
		if p := recover(); p != nil {
			b, err = nil, corrupt(r.name, p)
		}
	}()
	if r.rec != nil {
		r.rec.Release()
		r.rec = nil
	}
	if r.file != nil {
		if r.irec >= r.nrec {
			return nil, io.EOF
		}
		rec, err := r.file.RecordAt(r.irec)
		if err != nil {
			return nil, fmt.Errorf("%s: record batch %d: %w: %w", r.name, r.irec+1, table.ErrCorrupt, err)
		}
		r.irec++
		r.rec = rec
	} else {
		if !r.stream.Next() {
			if err := r.stream.Err(); err != nil {
				return nil, fmt.Errorf("%s: %w: %w", r.name, table.ErrCorrupt, err)
			}
			return nil, io.EOF
		}
		r.rec = r.stream.Record()
		r.rec.Retain()
	}
	r.nbatch++
	n := int(r.rec.NumRows())
	if n < 0 || int64(r.rec.NumCols()) != int64(len(r.full)) {
		return nil, fmt.Errorf("%s: %w: record batch does not match the schema", r.name, table.ErrCorrupt)
	}
	for i, c := range r.sel {
		arr := r.rec.Column(c)
		if arr.Len() != n {
			return nil, fmt.Errorf("%s: column %q: %w: %d values in a batch of %d rows", r.name, r.full[c].Name, table.ErrCorrupt, arr.Len(), n)
		}
		if err := r.convert(arr, &r.cols[i], &r.batch.Cols[i], r.full[c].Name); err != nil {
			return nil, err
		}
	}
	r.batch.Rows = n
	r.batch.FirstRow = r.rows + 1
	r.rows += int64(n)
	return &r.batch, nil
}

// dataErr reports bad data at row i (0-based within the batch) of column.
func (r *reader) dataErr(i int, column string, err error) error {
	return &table.DataError{File: r.name, Row: r.rows + int64(i) + 1, Column: column, Err: err}
}

// badBuffers reports buffers of the current record batch that do not fit
// the declared lengths.
func (r *reader) badBuffers(column, what string) error {
	return fmt.Errorf("%s: record batch %d: column %q: %w: %s", r.name, r.nbatch, column, table.ErrCorrupt, what)
}

// convert fills col from arr, reusing the buffers of st.
func (r *reader) convert(arr arrow.Array, st *colState, col *table.Column, name string) error {
	n := arr.Len()
	*col = table.Column{}
	nulls, err := r.nullsOf(arr, st, name)
	if err != nil {
		return err
	}
	col.Nulls = nulls
	switch a := arr.(type) {
	case *array.String:
		return r.text32(st, col, n, a.Data(), name)
	case *array.Binary:
		return r.text32(st, col, n, a.Data(), name)
	case *array.LargeString:
		return r.text64(st, col, n, a.Data(), name)
	case *array.LargeBinary:
		return r.text64(st, col, n, a.Data(), name)
	case *array.StringView:
		return r.textCopy(st, col, n, name, viewTextLimit(a.Data()), func(dst []byte, i int) []byte { return append(dst, a.Value(i)...) })
	case *array.BinaryView:
		return r.textCopy(st, col, n, name, viewTextLimit(a.Data()), func(dst []byte, i int) []byte { return append(dst, a.Value(i)...) })
	case *array.FixedSizeBinary:
		return r.textCopy(st, col, n, name, math.MaxInt32, func(dst []byte, i int) []byte { return append(dst, a.Value(i)...) })
	case *array.Null:
		col.Form = table.FormText
		st.offs = resize(st.offs, n+1)
		clear(st.offs)
		col.Offsets = st.offs
		col.Data = st.data[:0]
		st.nulls = resize(st.nulls, n)
		for i := range st.nulls {
			st.nulls[i] = true
		}
		if n > 0 {
			col.Nulls = st.nulls
		}
		return nil
	case *array.Int64:
		return r.setInts(col, a.Int64Values(), n, name)
	case *array.Int8:
		return r.setInts(col, widen(st, a.Int8Values()), n, name)
	case *array.Int16:
		return r.setInts(col, widen(st, a.Int16Values()), n, name)
	case *array.Int32:
		return r.setInts(col, widen(st, a.Int32Values()), n, name)
	case *array.Uint8:
		return r.setInts(col, widen(st, a.Uint8Values()), n, name)
	case *array.Uint16:
		return r.setInts(col, widen(st, a.Uint16Values()), n, name)
	case *array.Uint32:
		return r.setInts(col, widen(st, a.Uint32Values()), n, name)
	case *array.Uint64:
		v := a.Uint64Values()
		for i, x := range v {
			if x > math.MaxInt64 && !(nulls != nil && nulls[i]) {
				return r.dataErr(i, name, fmt.Errorf("%d does not fit a 64-bit signed integer", x))
			}
		}
		return r.setInts(col, widen(st, v), n, name)
	case *array.Date32:
		v := a.Date32Values()
		return r.timeText(st, col, n, name, func(dst []byte, i int) []byte { return table.AppendDate(dst, int64(v[i])) })
	case *array.Date64:
		v := a.Date64Values()
		return r.timeText(st, col, n, name, func(dst []byte, i int) []byte {
			return table.AppendDate(dst, floorDiv(int64(v[i]), 86_400_000))
		})
	case *array.Time32:
		return r.setInts(col, widen(st, a.Time32Values()), n, name)
	case *array.Time64:
		return r.setInts(col, widen(st, a.Time64Values()), n, name)
	case *array.Timestamp:
		v := a.TimestampValues()
		dt := a.DataType().(*arrow.TimestampType)
		perSecond := int64(time.Second / dt.Unit.Multiplier())
		utc := dt.TimeZone != "" // an instant; without a zone, a wall clock time
		return r.timeText(st, col, n, name, func(dst []byte, i int) []byte {
			return table.AppendTimestamp(dst, int64(v[i]), perSecond, utc)
		})
	case *array.Duration:
		return r.setInts(col, widen(st, a.DurationValues()), n, name)
	case *array.Float64:
		return r.setFloats(col, a.Float64Values(), n, name)
	case *array.Float32:
		v := a.Float32Values()
		st.floats = resize(st.floats, len(v))
		for i, x := range v {
			st.floats[i] = float64(x)
		}
		return r.setFloats(col, st.floats, n, name)
	case *array.Float16:
		v := a.Values()
		st.floats = resize(st.floats, len(v))
		for i, x := range v {
			st.floats[i] = float64(x.Float32())
		}
		return r.setFloats(col, st.floats, n, name)
	case *array.Boolean:
		if vals := a.Data().Buffers()[1]; n > 0 && (vals == nil || vals.Len()*8 < a.Data().Offset()+n) {
			return r.badBuffers(name, "boolean values shorter than the column")
		}
		st.bools = resize(st.bools, n)
		for i := range st.bools {
			st.bools[i] = a.Value(i)
		}
		col.Form = table.FormBool
		col.Bools = st.bools
		return nil
	case *array.Dictionary:
		return r.dictionary(a, st, col, n, name)
	}
	return fmt.Errorf("%s: column %q: type %s is not supported", r.name, name, typeName(arr.DataType()))
}

// nullsOf returns the column's null flags, or nil when no row is null.
func (r *reader) nullsOf(arr arrow.Array, st *colState, name string) ([]bool, error) {
	if arr.NullN() == 0 || arr.DataType().ID() == arrow.NULL {
		return nil, nil
	}
	n, off := arr.Len(), arr.Data().Offset()
	bm := arr.NullBitmapBytes()
	if len(bm)*8 < off+n {
		return nil, r.badBuffers(name, "validity bitmap shorter than the column")
	}
	st.nulls = resize(st.nulls, n)
	for i := range st.nulls {
		j := off + i
		st.nulls[i] = bm[j>>3]&(1<<(j&7)) == 0
	}
	return st.nulls, nil
}

// text32 sets col to the text of an array with int32 offsets, aliasing its
// buffers when the offsets start at zero.
func (r *reader) text32(st *colState, col *table.Column, n int, d arrow.ArrayData, name string) error {
	col.Form = table.FormText
	offs, vals, err := r.offsets32(d, n, name)
	if err != nil {
		return err
	}
	col.Offsets, col.Data = rebase32(&st.offs, offs, vals)
	return nil
}

// offsets32 returns the n+1 offsets and the value bytes of a binary-like
// array with int32 offsets, after checking them.
func (r *reader) offsets32(d arrow.ArrayData, n int, name string) ([]int32, []byte, error) {
	if n == 0 {
		return zeroOffset[:], nil, nil
	}
	return checkedOffsets(r, d, n, name, arrow.Int32Traits.CastFromBytes)
}

// checkedOffsets returns the n+1 offsets (n > 0) of a binary-like array and
// its value bytes, after checking that the offsets are there, start at or
// above zero, never decrease and stay within the values.
func checkedOffsets[T int32 | int64](r *reader, d arrow.ArrayData, n int, name string, cast func([]byte) []T) ([]T, []byte, error) {
	bufs := d.Buffers()
	if len(bufs) < 3 || bufs[1] == nil {
		return nil, nil, r.badBuffers(name, "missing offsets")
	}
	all := cast(bufs[1].Bytes())
	off := d.Offset()
	if len(all) < off+n+1 {
		return nil, nil, r.badBuffers(name, "offsets shorter than the column")
	}
	offs := all[off : off+n+1]
	var vals []byte
	if bufs[2] != nil {
		vals = bufs[2].Bytes()
	}
	prev := offs[0]
	if prev < 0 {
		return nil, nil, r.badBuffers(name, "negative offset")
	}
	for _, o := range offs[1:] {
		if o < prev {
			return nil, nil, r.badBuffers(name, "offsets decrease")
		}
		prev = o
	}
	if int64(prev) > int64(len(vals)) {
		return nil, nil, r.badBuffers(name, "offsets point past the values")
	}
	return offs, vals, nil
}

var zeroOffset = [1]int32{0}

// rebase32 returns offsets starting at zero and the bytes they index,
// copying the offsets into *scratch only when they do not start at zero.
func rebase32(scratch *[]int32, offs []int32, vals []byte) ([]int32, []byte) {
	base := offs[0]
	data := vals[base:offs[len(offs)-1]]
	if base == 0 {
		return offs, data
	}
	*scratch = resize(*scratch, len(offs))
	for i, o := range offs {
		(*scratch)[i] = o - base
	}
	return *scratch, data
}

// text64 sets col to the text of an array with int64 offsets, converting
// them to int32 offsets starting at zero.
func (r *reader) text64(st *colState, col *table.Column, n int, d arrow.ArrayData, name string) error {
	col.Form = table.FormText
	offs, data, err := r.offsets64(&st.offs, d, n, name)
	if err != nil {
		return err
	}
	col.Offsets, col.Data = offs, data
	return nil
}

// offsets64 returns the offsets of an array with int64 offsets converted to
// int32 offsets starting at zero (in *scratch), and the bytes they index.
func (r *reader) offsets64(scratch *[]int32, d arrow.ArrayData, n int, name string) ([]int32, []byte, error) {
	if n == 0 {
		return zeroOffset[:], nil, nil
	}
	offs, vals, err := checkedOffsets(r, d, n, name, arrow.Int64Traits.CastFromBytes)
	if err != nil {
		return nil, nil, err
	}
	base, last := offs[0], offs[n]
	if last-base > math.MaxInt32 {
		return nil, nil, fmt.Errorf("%s: column %q: a record batch holds more than 2 GiB of text", r.name, name)
	}
	*scratch = resize(*scratch, n+1)
	out := *scratch
	for i, o := range offs {
		out[i] = int32(o - base)
	}
	return out, vals[base:last], nil
}

// textCopy sets col to text appended row by row by appendRow, refusing more
// than limit bytes.
func (r *reader) textCopy(st *colState, col *table.Column, n int, name string, limit int, appendRow func([]byte, int) []byte) error {
	col.Form = table.FormText
	st.offs = resize(st.offs, n+1)
	st.offs[0] = 0
	data := st.data[:0]
	for i := 0; i < n; i++ {
		data = appendRow(data, i)
		if len(data) > limit {
			if limit == math.MaxInt32 {
				return fmt.Errorf("%s: column %q: a record batch holds more than 2 GiB of text", r.name, name)
			}
			return r.badBuffers(name, fmt.Sprintf("views point at more than %d bytes of text, %d times the bytes of the column (and 1 MiB)", limit, viewTextPerByte))
		}
		st.offs[i+1] = int32(len(data))
	}
	st.data = data
	col.Offsets, col.Data = st.offs, data
	return nil
}

// A view column's rows may share their bytes, so its text can be longer
// than its buffers; viewTextLimit bounds it by viewTextPerByte times the
// column's buffers, plus 1 MiB, and by 2 GiB, so that a few views cannot
// make a batch of gigabytes.
const viewTextPerByte = 64

func viewTextLimit(d arrow.ArrayData) int {
	var size int64
	for _, b := range d.Buffers() {
		if b != nil {
			size += int64(b.Len())
		}
	}
	return int(min(1<<20+viewTextPerByte*size, math.MaxInt32))
}

// timeText sets col to the ISO 8601 text of a date or timestamp array's
// rows (appendRow), empty at the null rows.
func (r *reader) timeText(st *colState, col *table.Column, n int, name string, appendRow func([]byte, int) []byte) error {
	nulls := col.Nulls
	return r.textCopy(st, col, n, name, math.MaxInt32, func(dst []byte, i int) []byte {
		if nulls != nil && nulls[i] {
			return dst
		}
		return appendRow(dst, i)
	})
}

// floorDiv returns a/b rounded down (b > 0).
func floorDiv(a, b int64) int64 {
	q := a / b
	if a%b < 0 {
		q--
	}
	return q
}

func (r *reader) setInts(col *table.Column, v []int64, n int, name string) error {
	if len(v) != n {
		return r.badBuffers(name, "values shorter than the column")
	}
	col.Form = table.FormInt64
	col.Ints = v
	return nil
}

func (r *reader) setFloats(col *table.Column, v []float64, n int, name string) error {
	if len(v) != n {
		return r.badBuffers(name, "values shorter than the column")
	}
	col.Form = table.FormFloat64
	col.Floats = v
	return nil
}

// widen converts integers of any width to int64 in the column's buffer.
func widen[T ~int8 | ~int16 | ~int32 | ~int64 | ~uint8 | ~uint16 | ~uint32 | ~uint64](st *colState, v []T) []int64 {
	st.ints = resize(st.ints, len(v))
	for i, x := range v {
		st.ints[i] = int64(x)
	}
	return st.ints
}

// dictionary sets col to the indices of a dictionary array and its
// dictionary, converting the dictionary only when it changed.
func (r *reader) dictionary(a *array.Dictionary, st *colState, col *table.Column, n int, name string) error {
	dd := a.Data().Dictionary()
	if dd == nil {
		return r.badBuffers(name, "dictionary missing")
	}
	if dd != st.dictData {
		if err := r.loadDict(st, dd, name); err != nil {
			return err
		}
	}
	col.Form = table.FormDict
	col.Dict = &st.dict
	size := int64(st.dict.Len())
	var (
		idx []int32
		bad = -1
	)
	switch ix := a.Indices().(type) {
	case *array.Int32:
		v := ix.Int32Values()
		if len(v) != n {
			return r.badBuffers(name, "indices shorter than the column")
		}
		if col.Nulls == nil {
			bad = checkIndices(v, size)
			idx = v
		} else {
			idx, bad = copyIndices(st, v, col.Nulls, size)
		}
	case *array.Int8:
		idx, bad = copyIndices(st, ix.Int8Values(), col.Nulls, size)
	case *array.Int16:
		idx, bad = copyIndices(st, ix.Int16Values(), col.Nulls, size)
	case *array.Int64:
		idx, bad = copyIndices(st, ix.Int64Values(), col.Nulls, size)
	case *array.Uint8:
		idx, bad = copyIndices(st, ix.Uint8Values(), col.Nulls, size)
	case *array.Uint16:
		idx, bad = copyIndices(st, ix.Uint16Values(), col.Nulls, size)
	case *array.Uint32:
		idx, bad = copyIndices(st, ix.Uint32Values(), col.Nulls, size)
	case *array.Uint64:
		idx, bad = copyIndices(st, ix.Uint64Values(), col.Nulls, size)
	default:
		return fmt.Errorf("%s: column %q: dictionary index type %s is not supported", r.name, name, typeName(a.Indices().DataType()))
	}
	if len(idx) != n {
		return r.badBuffers(name, "indices shorter than the column")
	}
	if bad >= 0 {
		return r.dataErr(bad, name, fmt.Errorf("dictionary index out of range (%d entries): %w", size, table.ErrCorrupt))
	}
	col.Indices = idx
	if st.dictNulls != nil {
		// Rows that point at a null entry are null.
		var nulls []bool
		for i, j := range idx {
			if st.dictNulls[j] && !(col.Nulls != nil && col.Nulls[i]) {
				if nulls == nil {
					nulls = resize(st.nulls, n)
					if col.Nulls == nil {
						clear(nulls)
					}
				}
				nulls[i] = true
			}
		}
		if nulls != nil {
			st.nulls = nulls
			col.Nulls = nulls
		}
	}
	return nil
}

// checkIndices returns the first position whose index is outside
// [0, size), or -1.
func checkIndices(v []int32, size int64) int {
	for i, x := range v {
		if x < 0 || int64(x) >= size {
			return i
		}
	}
	return -1
}

// copyIndices converts indices to int32, setting those of null rows to 0,
// and returns the first position of a non-null row whose index is outside
// [0, size), or -1.
func copyIndices[T ~int8 | ~int16 | ~int32 | ~int64 | ~uint8 | ~uint16 | ~uint32 | ~uint64](st *colState, v []T, nulls []bool, size int64) ([]int32, int) {
	st.idx = resize(st.idx, len(v))
	out := st.idx
	bad := -1
	for i, x := range v {
		if nulls != nil && nulls[i] {
			out[i] = 0
			continue
		}
		// Compare as signed 64-bit: a uint64 above MaxInt64 turns negative.
		if int64(x) < 0 || int64(x) >= size {
			if bad < 0 {
				bad = i
			}
			out[i] = 0
			continue
		}
		out[i] = int32(x)
	}
	return out, bad
}

// loadDict converts a dictionary's entries and gives them a new ID.
func (r *reader) loadDict(st *colState, dd arrow.ArrayData, name string) error {
	n := dd.Len()
	var (
		offs []int32
		data []byte
		err  error
	)
	switch dd.DataType().ID() {
	case arrow.STRING, arrow.BINARY:
		var raw []int32
		var vals []byte
		raw, vals, err = r.offsets32(dd, n, name)
		if err == nil {
			offs, data = rebase32(&st.dictOffs, raw, vals)
		}
	case arrow.LARGE_STRING, arrow.LARGE_BINARY:
		offs, data, err = r.offsets64(&st.dictOffs, dd, n, name)
	default:
		err = fmt.Errorf("%s: column %q: dictionary of %s values is not supported", r.name, name, typeName(dd.DataType()))
	}
	if err != nil {
		return err
	}
	st.dictNulls = nil
	if dd.NullN() > 0 {
		bm := dd.Buffers()[0]
		if bm == nil || bm.Len()*8 < dd.Offset()+n {
			return r.badBuffers(name, "dictionary validity bitmap shorter than the dictionary")
		}
		b := bm.Bytes()
		st.dictNulls = make([]bool, n)
		for i := range st.dictNulls {
			j := dd.Offset() + i
			st.dictNulls[i] = b[j>>3]&(1<<(j&7)) == 0
		}
	}
	if st.dictData != nil {
		st.dictData.Release()
	}
	dd.Retain()
	st.dictData = dd
	r.lastID++
	st.dict = table.Dict{Data: data, Offsets: offs, ID: r.lastID}
	return nil
}

// Close releases the current record, the dictionaries and the file.
func (r *reader) Close() error {
	if r.closed {
		return nil
	}
	r.closed = true
	if r.rec != nil {
		r.rec.Release()
		r.rec = nil
	}
	for i := range r.cols {
		if d := r.cols[i].dictData; d != nil {
			d.Release()
			r.cols[i].dictData = nil
		}
	}
	var err error
	if r.file != nil {
		err = r.file.Close()
	}
	if r.stream != nil {
		r.stream.Release()
	}
	if r.closer != nil {
		if e := r.closer.Close(); err == nil {
			err = e
		}
	}
	if err != nil {
		return fmt.Errorf("close %s: %w", r.name, err)
	}
	return nil
}

// resize returns s with length n, reusing its storage when large enough.
func resize[T any](s []T, n int) []T {
	if cap(s) >= n {
		return s[:n]
	}
	return make([]T, n, n+n/4)
}
