package arrowio

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow/go/v17/arrow/ipc"

	"manyfold/io/table"
)

// FuzzRead reads arbitrary bytes as an Arrow file or stream through
// NewReader, every batch and every value: it must return data or an error
// of one line, never panic, and allocate no more than the input can hold.
// The seeds are small valid files and streams of every kind the reader
// supports, compressed or not; crashers found are kept in
// testdata/fuzz/FuzzRead.
func FuzzRead(f *testing.F) {
	for _, stream := range []bool{false, true} {
		data, _ := writeArrow(f, eventSchema, eventBatches, stream)
		f.Add(data)
		data, _ = writeArrow(f, eventSchema, eventBatches, stream, ipc.WithLZ4())
		f.Add(data)
		rec := nestedRecord(f)
		f.Add(writeRecord(f, rec, stream))
		f.Add(writeRecord(f, rec, stream, ipc.WithZstd()))
		rec.Release()
		f.Add(smallArrow(f, nullIntSchema, 3, stream, ipc.WithLZ4()))
		f.Add(smallArrow(f, dictTextSchema, 4, stream, ipc.WithZstd()))
	}
	changing := []batchData{
		{vals: [][]any{{0, 1, nil}}, dicts: map[int][]string{0: {"R-1", "R-2"}}},
		{vals: [][]any{{2, nil, 0}}, dicts: map[int][]string{0: {"R-1", "R-2", "R-3"}}},
		{vals: [][]any{{0, 0}}, dicts: map[int][]string{0: {"R-9"}}},
	}
	data, _ := writeArrow(f, dictTextSchema, changing, true, ipc.WithDictionaryDeltas(true))
	f.Add(data)
	f.Fuzz(func(t *testing.T, data []byte) {
		// A reading that hangs ends the process, which the fuzzing engine
		// reports with the input.
		watchdog := time.AfterFunc(fuzzHang, func() { panic(fmt.Sprintf("reading %d bytes took more than %v", len(data), fuzzHang)) })
		defer watchdog.Stop()
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		err := readFuzz(data)
		runtime.ReadMemStats(&after)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Errorf("error of several lines: %q", err)
			}
			if !expected(err) {
				t.Errorf("unexpected error: %v", err)
			}
		}
		// What a valid input may legitimately expand to: the codec's ratio
		// for compressed buffers, plus the reader's own buffers.
		if alloc, bound := after.TotalAlloc-before.TotalAlloc, uint64(128<<20+ratioZstd*len(data)); alloc > bound {
			t.Errorf("%d bytes of input allocated %d MB", len(data), alloc>>20)
		}
	})
}

// fuzzHang is the longest one input may take to read.
const fuzzHang = 10 * time.Second

// readFuzz reads every value of data, returning the first error.
func readFuzz(data []byte) error {
	r, err := NewReader(bytes.NewReader(data), "fuzz.arrow")
	if err != nil {
		return err
	}
	defer r.Close()
	for {
		b, err := r.Next()
		if err != nil {
			if errors.Is(err, io.EOF) {
				return nil
			}
			return err
		}
		for ci := range b.Cols {
			for i := 0; i < b.Rows; i++ {
				b.Cols[ci].AppendText(nil, i)
			}
		}
	}
}

// expected says whether err is one the reader documents: a corrupt, empty
// or unknown file, bad data at a row, or a type it does not read.
func expected(err error) bool {
	var de *table.DataError
	switch {
	case errors.Is(err, table.ErrCorrupt), errors.Is(err, table.ErrEmpty), errors.Is(err, table.ErrUnknownFormat), errors.As(err, &de):
		return true
	}
	for _, s := range []string{"not supported", "cannot be read", "more than 2 GiB of text"} {
		if strings.Contains(err.Error(), s) {
			return true
		}
	}
	return false
}
