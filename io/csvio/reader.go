package csvio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"

	"manyfold/internal/param"
	"manyfold/io/table"
)

// Options controls how NewReader reads a CSV table.
type Options struct {
	// Delimiter separates fields: ',', ';', '\t' or '|'; 0 means ','.
	Delimiter byte
	// NoHeader says the first record is data; the columns are then named
	// col1, col2, ...
	NoHeader bool
	// Types overrides the inferred kind of the columns it names.
	Types map[string]table.Kind
	// TypesIfPresent sets the kind of the columns it names that the
	// header has, instead of inferring it: the kinds a table was fitted
	// on, say. Unlike Types, a name the header lacks is ignored; Types
	// wins for a column both name.
	TypesIfPresent map[string]table.Kind
	// SampleRows is the number of rows used to infer column kinds; values
	// below 1 mean 10000.
	SampleRows int
	// BatchRows is the number of rows per batch; values below 1 mean 65536.
	BatchRows int
	// MaxFieldBytes bounds the bytes one field may span as written in the
	// file, quotes included; a longer field is an error naming its line
	// and column, found before more of it is read. Values below 1 mean
	// DefaultMaxFieldBytes.
	MaxFieldBytes int
	// OneColumn, when set, is called once the header and the sample have
	// been read, if the header is one column that holds another
	// delimiter (DelimiterGuess): the table reads without error, but was
	// probably meant to have more columns. It gets the input's name, the
	// header and the delimiter guessed.
	OneColumn func(file, header string, guess byte)
}

// Parameters that the reader's messages name: Options.MaxFieldBytes and
// Options.Types.
const (
	ParamMaxFieldBytes param.Name = "max field bytes"
	ParamTypes         param.Name = "types"
)

// ParamDelimiter names Options.Delimiter in messages (the delimiter
// guess, DelimiterHint).
const ParamDelimiter param.Name = "delimiter"

// GuessDelimiter returns the delimiter that a header read as one column
// named header most likely meant: of ';', tab, '|' and ',', the one it
// holds most often (the first of them on a tie), or 0 when it holds none.
// A one-column header cannot hold the delimiter it was read with, so any
// of them it holds is another.
func GuessDelimiter(header string) byte {
	best, most := byte(0), 0
	for _, d := range []byte{';', '\t', '|', ','} {
		if n := strings.Count(header, string(d)); n > most {
			best, most = d, n
		}
	}
	return best
}

// DelimiterHint is the advice for a table whose header is one column
// holding delimiter d: "did you mean delimiter ';'?" (a tab as tab), the
// parameter spelled as the caller spells it.
func DelimiterHint(d byte) param.Text {
	v := "'" + string(d) + "'"
	if d == '\t' {
		v = "tab"
	}
	return param.Textf("did you mean %s %s?", ParamDelimiter, v)
}

// DelimiterGuess returns GuessDelimiter of the header when the table has
// one column (and a header), 0 otherwise: a caller may warn that the table
// read fine as one column but was probably meant to have more.
func (r *Reader) DelimiterGuess() byte { return r.guess }

// DefaultMaxFieldBytes is the longest field a CSV input may hold unless
// Options.MaxFieldBytes says otherwise: 16 MiB.
const DefaultMaxFieldBytes = 16 << 20

const (
	defaultSampleRows = 10000
	defaultBatchRows  = 65536
	// maxSampleBytes bounds the bytes buffered for type inference.
	maxSampleBytes = 64 << 20
	// maxBatchBytes ends a batch early so that int32 offsets cannot overflow.
	maxBatchBytes = 1 << 30
)

// maxRecordBytes bounds the bytes one record may span, so that a stray
// quote cannot make the reader hold the rest of a large file. Tests lower it.
var maxRecordBytes = 512 << 20

// noNul is Reader.nul when no NUL byte is buffered.
const noNul = math.MaxInt

// bufSize is the initial size of the read buffer; tests shrink it to
// exercise records that straddle refills.
var bufSize = 1 << 20

var (
	gzipMagic = []byte{0x1f, 0x8b}
	zstdMagic = []byte{0x28, 0xb5, 0x2f, 0xfd}
	bom       = []byte{0xef, 0xbb, 0xbf}
	nlSep     = []byte{'\n'}
)

// Errors wrapped by header problems; tests tell them apart with errors.Is.
var (
	errEmptyName = errors.New("empty column name")
	errDupName   = errors.New("duplicate column name")
	errBareCR    = errors.New("bare carriage return in the header")
)

// nameError reports a bad header name; it matches its kind with errors.Is.
type nameError struct {
	msg  string
	kind error
}

func (e *nameError) Error() string        { return e.msg }
func (e *nameError) Is(target error) bool { return target == e.kind }

// status is the outcome of parsing one record.
type status uint8

const (
	stRow  status = iota // a record was parsed
	stEOF                // no more records
	stMore               // the record may continue past the buffered bytes
	stErr                // bad data
)

