// Package arrowio reads and writes tables in the Arrow IPC formats: the
// file format (starting with the magic "ARROW1", with a footer) and the
// stream format (a sequence of messages, as piped between programs).
//
// Reading maps Arrow types onto manyfold's kinds:
//
//   - utf8, large_utf8, binary, large_binary, the view types and
//     fixed_size_binary: text (FormText);
//   - a dictionary of utf8, large_utf8, binary or large_binary values: text
//     in dictionary form (FormDict), with a table.Dict whose ID changes
//     whenever the dictionary does (a delta or a replacement in a stream);
//   - int8 to int64 and uint8 to uint64: int (a uint64 above the int64 range
//     is a data error);
//   - date32 and date64: text, the ISO 8601 date (2026-12-04);
//   - timestamp: text, the ISO 8601 date and time (table.AppendTimestamp:
//     the fraction of a second only when not zero, to at most the unit's
//     digits; a Z when the type has a time zone, the instant shown in UTC;
//     no zone for a timestamp without one, a wall clock time);
//   - time32, time64 and duration: int, holding the stored integer (the
//     type's unit since midnight, or the duration) with no conversion;
//   - float16, float32, float64: float;
//   - bool: bool;
//   - null: text, every row null.
//
// Other types (nested lists, structs, maps, unions, decimals, intervals) are
// listed in the schema as text, but selecting such a column, or reading it
// without a selection, fails with an error naming the column.
//
// Before the Arrow library loads a record or dictionary batch, the reader
// checks its claims against the bytes that hold them, so that a damaged or
// hostile input of a few kilobytes cannot make it allocate gigabytes: every
// field node's length must fit its buffers and a top-level node must be as
// long as its batch; rows that no buffer holds (null columns, zero-width
// binary, structs without nulls) may total 2^20 plus 64 per byte of the
// message; a compressed buffer may claim at most 256 (LZ4) or 32768 (ZSTD)
// times its compressed bytes, the most either codec expands a byte to, a
// fixed-width one no more than its rows need (rounded up to 64 bytes), and a
// ZSTD frame a window of at most the buffer's size or 8 MiB; the
// blocks of a file's footer may not overlap; and the text of a view column
// is bounded by 64 times its buffers' bytes plus 1 MiB. A batch that breaks
// one of these is an error wrapping table.ErrCorrupt that names the batch
// and the column.
//
// Writing produces the file format with one record batch per Write.
package arrowio

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"

	"github.com/apache/arrow/go/v17/arrow/ipc"
	"github.com/apache/arrow/go/v17/arrow/memory"

	"manyfold/io/table"
)

// maxBuffer caps a single buffer that reading may allocate. A corrupt
// message can claim any length; the cap turns an absurd claim into an
// ErrCorrupt error instead of exhausting memory.
const maxBuffer = 1 << 33

// limitAllocator is Arrow's Go allocator with a cap on each allocation.
type limitAllocator struct {
	memory.GoAllocator
}

var errTooLarge = errors.New("a buffer claims more than 8 GiB")

func (a *limitAllocator) Allocate(size int) []byte {
	if size < 0 || size > maxBuffer {
		panic(errTooLarge)
	}
	return a.GoAllocator.Allocate(size)
}

func (a *limitAllocator) Reallocate(size int, b []byte) []byte {
	if size < 0 || size > maxBuffer {
		panic(errTooLarge)
	}
	return a.GoAllocator.Reallocate(size, b)
}

var readAlloc = &limitAllocator{}

// Open opens the Arrow IPC file or stream at path, telling the two formats
// apart by their first bytes. The reader closes the file when it is closed.
// A stream cut exactly between two messages reads as a shorter table, as
// the stream format has no way to tell.
func Open(path string) (table.Reader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	head := make([]byte, len(ipc.Magic))
	n, err := io.ReadFull(f, head)
	if err != nil && !errors.Is(err, io.ErrUnexpectedEOF) && !errors.Is(err, io.EOF) {
		f.Close()
		return nil, fmt.Errorf("read %s: %w", path, err)
	}
	if n == 0 {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, table.ErrEmpty)
	}
	var r *reader
	if bytes.Equal(head[:n], ipc.Magic) {
		r, err = openFile(f, path)
	} else {
		if _, err = f.Seek(0, io.SeekStart); err != nil {
			f.Close()
			return nil, fmt.Errorf("read %s: %w", path, err)
		}
		r, err = openStream(bufio.NewReaderSize(f, 1<<16), path)
		if err != nil && !bytes.HasPrefix(head[:n], streamMarker) && !errors.Is(err, table.ErrEmpty) {
			err = fmt.Errorf("%s: %w", path, table.ErrUnknownFormat)
		}
	}
	if err != nil {
		f.Close()
		return nil, err
	}
	r.closer = f
	return r, nil
}

