package colstats

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"slices"

	"manyfold/encoders/exactsum"
	"manyfold/encoders/levels"
)

// The partial form of statistics: the levels of one partition of a
// column's statistics, as a shard of a table sends them to be merged with
// the other shards' (a stage of a sharded fit, see package pipeline's
// shards.go). A level's partition is the low bits of the XXH64 hash of its
// bytes (levels.Hash): the level table indexes by the high bits, and
// partitioning by them too would crowd each partition's levels into a
// fraction of its table's slots (a merge of one partition then probes
// long chains: 80 s instead of 1 at 2M rows). The null level is in
// partition 0.
//
// Layout, every integer an unsigned varint unless said otherwise:
//
//	"MFP1"                          magic
//	task (1 byte), folds, classes   as Stats (classes 0 for regression)
//	origin                          8 bytes, little-endian float64 bits
//	levels                          the number of levels that follow
//	per level:
//	  key                           0 for the null level, else len(bytes)+1, then the bytes
//	  rows                          the level's rows outside its cells (see Stats.rows)
//	  cells                         the number of non-empty folds that follow
//	  per non-empty fold:
//	    fold
//	    classification: classes counts
//	    regression: n, then sum and sum of squares about origin, each as
//	      its length and exactsum's canonical binary form
//	  extra                         its length, then the caller's bytes
//
// Levels appear in slot order, which is the shard's first-seen order: the
// form is the same for the same rows read the same way, and merging does
// not depend on it.

// partialMagic starts every partial.
var partialMagic = []byte("MFP1")

// ErrPartial is the error of bytes that are not a partial of the
// statistics they are merged into.
var ErrPartial = errors.New("not partial statistics of this column")

// Partition returns the partition, of parts (a power of two), of a level's
// bytes; the null level (nil) is in partition 0.
func Partition(b []byte, null bool, parts int) int {
	if null || parts <= 1 {
		return 0
	}
	return int(levels.Hash(b) & uint64(parts-1))
}

// AppendPartial appends to b the partial form of the levels of partition
// part of parts (a power of two, 1 for every level), with each level's
// extra bytes (extra may be nil). The statistics must not be sealed.
func (s *Stats) AppendPartial(b []byte, part, parts int, extra func(b []byte, l int) []byte) []byte {
	return append(b, s.Partials(parts, extra)[part]...)
}

// Partials returns the partial form of every partition of parts (a power
// of two) at once, each level's partition computed once: out[p] is
// AppendPartial(nil, p, parts, extra). The levels are read once, in slot
// order (the statistics' memory in order), each appended to its
// partition's bytes: reading a partition's levels at a time would jump
// over the memory of all the others, parts times over.
func (s *Stats) Partials(parts int, extra func(b []byte, l int) []byte) [][]byte {
	at := make([]int32, s.n) // each level's partition, -1 for none
	count, keys := make([]int, parts), make([]int, parts)
	for l := 0; l < s.n; l++ {
		at[l] = -1
		if s.RowCount(l) > 0 {
			k := s.Bytes(l)
			p := Partition(k, l == 0, parts)
			at[l] = int32(p)
			count[p]++
			keys[p] += len(k)
		}
	}
	out := make([][]byte, parts)
	for p := range out {
		out[p] = s.appendHeader(make([]byte, 0, s.partialSize(count[p], keys[p])), count[p])
	}
	var scratch []byte
	for l, p := range at {
		if p >= 0 {
			out[p], scratch = s.appendLevel(out[p], l, extra, scratch)
		}
	}
	return out
}

// partialSize returns room for the partial form of n levels of keys
// bytes in all: a growing slice would copy itself again and again. Per
// level its key, counts and a cell or two (a fold and its class counts,
// or n and two exact sums): a nearly unique id's levels have one, a
// postcode's more grow it.
func (s *Stats) partialSize(n, keys int) int {
	per := 10 + 1 + s.Classes
	if s.Task == Regression {
		per = 10 + 40
	}
	return 32 + keys + n*per
}