// colBuf accumulates one output column of the current batch. offs and
// nulls are kept long enough for the rows to come (see grow), so that
// values are stored by row index without appending.
type colBuf struct {
	data    []byte
	offs    []int32 // offs[i+1] ends row i
	nulls   []bool
	hasNull bool
}

func (c *colBuf) reset() {
	c.data = c.data[:0]
	if len(c.offs) == 0 {
		c.grow(0)
	}
	c.offs[0] = 0
	c.hasNull = false
}

// grow makes room for row n.
func (c *colBuf) grow(n int) {
	size := 2 * len(c.offs)
	if size < n+2 {
		size = n + 2
	}
	if size < 64 {
		size = 64
	}
	offs := make([]int32, size)
	copy(offs, c.offs)
	c.offs = offs
	nulls := make([]bool, size)
	copy(nulls, c.nulls)
	c.nulls = nulls
}

// put ends row row, whose bytes were appended to data.
func (c *colBuf) put(row int, null bool) {
	c.offs[row+1] = int32(len(c.data))
	c.nulls[row] = null
	if null {
		c.hasNull = true
	}
}

// truncate drops every value after the first rows.
func (c *colBuf) truncate(rows int) { c.data = c.data[:c.offs[rows]] }

func (c *colBuf) value(i int) []byte { return c.data[c.offs[i]:c.offs[i+1]] }

// Reader reads a CSV table as batches of text columns. It implements
// table.Reader.
type Reader struct {
	name     string
	delim    byte
	noHeader bool
	src      io.Reader
	closer   io.Closer
	codec    string // "gzip" or "zstd" when the input is compressed
	readErr  error  // sticky error from src

	buf  []byte
	pos  int // start of the next record
	end  int // end of the buffered bytes
	mark int // when >= 0, bytes from mark on are kept (type sampling)
	eof  bool
	line int64 // line on which the record at pos starts
	// nul is the position in buf of the first NUL byte read, or noNul.
	// Every byte before pos has been parsed, so nul >= pos.
	nul int

	maxField  int // Options.MaxFieldBytes
	maxRecord int // the most bytes a record may span

	// Set by parse on stRow / stMore.
	next       int   // start of the following record
	nextLine   int64 // its line
	recLine    int64 // line on which the parsed record started
	openQuote  int   // on stMore: position of an open quote, or -1
	openField  int
	nf         int // fields in the parsed record
	headerLine int64
	guess      byte // GuessDelimiter of a one-column header, or 0

	fields   []table.Field // the full schema
	ncols    int
	schema   table.Schema // the selected columns
	sel      []int        // file field -> output column, or -1
	cols     []colBuf
	hdr      colBuf
	lines    []int64
	batch    table.Batch
	bcols    []table.Column
	rowsDone int64
	// For EstimateRows: the input's size when it is an uncompressed file
	// (0 otherwise) and the bytes of the rows delivered so far.
	size      int64
	bytesDone int64
	// For InputBytes: the bytes read from the input as stored and its
	// size when it is a regular file.
	input table.InputCount

	batchRows  int
	rowCap     int   // rows every column has room for
	hintRows   int   // rows per batch expected, from the sample
	hintBytes  []int // bytes per batch expected for each file column
	batchBytes int
	started    bool
	err        error // sticky; io.EOF after the last batch
}

// NewReader reads the header of the CSV table in r (plain, gzip or zstd),
// infers the column kinds from the first rows and returns a reader for the
// table. name names the input in errors: the file path, or "stdin". The
// reader does not close r.
func NewReader(r io.Reader, name string, opts Options) (*Reader, error) {
	delim, err := checkDelimiter(opts.Delimiter)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	cr := &Reader{
		name:      name,
		delim:     delim,
		noHeader:  opts.NoHeader,
		mark:      -1,
		openQuote: -1,
		line:      1,
		batchRows: opts.BatchRows,
		nul:       noNul,
		maxField:  opts.MaxFieldBytes,
		maxRecord: maxRecordBytes,
	}
	if cr.maxField < 1 {
		cr.maxField = DefaultMaxFieldBytes
	}
	// A larger field limit than the record limit asked for explicitly
	// raises the record limit with it.
	cr.maxRecord = max(cr.maxRecord, opts.MaxFieldBytes)
	if cr.batchRows < 1 {
		cr.batchRows = defaultBatchRows
	}
	if err := cr.open(r); err != nil {
		return nil, err
	}
	if err := cr.start(opts); err != nil {
		cr.Close()
		return nil, err
	}
	return cr, nil
}

func checkDelimiter(d byte) (byte, error) {
	switch d {
	case 0:
		return ',', nil
	case ',', ';', '\t', '|':
		return d, nil
	}
	return 0, fmt.Errorf("delimiter %q is not supported (use , ; | or tab)", d)
}

