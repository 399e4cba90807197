package pqio

import (
	"encoding/binary"
	"math/bits"
)

// appendHybrid appends vals in Parquet's RLE / bit-packing hybrid encoding
// with the given bit width (Parquet format specification, Encodings.md,
// "Run Length Encoding / Bit-Packing Hybrid (RLE = 3)"), without the 4-byte
// length prefix that data page v1 levels carry. A run of 8 or more equal
// values becomes an RLE run: the ULEB128 header count<<1 followed by the
// value in ceil(width/8) little-endian bytes. Other values go into
// bit-packed runs of groups of 8: the header groups<<1 | 1, then the
// values packed from the least significant bit up. Only the last group of
// the data may be padded (with zeros); the reader knows the true count from
// the page header. Every value must fit in width bits; width 0 writes the
// RLE form of zeros, as readers expect.
func appendHybrid(dst []byte, vals []uint32, width int) []byte {
	n := len(vals)
	vbytes := (width + 7) / 8
	for i := 0; i < n; {
		run := runLength(vals, i)
		if run >= 8 || width == 0 {
			dst = binary.AppendUvarint(dst, uint64(run)<<1)
			v := vals[i]
			for b := 0; b < vbytes; b++ {
				dst = append(dst, byte(v>>(8*b)))
			}
			i += run
			continue
		}
		// Bit-pack groups of 8 until a run of 8 starts at a group
		// boundary or the values end.
		j := i
		for j < n {
			j += 8
			if j >= n || runLength(vals, j) >= 8 {
				break
			}
		}
		groups := (min(j, n) - i + 7) / 8
		dst = binary.AppendUvarint(dst, uint64(groups)<<1|1)
		dst = packBits(dst, vals[i:min(i+groups*8, n)], groups*8, width)
		i = min(i+groups*8, n)
	}
	return dst
}

// runLength returns how many values from vals[i] on equal vals[i], counting
// at most 1<<20 (longer runs are split into several RLE runs).
func runLength(vals []uint32, i int) int {
	v := vals[i]
	j := i + 1
	for j < len(vals) && vals[j] == v && j-i < 1<<20 {
		j++
	}
	return j - i
}

// packBits appends vals bit-packed at width bits each, least significant
// bit first, padded with zero values to count values.
func packBits(dst []byte, vals []uint32, count, width int) []byte {
	var acc uint64
	nb := 0
	for k := 0; k < count; k++ {
		var v uint32
		if k < len(vals) {
			v = vals[k]
		}
		acc |= uint64(v) << nb
		nb += width
		for nb >= 8 {
			dst = append(dst, byte(acc))
			acc >>= 8
			nb -= 8
		}
	}
	if nb > 0 {
		dst = append(dst, byte(acc))
	}
	return dst
}

// bitWidth returns the bits needed to hold max (0 for 0).
func bitWidth(max uint32) int { return bits.Len32(max) }