// AppendLevels appends the partial form of the levels ls (slots with
// rows), in that order, without extra bytes: statistics of some levels,
// as the rows before a shard are sent to it (pipeline.Preceding).
func (s *Stats) AppendLevels(b []byte, ls []int32) []byte {
	var keys int
	for _, l := range ls {
		keys += len(s.Bytes(int(l)))
	}
	b = s.appendHeader(slices.Grow(b, s.partialSize(len(ls), keys)), len(ls))
	for _, l := range ls {
		b, _ = s.appendLevel(b, int(l), nil, nil)
	}
	return b
}

// appendHeader appends the partial form's header, for n levels.
func (s *Stats) appendHeader(b []byte, n int) []byte {
	b = append(b, partialMagic...)
	b = append(b, byte(s.Task))
	b = binary.AppendUvarint(b, uint64(s.Folds))
	b = binary.AppendUvarint(b, uint64(s.Classes))
	b = binary.LittleEndian.AppendUint64(b, math.Float64bits(s.Origin))
	return binary.AppendUvarint(b, uint64(n))
}

// appendLevel appends level l in the partial form, with its extra bytes
// (extra may be nil; scratch is their buffer, returned for reuse).
func (s *Stats) appendLevel(b []byte, l int, extra func(b []byte, l int) []byte, scratch []byte) ([]byte, []byte) {
	if l == 0 {
		b = append(b, 0)
	} else {
		k := s.Bytes(l)
		b = binary.AppendUvarint(b, uint64(len(k))+1)
		b = append(b, k...)
	}
	b = binary.AppendUvarint(b, s.rows.get(l))
	b = s.appendCells(b, l)
	scratch = scratch[:0]
	if extra != nil {
		scratch = extra(scratch, l)
	}
	b = binary.AppendUvarint(b, uint64(len(scratch)))
	return append(b, scratch...), scratch
}

// appendCells appends the non-empty folds of level l.
func (s *Stats) appendCells(b []byte, l int) []byte {
	if s.Task != Regression {
		if nr, wr := s.cls.cells(l); wr != nil {
			return appendClassCells(b, wr, s.Classes)
		} else {
			return appendClassCells(b, nr, s.Classes)
		}
	}
	filled := 0
	for f := 0; f < s.Folds; f++ {
		if s.cellRows(l, f) > 0 {
			filled++
		}
	}
	b = binary.AppendUvarint(b, uint64(filled))
	var sum, sq exactsum.Sum
	var buf []byte
	for f := 0; f < s.Folds; f++ {
		n := s.cellRows(l, f)
		if n == 0 {
			continue
		}
		b = binary.AppendUvarint(b, uint64(f))
		b = binary.AppendUvarint(b, n)
		sum, sq = exactsum.Sum{}, exactsum.Sum{}
		s.exactCell(l, f, &sum, &sq)
		for _, v := range []*exactsum.Sum{&sum, &sq} {
			buf = v.AppendBinary(buf[:0])
			b = binary.AppendUvarint(b, uint64(len(buf)))
			b = append(b, buf...)
		}
	}
	return b
}

// appendClassCells appends the non-empty folds of a level's class counts
// row (folds * classes cells, fold by fold).
func appendClassCells[T uint8 | uint64](b []byte, row []T, classes int) []byte {
	if classes == 0 {
		return append(b, 0) // no classes: no cell
	}
	filled := 0
	for f := 0; f+classes <= len(row); f += classes {
		for _, v := range row[f : f+classes] {
			if v != 0 {
				filled++
				break
			}
		}
	}
	b = binary.AppendUvarint(b, uint64(filled))
	for f := 0; f+classes <= len(row); f += classes {
		cell := row[f : f+classes]
		if !slices.ContainsFunc(cell, func(v T) bool { return v != 0 }) {
			continue
		}
		b = binary.AppendUvarint(b, uint64(f/classes))
		for _, v := range cell {
			b = binary.AppendUvarint(b, uint64(v))
		}
	}
	return b
}