// Decompress returns a reader of src's bytes decompressed when they start
// with gzip's or zstd's magic bytes, with the decompressor's closer and the
// codec's name ("gzip", "zstd"), or src itself, a nil closer and "". name
// is the input's name for errors, which wrap table.ErrCorrupt. It reads
// the first four bytes of src. The NDJSON reader reads compressed input
// through it too.
func Decompress(src io.Reader, name string) (io.Reader, io.Closer, string, error) {
	var head [4]byte
	n, err := io.ReadFull(src, head[:])
	if err != nil && err != io.EOF && err != io.ErrUnexpectedEOF {
		return nil, nil, "", &table.DataError{File: name, Err: fmt.Errorf("reading: %w", err)}
	}
	in := io.MultiReader(bytes.NewReader(append([]byte(nil), head[:n]...)), src)
	switch {
	case bytes.HasPrefix(head[:n], gzipMagic):
		zr, err := gzip.NewReader(in)
		if err != nil {
			return nil, nil, "", &table.DataError{File: name, Err: fmt.Errorf("%w (gzip: %v)", table.ErrCorrupt, err)}
		}
		return zr, zr, "gzip", nil
	case bytes.HasPrefix(head[:n], zstdMagic):
		zr, err := zstd.NewReader(in)
		if err != nil {
			return nil, nil, "", &table.DataError{File: name, Err: fmt.Errorf("%w (zstd: %v)", table.ErrCorrupt, err)}
		}
		return zr, zr.IOReadCloser(), "zstd", nil
	}
	return in, nil, "", nil
}

// open recognises compressed input and fills the buffer.
func (r *Reader) open(src io.Reader) error {
	dec, closer, codec, err := Decompress(r.input.Count(src), r.name)
	if err != nil {
		return err
	}
	r.src, r.closer, r.codec = dec, closer, codec
	if codec == "" {
		_, r.size = r.input.InputBytes()
	}
	size := bufSize
	if size < 8 {
		size = 8
	}
	r.buf = make([]byte, size)
	return r.refill()
}

// start drops a byte order mark, reads the header, samples the first rows
// and sets up the schema.
func (r *Reader) start(opts Options) error {
	if bytes.HasPrefix(r.buf[:r.end], bom) {
		r.pos = len(bom)
	}
	for !hasNonSpace(r.buf[r.pos:r.end]) {
		if r.eof {
			return &table.DataError{File: r.name, Err: table.ErrEmpty}
		}
		if err := r.more(); err != nil {
			return err
		}
	}
	for {
		r.hdr.reset()
		st, err := r.parse(headerRecord, 0)
		if st == stMore {
			if err := r.more(); err != nil {
				return err
			}
			continue
		}
		if st == stEOF {
			return &table.DataError{File: r.name, Err: table.ErrEmpty}
		}
		if st == stErr {
			return err
		}
		break
	}
	r.headerLine = r.recLine
	n := r.nf
	if n == 1 && !r.noHeader {
		r.guess = GuessDelimiter(string(r.hdr.value(0)))
	}
	if !r.noHeader {
		if err := r.checkBareCR(n); err != nil {
			return err
		}
	}
	r.fields = make([]table.Field, n)
	for i := range r.fields {
		r.fields[i].Nullable = true
		if r.noHeader {
			r.fields[i].Name = "col" + strconv.Itoa(i+1)
		} else {
			r.fields[i].Name = string(r.hdr.value(i))
		}
	}
	if !r.noHeader {
		if err := r.checkNames(); err != nil {
			return err
		}
		r.pos, r.line = r.next, r.nextLine
	}
	r.ncols = n
	full := &table.Schema{Fields: r.fields}
	overridden := make([]bool, n)
	names := make([]string, 0, len(opts.Types))
	for name := range opts.Types {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		k := opts.Types[name]
		i := full.Index(name)
		if i < 0 {
			return &table.DataError{File: r.name, Column: name, Err: ErrTypeColumn}
		}
		if k > table.Bool {
			return &table.DataError{File: r.name, Column: name, Err: fmt.Errorf("unknown kind %v", k)}
		}
		r.fields[i].Kind = k
		overridden[i] = true
	}
	for name, k := range opts.TypesIfPresent {
		if i := full.Index(name); i >= 0 && !overridden[i] && k <= table.Bool {
			r.fields[i].Kind = k
			overridden[i] = true
		}
	}
	all := make([]int, n)
	for i := range all {
		all[i] = i
	}
	r.selectCols(all)
	sample := opts.SampleRows
	if sample < 1 {
		sample = defaultSampleRows
	}
	r.infer(sample, overridden)
	if r.guess != 0 && opts.OneColumn != nil {
		opts.OneColumn(r.name, r.fields[0].Name, r.guess)
	}
	return nil
}

func hasNonSpace(b []byte) bool {
	for _, c := range b {
		switch c {
		case ' ', '\t', '\r', '\n':
		default:
			return true
		}
	}
	return false
}

