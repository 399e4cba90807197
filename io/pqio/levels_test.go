package pqio

import (
	"bytes"
	"fmt"
	"testing"

	"github.com/parquet-go/parquet-go/encoding/rle"
)

// TestHybridExamples checks appendHybrid against encodings worked out from
// the Parquet format's description of the RLE / bit-packing hybrid
// (Encodings.md).
func TestHybridExamples(t *testing.T) {
	cases := []struct {
		name  string
		vals  []uint32
		width int
		want  []byte
	}{
		// The specification's bit-packing example (from memory of
		// Encodings.md): 0..7 at width 3 pack to 10001000 11000110
		// 11111010; the run header is one group of 8, (1<<1)|1.
		{"spec bit-packing", []uint32{0, 1, 2, 3, 4, 5, 6, 7}, 3, []byte{0x03, 0x88, 0xC6, 0xFA}},
		// Computed from the description: an RLE run of 10 ones at width 1
		// is the header 10<<1 = 0x14 and the value in one byte.
		{"rle run", []uint32{1, 1, 1, 1, 1, 1, 1, 1, 1, 1}, 1, []byte{0x14, 0x01}},
		// A value of width 9 takes two little-endian bytes in an RLE run.
		{"rle wide", []uint32{300, 300, 300, 300, 300, 300, 300, 300}, 9, []byte{0x10, 0x2C, 0x01}},
		// Three values are padded to one group of 8: 1,0,1 at width 1.
		{"padded", []uint32{1, 0, 1}, 1, []byte{0x03, 0x05}},
		// A run of 8 after a bit-packed group: group, then RLE. The run
		// header for 200 values is the ULEB128 of 400: 0x90 0x03.
		{"group then long run", append([]uint32{1, 2, 3, 0, 1, 2, 3, 0}, rep(2, 200)...), 2,
			[]byte{0x03, 0x39, 0x39, 0x90, 0x03, 0x02}},
		{"width 0", []uint32{0, 0, 0}, 0, []byte{0x06}},
	}
	for _, c := range cases {
		got := appendHybrid(nil, c.vals, c.width)
		if !bytes.Equal(got, c.want) {
			t.Errorf("%s: % x, want % x", c.name, got, c.want)
		}
	}
}

func rep(v uint32, n int) []uint32 {
	out := make([]uint32, n)
	for i := range out {
		out[i] = v
	}
	return out
}

// TestHybridDecodes encodes value sequences of many shapes and widths and
// decodes them with parquet-go's RLE decoder, an implementation
// independent of ours.
func TestHybridDecodes(t *testing.T) {
	x := uint64(7)
	next := func() uint64 {
		x ^= x << 13
		x ^= x >> 7
		x ^= x << 17
		return x
	}
	for _, width := range []int{1, 2, 3, 5, 8, 12, 17, 24, 31} {
		for _, n := range []int{1, 7, 8, 9, 63, 64, 65, 1000, 4099} {
			vals := make([]uint32, n)
			for i := range vals {
				switch next() % 4 {
				case 0: // start a run
					v := uint32(next()) & (1<<width - 1)
					for k := 0; k < int(next()%40) && i < n; k++ {
						vals[i] = v
						i++
					}
					i--
				default:
					vals[i] = uint32(next()) & (1<<width - 1)
				}
			}
			enc := appendHybrid(nil, vals, width)
			dec := &rle.Encoding{BitWidth: width}
			got, err := dec.DecodeInt32(nil, enc)
			if err != nil {
				t.Fatalf("width %d, %d values: decode: %v", width, n, err)
			}
			if len(got) < n {
				t.Fatalf("width %d, %d values: decoded %d", width, n, len(got))
			}
			for i := 0; i < n; i++ {
				if uint32(got[i]) != vals[i] {
					t.Fatalf("width %d, %d values: value %d is %d, want %d", width, n, i, got[i], vals[i])
				}
			}
		}
	}
}

func TestBitWidth(t *testing.T) {
	for _, c := range []struct {
		max  uint32
		want int
	}{{0, 0}, {1, 1}, {2, 2}, {3, 2}, {4, 3}, {255, 8}, {256, 9}, {1<<31 + 5, 32}} {
		if got := bitWidth(c.max); got != c.want {
			t.Errorf("bitWidth(%d) = %d, want %d", c.max, got, c.want)
		}
	}
}

func BenchmarkHybrid(b *testing.B) {
	for _, shape := range []string{"levels", "indices"} {
		vals := make([]uint32, 1<<17)
		width := 1
		for i := range vals {
			if shape == "levels" {
				vals[i] = 1
				if i%100 == 0 {
					vals[i] = 0
				}
			} else {
				vals[i] = uint32(i*2654435761) >> 16
				width = 16
			}
		}
		b.Run(fmt.Sprint(shape), func(b *testing.B) {
			b.SetBytes(int64(len(vals)))
			var dst []byte
			for b.Loop() {
				dst = appendHybrid(dst[:0], vals, width)
			}
		})
	}
}
