package table

import (
	"errors"
	"io"
	"sync"

	"manyfold/internal/guard"
)

// CopyBatch makes dst a copy of src that shares no memory with it, reusing
// dst's slices where they are large enough. A dictionary is copied only
// when its ID differs from the one dst's column last copied (an ID of 0
// is always copied).
func CopyBatch(dst, src *Batch) {
	dst.Rows, dst.FirstRow = src.Rows, src.FirstRow
	dst.Lines = copyOf(dst.Lines, src.Lines)
	if cap(dst.Cols) < len(src.Cols) {
		cols := make([]Column, len(src.Cols))
		copy(cols, dst.Cols)
		dst.Cols = cols
	}
	dst.Cols = dst.Cols[:len(src.Cols)]
	for i := range src.Cols {
		copyColumn(&dst.Cols[i], &src.Cols[i])
	}
}

func copyColumn(d, s *Column) {
	d.Form = s.Form
	d.Nulls = copyOf(d.Nulls, s.Nulls)
	d.Data = copyOf(d.Data, s.Data)
	d.Offsets = copyOf(d.Offsets, s.Offsets)
	d.Indices = copyOf(d.Indices, s.Indices)
	d.Ints = copyOf(d.Ints, s.Ints)
	d.Floats = copyOf(d.Floats, s.Floats)
	d.Bools = copyOf(d.Bools, s.Bools)
	switch {
	case s.Dict == nil:
		d.Dict = nil
	case d.Dict == nil || s.Dict.ID == 0 || d.Dict.ID != s.Dict.ID:
		// A new Dict, not the old one refilled: a consumer may still
		// hold the old one's entries.
		d.Dict = &Dict{Data: append([]byte(nil), s.Dict.Data...), Offsets: append([]int32(nil), s.Dict.Offsets...), ID: s.Dict.ID}
	}
}

// copyOf copies src into dst's storage (nil for a nil src).
func copyOf[T any](dst, src []T) []T {
	if src == nil {
		return nil
	}
	return append(dst[:0], src...)
}

// ReadAhead returns a Reader that yields r's batches while it reads the
// next one on a goroutine of its own, so that decoding overlaps with the
// caller's work on the current batch. Batches are copied (CopyBatch); a
// batch stays valid until the following Next, as Reader requires. Select
// works as on r, before the first Next. Close stops the goroutine and
// closes r.
func ReadAhead(r Reader) Reader { return &readAhead{r: r} }

// RowCounter is implemented by readers that know the table's row count
// before reading it, from the file's metadata (Parquet); NumRows returns
// -1 when it is not known.
type RowCounter interface {
	NumRows() int64
}

// RowEstimator is implemented by readers that can estimate the table's row
// count part way through (an uncompressed CSV file, from its size and the
// bytes per row so far); EstimateRows returns 0 when they cannot.
type RowEstimator interface {
	EstimateRows() int64
}

// NumRows returns the row count of the reader read ahead, or -1.
func (a *readAhead) NumRows() int64 {
	if rc, ok := a.r.(RowCounter); ok {
		return rc.NumRows()
	}
	return -1
}

// EstimateRows returns the estimate of the reader read ahead or of one it
// wraps (Find), or 0.
func (a *readAhead) EstimateRows() int64 {
	if re, ok := Find[RowEstimator](a.r); ok {
		return re.EstimateRows()
	}
	return 0
}

type readAhead struct {
	r       Reader
	started bool
	out     chan aheadResult
	free    chan *Batch
	stop    chan struct{}
	wg      sync.WaitGroup
	cur     *Batch
	err     error
}

type aheadResult struct {
	b   *Batch
	err error
}

func (a *readAhead) Schema() *Schema { return a.r.Schema() }

func (a *readAhead) Select(cols []int) error {
	if a.started {
		return errors.New("Select after Next")
	}
	return a.r.Select(cols)
}

func (a *readAhead) start() {
	a.started = true
	a.out = make(chan aheadResult, 1)
	a.free = make(chan *Batch, 2)
	a.stop = make(chan struct{})
	a.free <- new(Batch)
	a.free <- new(Batch)
	a.wg.Add(1)
	go func() {
		defer a.wg.Done()
		for {
			b, err := a.next()
			var dst *Batch
			if err == nil {
				select {
				case dst = <-a.free:
				case <-a.stop:
					return
				}
				CopyBatch(dst, b)
			}
			select {
			case a.out <- aheadResult{dst, err}:
			case <-a.stop:
				return
			}
			if err != nil {
				return
			}
		}
	}()
}

// next reads r's next batch; a panic of the reader becomes its error
// (a *guard.Panic), so that it ends the run with one line, not a crash.
func (a *readAhead) next() (b *Batch, err error) {
	defer guard.Catch(&err)
	return a.r.Next()
}

// Next returns the next batch.
func (a *readAhead) Next() (*Batch, error) {
	if a.err != nil {
		return nil, a.err
	}
	if !a.started {
		a.start()
	}
	if a.cur != nil {
		a.free <- a.cur
		a.cur = nil
	}
	res := <-a.out
	if res.err != nil {
		a.err = res.err
		return nil, res.err
	}
	a.cur = res.b
	return res.b, nil
}

// Close stops reading ahead and closes r.
func (a *readAhead) Close() error {
	if a.started {
		select {
		case <-a.stop:
		default:
			close(a.stop)
		}
		a.wg.Wait()
	}
	if a.err == nil {
		a.err = io.ErrClosedPipe
	}
	return a.r.Close()
}

// WriteBehind returns a Writer that hands each batch, copied (CopyBatch),
// to w on a goroutine of its own, so that encoding and writing overlap with
// the caller's work on the next batch. The batches reach w in order. An
// error of w is returned by a later Write or by Close; after it no more
// batches reach w. Close waits for the batches in flight, then closes w.
func WriteBehind(w Writer) Writer {
	wb := &writeBehind{w: w, in: make(chan *Batch, 1), free: make(chan *Batch, 2), done: make(chan struct{})}
	wb.free <- new(Batch)
	wb.free <- new(Batch)
	go func() {
		defer close(wb.done)
		for b := range wb.in {
			if wb.failed() == nil {
				if err := writeGuarded(w, b); err != nil {
					wb.mu.Lock()
					wb.err = err
					wb.mu.Unlock()
				}
			}
			wb.free <- b
		}
	}()
	return wb
}

// writeGuarded writes b to w; a panic of the writer becomes its error.
func writeGuarded(w Writer, b *Batch) (err error) {
	defer guard.Catch(&err)
	return w.Write(b)
}

type writeBehind struct {
	w      Writer
	in     chan *Batch
	free   chan *Batch
	done   chan struct{}
	mu     sync.Mutex
	err    error
	closed bool
}

func (wb *writeBehind) failed() error {
	wb.mu.Lock()
	defer wb.mu.Unlock()
	return wb.err
}

// Write queues a copy of b for w.
func (wb *writeBehind) Write(b *Batch) error {
	if wb.closed {
		return errors.New("write after Close")
	}
	if err := wb.failed(); err != nil {
		return err
	}
	dst := <-wb.free
	CopyBatch(dst, b)
	wb.in <- dst
	return nil
}

// Close waits for the queued batches and closes w; it returns the first
// error of w.
func (wb *writeBehind) Close() error {
	if wb.closed {
		return wb.failed()
	}
	wb.closed = true
	close(wb.in)
	<-wb.done
	if err := wb.failed(); err != nil {
		wb.w.Close()
		return err
	}
	if err := wb.w.Close(); err != nil {
		wb.mu.Lock()
		wb.err = err
		wb.mu.Unlock()
		return err
	}
	return nil
}
