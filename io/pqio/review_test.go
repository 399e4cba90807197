package pqio

import (
	"bytes"
	"encoding/binary"
	"runtime"
	"testing"

	"github.com/klauspost/compress/zstd"
	"github.com/parquet-go/parquet-go/format"
)

// TestZstdPageBounded: a zstd page whose header declares 65 bytes but whose
// frame decodes to 64 MiB is refused having allocated about what the header
// declares, as the decoder now stops at its buffer's capacity. (This frame
// records its content size, which the decoder checked before too, so the
// test guards the bound rather than reproducing the frames without one that
// review found.)
func TestZstdPageBounded(t *testing.T) {
	enc, err := zstd.NewWriter(nil, zstd.WithNoEntropyCompression(true))
	if err != nil {
		t.Fatal(err)
	}
	frame := enc.EncodeAll(make([]byte, 64<<20), nil)
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	_, err = decompress(format.Zstd, nil, frame, 65)
	runtime.ReadMemStats(&after)
	if err == nil {
		t.Fatal("a page decoding past its declared size was accepted")
	}
	if got := after.TotalAlloc - before.TotalAlloc; got > 16<<20 {
		t.Errorf("refusing it allocated %d bytes, want under 16 MiB", got)
	}
}

// TestZstdPageRatio: a valid zstd page of 32 MiB of one byte compresses to
// a few KB, a ratio past deflate's; its header must not be refused.
func TestZstdPageRatio(t *testing.T) {
	enc, err := zstd.NewWriter(nil)
	if err != nil {
		t.Fatal(err)
	}
	page := bytes.Repeat([]byte("a"), 32<<20)
	frame := enc.EncodeAll(page, nil)
	h := &format.PageHeader{CompressedPageSize: int32(len(frame)), UncompressedPageSize: int32(len(page))}
	if err := checkSizes(h, format.Zstd, int64(len(frame))); err != nil {
		t.Errorf("a %d-byte zstd page of %d bytes: %v", len(frame), len(page), err)
	}
}

// TestThriftListOfEmptyStructs: a footer field listing a million empty
// structs (a byte each) passed the bytes-left check, and the decoder would
// make a list of a million 560-byte column chunks (about 40 million of
// them from a 40 MB file: a fatal out-of-memory). The walk's budget
// refuses it.
func TestThriftListOfEmptyStructs(t *testing.T) {
	const n = 1 << 20
	b := []byte{0x19, 0xFC} // field 1, a list; its size follows, of structs
	b = binary.AppendUvarint(b, n)
	b = append(b, make([]byte, n)...) // n empty structs
	b = append(b, 0)                  // the outer struct's stop
	if err := checkThrift(b); err == nil {
		t.Fatal("a list of a million empty structs was accepted")
	}
	// The same list of 1,000 is well within the budget.
	small := append([]byte{0x19, 0xFC}, binary.AppendUvarint(nil, 1000)...)
	small = append(append(small, make([]byte, 1000)...), 0)
	if err := checkThrift(small); err != nil {
		t.Errorf("a list of 1,000 empty structs: %v", err)
	}
}