// cellRows returns the rows counted in cell (l, f): of known target.
func (s *Stats) cellRows(l, f int) uint64 {
	if s.Task == Regression {
		return uint64(s.cnt.row(l)[f])
	}
	var n uint64
	for c := 0; c < s.Classes; c++ {
		n += s.cls.get(l, f*s.Classes+c)
	}
	return n
}

// partialReader reads a partial's fields, every length checked against
// the bytes left.
type partialReader struct {
	b   []byte
	err error
}

func (r *partialReader) uvarint(max uint64) uint64 {
	if r.err != nil {
		return 0
	}
	v, n := binary.Uvarint(r.b)
	if n <= 0 || v > max {
		r.err = ErrPartial
		return 0
	}
	r.b = r.b[n:]
	return v
}

func (r *partialReader) bytes(n uint64) []byte {
	if r.err != nil {
		return nil
	}
	if n > uint64(len(r.b)) {
		r.err = ErrPartial
		return nil
	}
	out := r.b[:n]
	r.b = r.b[n:]
	return out
}

// MergePartial adds the levels of a partial (AppendPartial) to s: the same
// task, folds and classes (classes in the same order), a regression
// target's sums moved exactly from the partial's origin to s's. extra,
// when not nil, is given each level's slot in s and its extra bytes. s
// must not be sealed. Bytes that are not such a partial give an error
// wrapping ErrPartial, and allocate no more than they hold.
func (s *Stats) MergePartial(b []byte, extra func(l int, data []byte) error) error {
	r := &partialReader{b: b}
	if string(r.bytes(uint64(len(partialMagic)))) != string(partialMagic) || r.err != nil {
		return fmt.Errorf("%w: no magic bytes", ErrPartial)
	}
	tb := r.bytes(1)
	folds := r.uvarint(math.MaxInt32)
	classes := r.uvarint(math.MaxInt32)
	ob := r.bytes(8)
	if r.err != nil {
		return r.err
	}
	if task := Task(tb[0]); task != s.Task || folds != uint64(s.Folds) || classes != uint64(s.Classes) {
		return fmt.Errorf("%w: %s with %d folds and %d classes, not %s with %d and %d", ErrPartial, Task(tb[0]), folds, classes, s.Task, s.Folds, s.Classes)
	}
	origin := math.Float64frombits(binary.LittleEndian.Uint64(ob))
	if math.IsNaN(origin) || math.IsInf(origin, 0) {
		return fmt.Errorf("%w: origin %v", ErrPartial, origin)
	}
	// Every level takes at least 4 bytes (key, rows, cells, extra).
	n := r.uvarint(uint64(len(r.b)) / 4)
	for i := uint64(0); i < n && r.err == nil; i++ {
		if err := s.mergeLevel(r, origin, extra); err != nil {
			return err
		}
	}
	if r.err == nil && len(r.b) != 0 {
		r.err = fmt.Errorf("%w: %d bytes after the last level", ErrPartial, len(r.b))
	}
	return r.err
}

// PartialLevels returns the number of levels a partial declares, at most
// what its bytes can hold (4 bytes a level), or 0 for bytes that are not
// a partial: room a merge may reserve before it reads them.
func PartialLevels(b []byte) int {
	r := &partialReader{b: b}
	if string(r.bytes(uint64(len(partialMagic)))) != string(partialMagic) {
		return 0
	}
	r.bytes(1)
	r.uvarint(math.MaxInt32)
	r.uvarint(math.MaxInt32)
	r.bytes(8)
	n := r.uvarint(uint64(len(r.b)) / 4)
	if r.err != nil {
		return 0
	}
	return int(n)
}