// checkBareCR rejects a header field holding a CR that no LF follows: the
// sign of a file whose lines end in CR alone (old Mac text files), read as
// one long header.
func (r *Reader) checkBareCR(n int) error {
	for i := 0; i < n; i++ {
		v := r.hdr.value(i)
		for j := bytes.IndexByte(v, '\r'); j >= 0; j = indexFrom(v, j+1, '\r') {
			if j+1 == len(v) || v[j+1] != '\n' {
				return &table.DataError{File: r.name, Line: r.headerLine, Err: r.bareCRErr(i)}
			}
		}
	}
	return nil
}

// bareCRErr is the error of a bare CR in header field fi.
func (r *Reader) bareCRErr(fi int) error {
	return &nameError{fmt.Sprintf("header field %d holds a carriage return (CR) that no line feed (LF) follows: "+
		"the lines seem to end in CR alone (old Mac text), which is not read; convert the line ends to LF or CRLF", fi+1), errBareCR}
}

// indexFrom returns the position of the first c in v at or after i, or -1.
func indexFrom(v []byte, i int, c byte) int {
	if j := bytes.IndexByte(v[i:], c); j >= 0 {
		return i + j
	}
	return -1
}

// checkNames rejects empty and repeated header names.
func (r *Reader) checkNames() error {
	seen := make(map[string]int, len(r.fields))
	for i, f := range r.fields {
		if strings.TrimSpace(f.Name) == "" {
			return &table.DataError{File: r.name, Line: r.headerLine,
				Err: &nameError{fmt.Sprintf("header column %d has an empty name", i+1), errEmptyName}}
		}
		if j, ok := seen[f.Name]; ok {
			return &table.DataError{File: r.name, Line: r.headerLine, Column: f.Name,
				Err: &nameError{fmt.Sprintf("named twice in the header, columns %d and %d", j+1, i+1), errDupName}}
		}
		seen[f.Name] = i
	}
	return nil
}

// infer parses up to n rows, sets the kinds of the columns not overridden
// and rewinds so that the rows are delivered again by Next. A parse error
// ends the sample early; Next reports it when it gets there.
func (r *Reader) infer(n int, overridden []bool) {
	todo := false
	for _, o := range overridden {
		todo = todo || !o
	}
	if !todo {
		return
	}
	r.mark = r.pos
	markLine := r.line
	rows := 0
	atEnd := false
	for rows < n && r.pos-r.mark < maxSampleBytes {
		if rows+2 > r.rowCap {
			r.growRows(rows)
		}
		st, _ := r.parse(dataRecord, rows)
		if st == stRow {
			rows++
			r.pos, r.line = r.next, r.nextLine
			continue
		}
		r.rollback(rows)
		if st == stMore && r.more() == nil {
			continue
		}
		atEnd = st == stEOF
		break
	}
	for i := range r.fields {
		if !overridden[i] {
			r.fields[i].Kind = inferKind(&r.cols[i], rows)
		}
	}
	r.pos, r.line, r.mark = r.mark, markLine, -1
	// Size the batch buffers from the sample, so that the first batch
	// does not grow them step by step.
	if rows > 0 {
		r.hintRows = min(r.batchRows, 1<<20)
		if atEnd {
			r.hintRows = min(r.hintRows, rows)
		}
		r.hintBytes = make([]int, len(r.cols))
		for i := range r.cols {
			per := float64(len(r.cols[i].data)) / float64(rows)
			r.hintBytes[i] = min(int(per*float64(r.hintRows)*1.125)+64, 256<<20)
		}
	}
	all := make([]int, r.ncols)
	for i := range all {
		all[i] = i
	}
	r.selectCols(all)
}

// Schema returns the columns, restricted by Select if it was called.
func (r *Reader) Schema() *table.Schema { return &r.schema }

// Select restricts the schema and every later batch to the columns at the
// given positions of the full schema, in that order. Only the bytes of the
// selected fields are copied. It must be called before the first Next and
// a position may appear only once.
func (r *Reader) Select(cols []int) error {
	if r.started {
		return fmt.Errorf("%s: Select called after Next", r.name)
	}
	seen := make([]bool, r.ncols)
	for _, c := range cols {
		if c < 0 || c >= r.ncols {
			return fmt.Errorf("%s: column position %d out of range (the table has %d columns)", r.name, c, r.ncols)
		}
		if seen[c] {
			return fmt.Errorf("%s: column %q selected twice", r.name, r.fields[c].Name)
		}
		seen[c] = true
	}
	r.selectCols(cols)
	return nil
}

func (r *Reader) selectCols(cols []int) {
	if cap(r.sel) < r.ncols {
		r.sel = make([]int, r.ncols)
	}
	r.sel = r.sel[:r.ncols]
	for i := range r.sel {
		r.sel[i] = -1
	}
	r.schema.Fields = make([]table.Field, len(cols))
	r.cols = make([]colBuf, len(cols))
	r.rowCap = 0
	for k, c := range cols {
		r.sel[c] = k
		r.schema.Fields[k] = r.fields[c]
		if r.hintBytes != nil {
			r.cols[k].data = make([]byte, 0, r.hintBytes[c])
			r.cols[k].grow(r.hintRows)
			r.rowCap = len(r.cols[k].offs) - 1
		}
		r.cols[k].reset()
	}
}

