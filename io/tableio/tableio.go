// Package tableio opens tables for reading and creates them for writing,
// choosing CSV, NDJSON (read only), Parquet or Arrow IPC from the file's
// content and name (reading; CSV and NDJSON may be compressed with gzip or
// zstd) or its extension (writing).
package tableio

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"github.com/klauspost/compress/zstd"

	"manyfold/internal/param"
	"manyfold/io/arrowio"
	"manyfold/io/atomicfile"
	"manyfold/io/csvio"
	"manyfold/io/dataset"
	"manyfold/io/ndjson"
	"manyfold/io/pqio"
	"manyfold/io/table"
)

// Format is a table file format.
type Format string

// The formats manyfold reads and writes.
const (
	CSV     Format = "csv"
	Parquet Format = "parquet"
	Arrow   Format = "arrow"
	// NDJSON is newline-delimited JSON, one object a line (input only;
	// see io/ndjson).
	NDJSON Format = "ndjson"
)

// ReadOptions configures how a table is read. The CSV options apply to CSV
// input only; a CSV.Delimiter of 0 means the one the file's extension
// implies (DelimiterOf: a tab for .tsv, otherwise a comma). NDJSON input
// takes its types, sample, batch size and line limit (MaxFieldBytes) from
// the CSV options too.
type ReadOptions struct {
	CSV csvio.Options
}

// Detect reads the first bytes of r and names the format: Parquet for the
// magic "PAR1", Arrow for "ARROW1" (file) or an IPC stream's continuation
// marker, NDJSON for text whose first byte other than white space (and a
// UTF-8 byte order mark) is {, CSV otherwise (including gzip or zstd
// compressed text, which the CSV reader unpacks). An empty input gives
// table.ErrEmpty.
func Detect(head []byte) (Format, error) {
	switch {
	case len(head) == 0:
		return "", table.ErrEmpty
	case bytes.HasPrefix(head, []byte("PAR1")):
		return Parquet, nil
	case bytes.HasPrefix(head, []byte("ARROW1")):
		return Arrow, nil
	case bytes.HasPrefix(head, []byte{0xff, 0xff, 0xff, 0xff}):
		return Arrow, nil
	}
	if looksBinary(head) {
		return "", table.ErrUnknownFormat
	}
	if t := bytes.TrimLeft(bytes.TrimPrefix(head, []byte("\xef\xbb\xbf")), " \t\r\n"); len(t) > 0 && t[0] == '{' {
		return NDJSON, nil
	}
	return CSV, nil
}

// isNDJSON reports whether path's extension says newline-delimited JSON:
// .ndjson or .jsonl.
func isNDJSON(path string) bool {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".ndjson", ".jsonl":
		return true
	}
	return false
}

// openNDJSON reads newline-delimited JSON from r with the CSV options
// that apply to it.
func openNDJSON(r io.Reader, name string, o csvio.Options) (*ndjson.Reader, error) {
	return ndjson.NewReader(r, name, ndjson.Options{Types: o.Types, TypesIfPresent: o.TypesIfPresent,
		SampleRows: o.SampleRows, BatchRows: o.BatchRows, MaxLineBytes: o.MaxFieldBytes})
}

// looksBinary reports whether head holds bytes that text never does: a NUL,
// or other control bytes, outside gzip and zstd headers.
func looksBinary(head []byte) bool {
	if compressed(head) {
		return false
	}
	n := len(head)
	if n > 512 {
		n = 512
	}
	for _, c := range head[:n] {
		if c == 0 || (c < 0x20 && c != '\t' && c != '\n' && c != '\r' && c != '\f') {
			return true
		}
	}
	return false
}

// Errors of Open for inputs that cannot be read as a table; both wrap
// table.ErrUnknownFormat, so that they are classed with the unreadable
// inputs.
var (
	ErrParquetStdin = &inputError{"Parquet cannot be read from standard input (it is read from its end); give a file"}
	ErrDirectory    = &inputError{"is a directory, not a table file"}
)

type inputError struct{ msg string }

func (e *inputError) Error() string { return e.msg }
func (e *inputError) Unwrap() error { return table.ErrUnknownFormat }