// streamMarker is the continuation marker that starts every message of a
// current IPC stream.
var streamMarker = []byte{0xff, 0xff, 0xff, 0xff}

// NewReader reads an Arrow IPC stream from r, which need not be seekable;
// name labels errors. Input in the file format (starting with "ARROW1") is
// copied to an unnamed temporary file first, as that format is read from
// its end. Closing the reader does not close r.
func NewReader(r io.Reader, name string) (table.Reader, error) {
	head := make([]byte, len(ipc.Magic))
	n, err := io.ReadFull(r, head)
	if err != nil && !errors.Is(err, io.ErrUnexpectedEOF) && !errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("read %s: %w", name, err)
	}
	if n == 0 {
		return nil, fmt.Errorf("%s: %w", name, table.ErrEmpty)
	}
	if bytes.Equal(head[:n], ipc.Magic) {
		return spoolFile(io.MultiReader(bytes.NewReader(head), r), name)
	}
	rd, err := openStream(io.MultiReader(bytes.NewReader(head[:n]), r), name)
	if err != nil {
		return nil, err
	}
	return rd, nil
}

// spoolFile copies file-format input to a temporary file, removed at once,
// and opens it.
func spoolFile(r io.Reader, name string) (table.Reader, error) {
	tmp, err := os.CreateTemp("", "manyfold-arrow-*")
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	os.Remove(tmp.Name())
	if _, err := io.Copy(tmp, r); err != nil {
		tmp.Close()
		return nil, fmt.Errorf("read %s: %w", name, err)
	}
	rd, err := openFile(tmp, name)
	if err != nil {
		tmp.Close()
		return nil, err
	}
	rd.closer = tmp
	return rd, nil
}

// openFile opens the file format.
func openFile(f *os.File, name string) (r *reader, err error) {
	defer func() {
		if p := recover(); p != nil {
			r, err = nil, corrupt(name, p)
		}
	}()
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("read %s: %w", name, err)
	}
	if err := checkFooter(f, st.Size()); err != nil {
		return nil, fmt.Errorf("%s: %w: %w", name, table.ErrCorrupt, err)
	}
	fr, err := ipc.NewFileReader(f, ipc.WithAllocator(readAlloc))
	if err != nil {
		return nil, fmt.Errorf("%s: %w: %w", name, table.ErrCorrupt, err)
	}
	r, err = newReader(name, fr.Schema())
	if err != nil {
		fr.Close()
		return nil, err
	}
	r.file = fr
	r.nrec = fr.NumRecords()
	return r, nil
}

// openStream opens the stream format; a stream with no schema message is
// empty.
func openStream(in io.Reader, name string) (r *reader, err error) {
	defer func() {
		if p := recover(); p != nil {
			r, err = nil, corrupt(name, p)
		}
	}()
	mr := &msgReader{r: in}
	sr, err := ipc.NewReaderFromMessageReader(mr, ipc.WithAllocator(readAlloc))
	if err != nil {
		if errors.Is(err, io.EOF) {
			return nil, fmt.Errorf("%s: %w", name, table.ErrEmpty)
		}
		return nil, fmt.Errorf("%s: %w: %w", name, table.ErrCorrupt, err)
	}
	if mr.guard, err = streamGuard(mr.schema, sr.Schema()); err != nil {
		sr.Release()
		return nil, fmt.Errorf("%s: %w: %w", name, table.ErrCorrupt, err)
	}
	mr.dicts = len(mr.guard.dicts)
	r, err = newReader(name, sr.Schema())
	if err != nil {
		sr.Release()
		return nil, err
	}
	r.stream = sr
	return r, nil
}

// corrupt turns a recovered panic into an error wrapping table.ErrCorrupt.
func corrupt(name string, p any) error {
	if e, ok := p.(error); ok {
		return fmt.Errorf("%s: %w: %w", name, table.ErrCorrupt, e)
	}
	return fmt.Errorf("%s: %w: %v", name, table.ErrCorrupt, p)
}