// Next returns the next batch of rows, or io.EOF after the last one. When
// bad data is met, the rows before it are returned first and the error
// (a *table.DataError) comes with the following call.
func (r *Reader) Next() (*table.Batch, error) {
	r.started = true
	if r.err != nil {
		return nil, r.err
	}
	for i := range r.cols {
		r.cols[i].reset()
	}
	r.lines = r.lines[:0]
	r.batchBytes = 0
	rows := 0
	for rows < r.batchRows && r.batchBytes < maxBatchBytes {
		if rows+2 > r.rowCap {
			r.growRows(rows)
		}
		st, err := r.parse(dataRecord, rows)
		if st == stRow {
			r.lines = append(r.lines, r.recLine)
			r.batchBytes += r.next - r.pos
			r.pos, r.line = r.next, r.nextLine
			rows++
			continue
		}
		r.rollback(rows)
		if st == stMore {
			if err := r.more(); err != nil {
				r.err = err
				break
			}
			continue
		}
		if st == stEOF {
			r.err = io.EOF
		} else {
			r.err = err
		}
		break
	}
	if rows == 0 {
		return nil, r.err
	}
	if bad, err := r.check(rows); err != nil {
		// Deliver the rows before the bad value; the error comes next.
		r.err = err
		if rows = bad; rows == 0 {
			return nil, r.err
		}
	}
	b := &r.batch
	b.Rows = rows
	b.FirstRow = r.rowsDone + 1
	r.rowsDone += int64(rows)
	r.bytesDone += int64(r.batchBytes)
	b.Lines = r.lines[:rows]
	r.bcols = r.bcols[:0]
	for i := range r.cols {
		c := &r.cols[i]
		col := table.Column{Form: table.FormText, Data: c.data, Offsets: c.offs[:rows+1]}
		if c.hasNull {
			col.Nulls = c.nulls[:rows]
		}
		r.bcols = append(r.bcols, col)
	}
	b.Cols = r.bcols
	return b, nil
}

// check verifies that every value of the batch's int, float and bool
// columns reads as its kind, as the writers will parse it (an int may be
// written with leading zeros or as a number with no fraction, a float as
// table.ParseFloat reads it, a bool as strconv.ParseBool does), so that a
// value that does not is reported here, whatever the output format. It
// returns the first bad row's index and its error.
func (r *Reader) check(rows int) (int, error) {
	bad := rows
	var first error
	for k := range r.cols {
		kind := r.schema.Fields[k].Kind
		if kind == table.String {
			continue
		}
		c := &r.cols[k]
		for i := 0; i < bad; i++ {
			if c.nulls[i] {
				continue
			}
			v := c.value(i)
			if err := checkValue(kind, v); err != nil {
				bad = i
				first = &table.DataError{File: r.name, Line: r.lines[i], Row: r.rowsDone + int64(i) + 1, Column: r.schema.Fields[k].Name,
					Err: &KindError{Value: string(v), Want: kind, Is: valueKind(v), Err: err}}
				break
			}
		}
	}
	return bad, first
}

// KindError is the error, inside a *table.DataError that names the line
// and the column, of a value that does not read as its column's kind. It
// reads as the parser's error.
type KindError struct {
	Value string     // the value as written
	Want  table.Kind // the column's kind
	Is    table.Kind // the kind the value alone would be inferred as
	Err   error      // the parser's error
}

// Error returns the parser's message, such as "x" is not an integer.
func (e *KindError) Error() string { return e.Err.Error() }

// Unwrap returns the parser's error.
func (e *KindError) Unwrap() error { return e.Err }

// CheckValue returns the error of a value v that does not read as kind
// (nil for table.String) as the writers parse it, and that NewReader's
// batches report as a *KindError: the quick forms of inference first, then
// the parsers the writers use.
func CheckValue(kind table.Kind, v []byte) error { return checkValue(kind, v) }

// ValueKind returns the kind the value v alone would be inferred as (the
// KindError's Is).
func ValueKind(v []byte) table.Kind { return valueKind(v) }

// checkValue is CheckValue.
func checkValue(kind table.Kind, v []byte) error {
	switch kind {
	case table.Int64:
		if intText(v) {
			return nil
		}
		_, err := table.ParseInt(v)
		return err
	case table.Float64:
		if floatText(v) {
			return nil
		}
		if _, err := table.ParseFloat(v); err != nil {
			return err
		}
	case table.Bool:
		_, err := table.ParseBool(v)
		return err
	}
	return nil
}

