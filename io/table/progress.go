package table

import (
	"io"
	"os"
	"sync/atomic"
)

// InputCounter is implemented by readers that can tell how far through
// their input they are in bytes (CSV): InputBytes returns the bytes read
// from the input so far (of the file as stored, so compressed bytes for a
// compressed file) and the input's size, 0 when it is not known (standard
// input). It may be called from any goroutine while another reads, and is
// cheap (an atomic load): a progress display calls it a few times a
// second, never per row.
type InputCounter interface {
	InputBytes() (read, size int64)
}

// InputCount counts the bytes read from an input for an InputCounter: one
// atomic add per Read, a buffer's worth, never per row. The zero value is
// ready; Count starts it.
type InputCount struct {
	read atomic.Int64
	size int64
}

// Count returns a reader of src that counts into c the bytes read through
// it. When src is a regular file, its size is the input's size.
func (c *InputCount) Count(src io.Reader) io.Reader {
	if f, ok := src.(*os.File); ok {
		if st, err := f.Stat(); err == nil && st.Mode().IsRegular() {
			c.size = st.Size()
		}
	}
	return countingReader{src, &c.read}
}

// InputBytes returns the bytes read so far and the input's size, 0 when
// it is not known.
func (c *InputCount) InputBytes() (read, size int64) { return c.read.Load(), c.size }

type countingReader struct {
	r io.Reader
	n *atomic.Int64
}

func (c countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n.Add(int64(n))
	return n, err
}

// Wrapper is implemented by readers that wrap another one (ReadAhead, a
// reader that closes the file under it, one that adds derived columns):
// Unwrap returns the reader underneath, so that Find can reach what only it
// implements. The reader returned is for inspection (its row count, its
// input counter), never to read from.
type Wrapper interface {
	Unwrap() Reader
}

// Find returns the first reader among r and the readers it wraps
// (Wrapper) that implements T.
func Find[T any](r Reader) (T, bool) {
	for r != nil {
		if t, ok := r.(T); ok {
			return t, true
		}
		w, ok := r.(Wrapper)
		if !ok {
			break
		}
		r = w.Unwrap()
	}
	var zero T
	return zero, false
}

// Unwrap returns the reader read ahead, for inspection only.
func (a *readAhead) Unwrap() Reader { return a.r }

// RowCount returns the table's row count when r or a reader it wraps knows
// it before reading (RowCounter: a Parquet file's metadata), or -1.
func RowCount(r Reader) int64 {
	for r != nil {
		if rc, ok := r.(RowCounter); ok {
			if n := rc.NumRows(); n >= 0 {
				return n
			}
		}
		w, ok := r.(Wrapper)
		if !ok {
			break
		}
		r = w.Unwrap()
	}
	return -1
}