// Open opens the table at path ("-" for standard input, read as CSV,
// NDJSON or an Arrow IPC stream). A directory, or a glob pattern that names
// no file, is a dataset: its files read as one table (see package
// dataset), each opened as a file is here. A file named .ndjson or .jsonl is read as
// NDJSON unless its bytes say Parquet or Arrow.
func Open(path string, opts ReadOptions) (table.Reader, error) {
	name := path
	if path == "-" {
		name = "stdin"
		br := bufio.NewReaderSize(os.Stdin, 1<<16)
		head, _ := br.Peek(512)
		f, err := Detect(head)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		if f == CSV && compressed(head) && compressedNDJSON(head) {
			return openCompressedNDJSON(br, nil, name, opts.CSV)
		}
		switch f {
		case CSV:
			return csvio.NewReader(br, name, opts.CSV)
		case NDJSON:
			return openNDJSON(br, name, opts.CSV)
		case Arrow:
			return arrowio.NewReader(br, name)
		}
		return nil, fmt.Errorf("%s: %w", name, ErrParquetStdin)
	}
	if dataset.Is(path) {
		files, err := dataset.List(path)
		if err != nil {
			return nil, err
		}
		return dataset.New(files, func(p string) (table.Reader, error) {
			if dataset.Is(p) { // a file that is a pattern, or a race
				return nil, fmt.Errorf("%s: %w", p, ErrDirectory)
			}
			return Open(p, opts)
		})
	}
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	if fi, err := fh.Stat(); err == nil && fi.IsDir() {
		fh.Close()
		return nil, fmt.Errorf("%s: %w", path, ErrDirectory)
	}
	head := make([]byte, 512)
	n, err := io.ReadFull(fh, head)
	if err != nil && !errors.Is(err, io.ErrUnexpectedEOF) && !errors.Is(err, io.EOF) {
		fh.Close()
		return nil, fmt.Errorf("read %s: %w", path, err)
	}
	format, err := Detect(head[:n])
	if err != nil {
		fh.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	switch format {
	case Parquet:
		fh.Close()
		return pqio.Open(path)
	case Arrow:
		fh.Close()
		return arrowio.Open(path)
	}
	if _, err := fh.Seek(0, io.SeekStart); err != nil {
		fh.Close()
		return nil, fmt.Errorf("read %s: %w", path, err)
	}
	if base, _ := splitCompression(path); format == CSV && compressed(head[:n]) && (compressedNDJSON(head[:n]) || isNDJSON(base)) {
		return openCompressedNDJSON(fh, fh, path, opts.CSV)
	}
	if format == NDJSON || isNDJSON(path) {
		c := &closeBoth{f: fh, count: new(table.InputCount)}
		r, err := openNDJSON(c.count.Count(fh), path, opts.CSV)
		if err != nil {
			fh.Close()
			return nil, err
		}
		c.Reader = r
		return c, nil
	}
	co := opts.CSV
	if co.Delimiter == 0 {
		co.Delimiter = DelimiterOf(path)
	}
	r, err := csvio.NewReader(fh, path, co)
	if err != nil {
		fh.Close()
		return nil, err
	}
	return &closeBoth{Reader: r, f: fh}, nil
}

// IsParquet reports whether the file at path starts with Parquet's magic
// bytes.
func IsParquet(path string) bool {
	f, err := os.Open(path)
	if err != nil {
		return false
	}
	defer f.Close()
	head := make([]byte, 4)
	if _, err := io.ReadFull(f, head); err != nil {
		return false
	}
	format, err := Detect(head)
	return err == nil && format == Parquet
}

// compressed reports whether head starts with gzip's or zstd's magic
// bytes.
func compressed(head []byte) bool {
	return bytes.HasPrefix(head, []byte{0x1f, 0x8b}) || bytes.HasPrefix(head, []byte{0x28, 0xb5, 0x2f, 0xfd})
}

// compressedNDJSON reports whether head, the first bytes of a compressed
// input, decompress to bytes that begin as NDJSON does.
func compressedNDJSON(head []byte) bool {
	dec, closer, _, err := csvio.Decompress(bytes.NewReader(head), "")
	if err != nil {
		return false
	}
	defer closer.Close()
	buf := make([]byte, 512)
	n, _ := io.ReadFull(dec, buf)
	f, err := Detect(buf[:n])
	return err == nil && f == NDJSON
}

// openCompressedNDJSON reads the compressed NDJSON in src (at its start)
// through its decompressor; f, when not nil, is the file to close with it,
// and is closed on an error.
func openCompressedNDJSON(src io.Reader, f *os.File, name string, o csvio.Options) (table.Reader, error) {
	fail := func(err error) (table.Reader, error) {
		if f != nil {
			f.Close()
		}
		return nil, err
	}
	count := new(table.InputCount)
	dec, closer, _, err := csvio.Decompress(count.Count(src), name)
	if err != nil {
		return fail(err)
	}
	r, err := openNDJSON(dec, name, o)
	if err != nil {
		closer.Close()
		return fail(err)
	}
	c := &closeBoth{Reader: r, dec: closer, count: count}
	if f != nil {
		c.f = f
	}
	return c, nil
}

// closeBoth closes the file (and the decompressor) under a reader.
type closeBoth struct {
	table.Reader
	f     io.Closer
	dec   io.Closer         // nil when none
	count *table.InputCount // the file's bytes read, when the reader does not count them (NDJSON)
}

// InputBytes returns the bytes read of the file as stored and its size:
// counted here for NDJSON, by the CSV reader for CSV.
func (c *closeBoth) InputBytes() (read, size int64) {
	if c.count != nil {
		return c.count.InputBytes()
	}
	if ic, ok := table.Find[table.InputCounter](c.Reader); ok {
		return ic.InputBytes()
	}
	return 0, 0
}

// EstimateRows passes on the CSV reader's estimate of the rows.
func (c *closeBoth) EstimateRows() int64 {
	if re, ok := c.Reader.(table.RowEstimator); ok {
		return re.EstimateRows()
	}
	return 0
}

func (c *closeBoth) Close() error {
	err := c.Reader.Close()
	for _, cl := range []io.Closer{c.dec, c.f} {
		if cl == nil {
			continue
		}
		if err2 := cl.Close(); err == nil {
			err = err2
		}
	}
	return err
}

// FormatOf names the output format for a path from its extension: .csv
// (also .tsv, .txt, each optionally followed by .gz or .zst, see
// CompressionOf), .parquet or .pq, .arrow, .ipc or .feather. It returns ""
// for an unknown extension, and for a compressed one other than CSV's.
func FormatOf(path string) Format {
	base, c := splitCompression(path)
	switch strings.ToLower(filepath.Ext(base)) {
	case ".csv", ".tsv", ".txt":
		return CSV
	case ".parquet", ".pq":
		if c == "" {
			return Parquet
		}
	case ".arrow", ".ipc", ".feather":
		if c == "" {
			return Arrow
		}
	}
	return ""
}

// Compression is how a CSV output is compressed, named by its extension.
type Compression string

// The compressions of CSV output.
const (
	Uncompressed Compression = ""
	Gzip         Compression = "gzip" // .gz, from the standard library
	Zstd         Compression = "zstd" // .zst or .zstd
)

// CompressionOf names the compression a path's last extension asks for:
// Gzip for .gz, Zstd for .zst or .zstd, Uncompressed otherwise. Input needs
// no such name: the CSV reader recognises compressed input by its bytes.
func CompressionOf(path string) Compression {
	_, c := splitCompression(path)
	return c
}

// splitCompression returns path without a compression extension, and the
// compression that extension names.
func splitCompression(path string) (string, Compression) {
	ext := filepath.Ext(path)
	switch strings.ToLower(ext) {
	case ".gz":
		return strings.TrimSuffix(path, ext), Gzip
	case ".zst", ".zstd":
		return strings.TrimSuffix(path, ext), Zstd
	}
	return path, Uncompressed
}

// DelimiterOf returns the delimiter a path's extension implies: a tab for
// .tsv (also .tsv.gz, .tsv.zst), 0 (the CSV default, a comma) otherwise.
// Open and Create use it when the options give no delimiter.
func DelimiterOf(path string) byte {
	base, _ := splitCompression(path)
	if strings.EqualFold(filepath.Ext(base), ".tsv") {
		return '\t'
	}
	return 0
}

// ParamFormat names WriteOptions.Format in messages.
const ParamFormat param.Name = "format"

// WriteOptions configures an output table.
type WriteOptions struct {
	Format Format // "" picks by extension
	// CSV configures a CSV output; a Delimiter of 0 means the one the
	// path's extension implies (DelimiterOf). A CSV path ending in .gz or
	// .zst is written compressed (CompressionOf).
	CSV     csvio.WriterOptions
	Parquet pqio.WriterOptions
	// Input names the table being written (the input file) in the
	// errors of the Parquet and Arrow writers about its values (unless
	// Parquet.Input is set).
	Input string
	// CheckUTF8 makes the Parquet and Arrow writers refuse text and
	// column names that are not valid UTF-8 (see pqio.WriterOptions); a
	// CSV output keeps the bytes as they are.
	CheckUTF8 bool
}

// Output is a table being written to a temporary file beside its final
// path (see atomicfile). Commit closes the writer and renames the file
// into place; Abort removes it.
type Output struct {
	table.Writer
	file   *atomicfile.File
	z      io.WriteCloser // the compressor between the writer and file, or nil
	closed bool           // the writer is closed
}

// Stdout is the output path that writes to standard output. Its format
// comes from WriteOptions.Format; CSV, Parquet and Arrow (the file format)
// are written without seeking.
const Stdout = "-"

// Create starts writing a table with the given schema at path (Stdout for
// standard output).
func Create(path string, schema *table.Schema, opts WriteOptions) (*Output, error) {
	format := opts.Format
	if format == "" {
		format = FormatOf(path)
		if format == "" {
			if path == Stdout {
				return nil, param.Errorf("standard output: give the output format (%s csv, parquet or arrow)", ParamFormat)
			}
			return nil, param.Errorf("%s: cannot tell the output format from the extension (use .csv, .parquet or .arrow, or give %s)", path, ParamFormat)
		}
	}
	var f *atomicfile.File
	if path == Stdout {
		f = atomicfile.Stdout()
	} else {
		var err error
		if f, err = atomicfile.Create(path); err != nil {
			return nil, err
		}
	}
	var err error
	var w table.Writer
	var z io.WriteCloser
	switch format {
	case CSV:
		co := opts.CSV
		if co.Delimiter == 0 {
			co.Delimiter = DelimiterOf(path)
		}
		var dst io.Writer = f
		if z, err = compressor(f, CompressionOf(path)); err != nil {
			break
		}
		if z != nil {
			dst = z
		}
		w, err = csvio.NewWriter(dst, schema, co)
	case Parquet:
		po := opts.Parquet
		if po.Input == "" {
			po.Input = opts.Input
		}
		po.CheckUTF8 = po.CheckUTF8 || opts.CheckUTF8
		w, err = pqio.NewWriter(f, schema, po)
	case Arrow:
		w, err = arrowio.NewWriterWith(f, schema, arrowio.WriterOptions{Input: opts.Input, CheckUTF8: opts.CheckUTF8})
	default:
		err = fmt.Errorf("unknown output format %q", format)
	}
	if err != nil {
		f.Abort()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return &Output{Writer: w, file: f, z: z}, nil
}

// compressor returns the writer that compresses into f as c says, or nil
// for Uncompressed. Both compressors write one frame (gzip member, zstd
// frame) that their readers, ours included, read whole.
func compressor(f io.Writer, c Compression) (io.WriteCloser, error) {
	switch c {
	case Gzip:
		return gzip.NewWriter(f), nil
	case Zstd:
		return zstd.NewWriter(f, zstd.WithEncoderConcurrency(1))
	}
	return nil, nil
}

// Ready completes the table (closes the writer) and makes the file
// durable, leaving only the move into place to Commit. A writer's error is
// returned as it is (a *table.DataError stays one).
func (o *Output) Ready() error {
	if !o.closed {
		o.closed = true
		err := o.Writer.Close()
		if err == nil && o.z != nil {
			err = o.z.Close()
		}
		if err != nil {
			o.file.Abort()
			return fmt.Errorf("write %s: %w", o.file.Path(), err)
		}
	}
	return o.file.Ready()
}

// Commit completes the table and moves it into place.
func (o *Output) Commit() error {
	if err := o.Ready(); err != nil {
		return err
	}
	return o.file.Commit()
}

// Abort discards the output; the final path is left as it was.
func (o *Output) Abort() {
	if !o.closed {
		o.closed = true
		o.Writer.Close()
	}
	o.file.Abort()
}