// EstimateRows estimates the table's rows from the input's size and the
// bytes per row so far, or returns 0 when it cannot (compressed input,
// standard input, no row read yet). It is an estimate: callers may size
// tables by it, never rely on it.
func (r *Reader) EstimateRows() int64 {
	if r.size <= 0 || r.rowsDone == 0 || r.bytesDone == 0 {
		return 0
	}
	return int64(float64(r.size) * float64(r.rowsDone) / float64(r.bytesDone))
}

// InputBytes returns the bytes read from the input so far, as stored
// (compressed bytes for compressed input), and the input's size when it is
// a regular file (0 otherwise); see table.InputCounter. Safe to call while
// another goroutine reads.
func (r *Reader) InputBytes() (read, size int64) { return r.input.InputBytes() }

// Close releases the decompressor, if any. It does not close the
// io.Reader given to NewReader.
func (r *Reader) Close() error {
	if r.err == nil || r.err == io.EOF {
		r.err = fmt.Errorf("%s: reader is closed", r.name)
	}
	if r.closer != nil {
		c := r.closer
		r.closer = nil
		return c.Close()
	}
	return nil
}

// growRows makes room in every column for row n.
func (r *Reader) growRows(n int) {
	for i := range r.cols {
		r.cols[i].grow(n)
	}
	if len(r.cols) > 0 {
		r.rowCap = len(r.cols[0].offs) - 1
	} else {
		r.rowCap = n + 1<<16
	}
}

// rollback drops the values of a partly parsed record.
func (r *Reader) rollback(rows int) {
	for i := range r.cols {
		r.cols[i].truncate(rows)
	}
}

// more makes room and reads more input after parse returned stMore.
func (r *Reader) more() error {
	if r.end-r.pos > r.maxRecord {
		if r.openQuote >= 0 {
			return r.dataErr(dataRecord, r.openField, r.pos, r.line, r.openQuote,
				"quote opened here is not closed within "+sizeText(r.maxRecord), false)
		}
		return &table.DataError{File: r.name, Line: r.line,
			Err: errors.New("record longer than " + sizeText(r.maxRecord))}
	}
	return r.refill()
}

// sizeText gives n bytes in MiB when that is exact.
func sizeText(n int) string {
	if n%(1<<20) == 0 {
		return strconv.Itoa(n>>20) + " MiB"
	}
	return strconv.Itoa(n) + " bytes"
}

// refill moves the unconsumed bytes to the front of the buffer, grows it
// when full, and reads until it is full or the input ends.
func (r *Reader) refill() error {
	if r.readErr != nil {
		return r.readErr
	}
	if r.eof {
		return nil
	}
	keep := r.pos
	if r.mark >= 0 && r.mark < keep {
		keep = r.mark
	}
	if keep > 0 {
		r.end = copy(r.buf, r.buf[keep:r.end])
		r.pos -= keep
		if r.mark >= 0 {
			r.mark -= keep
		}
		if r.openQuote >= 0 {
			r.openQuote -= keep
		}
		if r.nul != noNul {
			r.nul -= keep
		}
	}
	if r.end == len(r.buf) {
		nb := make([]byte, 2*len(r.buf))
		copy(nb, r.buf[:r.end])
		r.buf = nb
	}
	from := r.end
	err := r.fill()
	if r.nul == noNul {
		if i := bytes.IndexByte(r.buf[from:r.end], 0); i >= 0 {
			r.nul = from + i
		}
	}
	return err
}

// fill reads until the buffer is full or the input ends.
func (r *Reader) fill() error {
	empty := 0
	for r.end < len(r.buf) {
		n, err := r.src.Read(r.buf[r.end:])
		r.end += n
		if err == io.EOF {
			r.eof = true
			return nil
		}
		if err != nil {
			if r.codec != "" {
				err = fmt.Errorf("%w (%s: %v)", table.ErrCorrupt, r.codec, err)
			} else {
				err = fmt.Errorf("reading: %w", err)
			}
			r.readErr = &table.DataError{File: r.name, Line: r.line, Err: err}
			return r.readErr
		}
		if n == 0 {
			if empty++; empty > 100 {
				r.readErr = &table.DataError{File: r.name, Err: io.ErrNoProgress}
				return r.readErr
			}
		}
	}
	return nil
}

// lineEnd returns the position of the first LF at or after p, or the end
// of the buffer.
func lineEnd(buf []byte, p int) int {
	if i := bytes.IndexByte(buf[p:], '\n'); i >= 0 {
		return p + i
	}
	return len(buf)
}

// record says which record parse reads, which decides where its fields go
// and how its errors read.
type record uint8

const (
	// dataRecord is a row of the table: the selected fields are appended
	// to the batch's columns, and the record must have the header's field
	// count.
	dataRecord record = iota
	// headerRecord is the first record: every field goes to r.hdr, and an
	// error names the header field (or, without a header, colN).
	headerRecord
)