// PartialKeys calls each with the bytes of every level of a partial (nil
// and null true for the null level), in order, without merging them:
// what a merge needs to look its levels up first (pipeline.Preceding).
func PartialKeys(b []byte, each func(key []byte, null bool)) error {
	r := &partialReader{b: b}
	if string(r.bytes(uint64(len(partialMagic)))) != string(partialMagic) || r.err != nil {
		return fmt.Errorf("%w: no magic bytes", ErrPartial)
	}
	tb := r.bytes(1)
	if r.err != nil {
		return r.err
	}
	task := Task(tb[0])
	folds := r.uvarint(math.MaxInt32)
	classes := r.uvarint(math.MaxInt32)
	r.bytes(8)
	n := r.uvarint(uint64(len(r.b)) / 4)
	for i := uint64(0); i < n && r.err == nil; i++ {
		key := r.uvarint(uint64(len(r.b)))
		var k []byte
		if key > 0 {
			k = r.bytes(key - 1)
		}
		r.uvarint(math.MaxUint64) // rows
		cells := r.uvarint(folds)
		for j := uint64(0); j < cells && r.err == nil; j++ {
			r.uvarint(folds) // fold
			if task != Regression {
				for c := uint64(0); c < classes && r.err == nil; c++ {
					r.uvarint(math.MaxUint64)
				}
				continue
			}
			r.uvarint(math.MaxUint32)                  // rows
			r.bytes(r.uvarint(exactsum.MaxEncodedLen)) // sum
			r.bytes(r.uvarint(exactsum.MaxEncodedLen)) // sum of squares
		}
		r.bytes(r.uvarint(uint64(len(r.b)))) // extra
		if r.err == nil {
			each(k, key == 0)
		}
	}
	return r.err
}

// mergeLevel reads one level of a partial into s.
func (s *Stats) mergeLevel(r *partialReader, origin float64, extra func(l int, data []byte) error) error {
	key := r.uvarint(uint64(len(r.b)))
	d := 0
	if key > 0 {
		k := r.bytes(key - 1)
		if r.err != nil {
			return r.err
		}
		d = s.Level(k)
	}
	s.rows.add(d, r.uvarint(math.MaxUint64))
	cells := r.uvarint(uint64(s.Folds))
	last := -1
	for j := uint64(0); j < cells && r.err == nil; j++ {
		f := int(r.uvarint(uint64(s.Folds - 1)))
		if f <= last && r.err == nil {
			return fmt.Errorf("%w: folds out of order", ErrPartial)
		}
		last = f
		if s.Task != Regression {
			for c := 0; c < s.Classes; c++ {
				s.cls.add(d, f*s.Classes+c, r.uvarint(math.MaxUint64))
			}
			continue
		}
		cnt := r.uvarint(math.MaxUint32)
		var src cellSums
		for _, v := range []*exactsum.Sum{&src.sum, &src.sq} {
			if err := v.Decode(r.bytes(r.uvarint(exactsum.MaxEncodedLen))); err != nil && r.err == nil {
				r.err = fmt.Errorf("%w: %w", ErrPartial, err)
			}
		}
		if r.err != nil {
			return r.err
		}
		if cnt == 0 || uint64(s.cnt.row(d)[f])+cnt > math.MaxUint32 {
			return fmt.Errorf("%w: a cell of %d rows", ErrPartial, cnt)
		}
		exactsum.Recenter(cnt, &src.sum, &src.sq, origin, s.Origin)
		// Sums no table gives, once about this origin: past the float64
		// range (a target is finite, its square too), a negative sum of
		// squares, or bits finer than a sum of float64 values has
		// (multiples of 2^-1074) and of their squares (of 2^-2148). They
		// would outgrow, or not be, what the binary form reads back.
		if a, b := src.sum.Float64(), src.sq.Float64(); math.IsInf(a, 0) || math.IsInf(b, 0) || b < 0 || !src.sum.MultipleOf(-1074) || !src.sq.MultipleOf(-2148) {
			return fmt.Errorf("%w: a cell's sums %g and %g", ErrPartial, a, b)
		}
		p := s.pooled(d, f)
		p.sum.AddSum(&src.sum)
		p.sq.AddSum(&src.sq)
		s.cnt.row(d)[f] += uint32(cnt)
	}
	data := r.bytes(r.uvarint(uint64(len(r.b))))
	if r.err != nil {
		return r.err
	}
	if extra != nil {
		return extra(d, data)
	}
	return nil
}