// parse parses the record at r.pos, first consuming blank lines (in a
// one-column table a blank line is a record). On stRow the record's values
// have been appended to the selected columns (for the header record, every
// field to r.hdr) and r.next, r.nextLine and r.recLine are set; the caller
// commits them. On stMore or stErr the caller rolls back the columns.
func (r *Reader) parse(rec record, row int) (status, error) {
	buf := r.buf[:r.end]
	d := r.delim
	p := r.pos
	r.openQuote = -1
	if rec == headerRecord || r.ncols != 1 {
		for p < len(buf) {
			c := buf[p]
			if c == '\n' {
				p++
				r.line++
				continue
			}
			if c != '\r' {
				break
			}
			if p+1 < len(buf) {
				if buf[p+1] != '\n' {
					break
				}
				p += 2
				r.line++
				continue
			}
			if !r.eof {
				break
			}
			p++ // a lone CR ends the input
		}
		r.pos = p
	}
	if p >= len(buf) {
		if r.eof {
			return stEOF, nil
		}
		return stMore, nil
	}
	line := r.line
	rs := p
	// le is the end of the current line. When the buffer holds no LF and
	// the input goes on, it is the end of the buffer, and the record is
	// parsed as far as it goes so that an open quote can be reported.
	le := lineEnd(buf, p)
	qp := p + indexOrLen(buf[p:le], '"')
	extra := 0 // LFs inside quoted fields
	fi := 0
	for {
		var c *colBuf
		if rec == headerRecord {
			c = &r.hdr
			if row = fi; fi+2 > len(c.offs) {
				c.grow(fi)
			}
		} else if fi < len(r.sel) {
			if o := r.sel[fi]; o >= 0 {
				c = &r.cols[o]
			}
		}
		if qp != p || p >= le {
			// Unquoted field.
			j := bytes.IndexByte(buf[p:le], d)
			fe := le
			if j >= 0 {
				fe = p + j
			}
			if r.nul < fe || fe-p > r.maxField {
				if err := r.fieldErr(rec, fi, rs, line, p, fe, j < 0); err != nil {
					return stErr, err
				}
			}
			if qp < fe {
				return stErr, r.dataErr(rec, fi, rs, line, qp,
					"\" inside an unquoted field (quote the whole field and double the \")", true)
			}
			if c != nil {
				v := buf[p:fe]
				if j < 0 && len(v) > 0 && v[len(v)-1] == '\r' {
					v = v[:len(v)-1]
				}
				if n := len(c.data); len(v) <= 16 && cap(c.data)-n >= 16 && p+16 <= len(r.buf) {
					// Short value: copy 16 bytes in two words (the bytes past
					// the value are overwritten later), avoiding a memmove call.
					src, dst := r.buf[p:p+16], c.data[n:n+16]
					binary.LittleEndian.PutUint64(dst, binary.LittleEndian.Uint64(src))
					binary.LittleEndian.PutUint64(dst[8:], binary.LittleEndian.Uint64(src[8:]))
					c.data = c.data[:n+len(v)]
				} else {
					c.data = append(c.data, v...)
				}
				c.put(row, len(v) == 0)
			}
			if j < 0 {
				if le == len(buf) && !r.eof {
					return stMore, nil
				}
				next := le
				if le < len(buf) {
					next++
				}
				return r.endRecord(rec, fi, line, extra, next)
			}
			p = fe + 1
			fi++
			continue
		}
		// Quoted field: qp == p is its opening quote.
		q := p
		s := p + 1
		for {
			i := bytes.IndexByte(buf[s:], '"')
			if i < 0 {
				if r.nul < len(buf) || len(buf)-q > r.maxField {
					if err := r.fieldErr(rec, fi, rs, line, q, len(buf), false); err != nil {
						return stErr, err
					}
				}
				if !r.eof {
					r.openQuote, r.openField = q, fi
					return stMore, nil
				}
				return stErr, r.dataErr(rec, fi, rs, line, q, "quote opened here is never closed", false)
			}
			e := s + i
			if r.nul < e || e+1-q > r.maxField {
				if err := r.fieldErr(rec, fi, rs, line, q, e+1, false); err != nil {
					return stErr, err
				}
			}
			if c != nil {
				c.data = append(c.data, buf[s:e]...)
			}
			if e > le {
				extra += bytes.Count(buf[s:e], nlSep)
			}
			n := e + 1
			if n >= len(buf) {
				if !r.eof {
					r.openQuote, r.openField = q, fi
					return stMore, nil
				}
				if c != nil {
					c.put(row, false)
				}
				return r.endRecord(rec, fi, line, extra, n)
			}
			b := buf[n]
			if b == '"' {
				if c != nil {
					c.data = append(c.data, '"')
				}
				s = n + 1
				continue
			}
			if b == d {
				p = n + 1
				break
			}
			if b == '\n' {
				if c != nil {
					c.put(row, false)
				}
				return r.endRecord(rec, fi, line, extra, n+1)
			}
			if b == '\r' {
				if n+1 < len(buf) && buf[n+1] == '\n' {
					if c != nil {
						c.put(row, false)
					}
					return r.endRecord(rec, fi, line, extra, n+2)
				}
				if n+1 == len(buf) {
					if !r.eof {
						r.openQuote, r.openField = -1, fi
						return stMore, nil
					}
					if c != nil {
						c.put(row, false)
					}
					return r.endRecord(rec, fi, line, extra, n+1)
				}
				if rec == headerRecord && !r.noHeader {
					at := line + int64(bytes.Count(buf[rs:n], nlSep))
					return stErr, &table.DataError{File: r.name, Line: at, Err: r.bareCRErr(fi)}
				}
			}
			return stErr, r.dataErr(rec, fi, rs, line, n,
				"unexpected "+showByte(b)+" after a closing quote (a quoted field must end at a delimiter or line end)", true)
		}
		if c != nil {
			c.put(row, false)
		}
		fi++
		if p > le {
			le = lineEnd(buf, p)
		}
		qp = p + indexOrLen(buf[p:le], '"')
	}
}

// fieldErr returns the error of a field that starts at fs and spans the
// bytes up to fe (or more) when it holds a NUL byte or is longer than the
// limit, and nil otherwise. crlf says that a CR ending the field is a line
// end's and does not count.
func (r *Reader) fieldErr(rec record, fi, rs int, line int64, fs, fe int, crlf bool) error {
	if r.nul < fe {
		return r.dataErr(rec, fi, rs, line, r.nul, "NUL byte (0x00): the file looks binary, not CSV text", true)
	}
	n := fe - fs
	if crlf && n > 0 && r.buf[fe-1] == '\r' {
		n--
	}
	if n > r.maxField {
		err := r.dataErr(rec, fi, rs, line, fs, "field longer than "+sizeText(r.maxField), true)
		if de, ok := err.(*table.DataError); ok {
			de.Err = &limitError{param.Errorf("%v (the limit; raise it with %s)", de.Err, ParamMaxFieldBytes)}
		}
		return err
	}
	return nil
}

// errFieldSize is matched (errors.Is) by the error of a field longer than
// Options.MaxFieldBytes.
var errFieldSize = errors.New("field longer than the limit")

// limitError is the error of a field longer than the limit.
type limitError struct{ err error }

func (e *limitError) Error() string        { return e.err.Error() }
func (e *limitError) Unwrap() error        { return e.err }
func (e *limitError) Is(target error) bool { return target == errFieldSize }

func indexOrLen(b []byte, c byte) int {
	if i := bytes.IndexByte(b, c); i >= 0 {
		return i
	}
	return len(b)
}

// endRecord checks the field count of a record whose last field has index
// fi and records where the next record starts.
func (r *Reader) endRecord(rec record, fi int, line int64, extra, next int) (status, error) {
	if nf := fi + 1; rec == dataRecord && nf != r.ncols {
		what := "header has"
		if r.noHeader {
			what = "first row has"
		}
		var err error = fmt.Errorf("%d fields, %s %d", nf, what, r.ncols)
		if r.guess != 0 {
			err = param.Errorf("%v (the header is one column, %q: %s)", err, r.fields[0].Name, DelimiterHint(r.guess))
		}
		return stErr, &table.DataError{File: r.name, Line: line, Row: r.rowsDone + int64(len(r.lines)) + 1, Err: err}
	}
	r.next = next
	r.nf = fi + 1
	r.recLine = line
	r.nextLine = line + 1 + int64(extra)
	return stRow, nil
}

// dataErr builds the error for bad bytes at position at of the record that
// starts at rs on line line, in field fi.
func (r *Reader) dataErr(rec record, fi, rs int, line int64, at int, msg string, withByte bool) error {
	seg := r.buf[rs:at]
	line += int64(bytes.Count(seg, nlSep))
	if withByte {
		col := at - (bytes.LastIndexByte(seg, '\n') + 1 + rs) + 1
		msg = "byte " + strconv.Itoa(col) + ": " + msg
	}
	e := &table.DataError{File: r.name, Line: line, Err: errors.New(msg)}
	switch {
	case rec == headerRecord && !r.noHeader:
		e.Err = fmt.Errorf("header field %d: %s", fi+1, msg)
	case rec == headerRecord:
		e.Column = "col" + strconv.Itoa(fi+1)
	case fi >= r.ncols:
		e.Err = fmt.Errorf("field %d: %s", fi+1, msg)
	default:
		e.Column = r.fields[fi].Name
	}
	if rec == dataRecord {
		e.Row = r.rowsDone + int64(len(r.lines)) + 1
	}
	return e
}

// showByte shows b for an error message: 'x' when printable ASCII, else
// in hex.
func showByte(b byte) string {
	if b >= 0x20 && b < 0x7f {
		return "'" + string(rune(b)) + "'"
	}
	return fmt.Sprintf("byte 0x%02x", b)
}
