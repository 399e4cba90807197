package colstats

import (
	"fmt"
	"math"
	"math/bits"

	"manyfold/internal/hugemem"
)

// chunkBits sets the levels per chunk of a perLevel array (2^14).
const chunkBits = 14

// chunkShift returns the chunk size exponent of a perLevel array of width
// values per level: chunkBits up to 8 values, then smaller so that a chunk
// holds about 2^17 values whatever the width (2^4 levels at least): a
// chunk is allocated whole, and with many folds a chunk of 2^14 levels
// would be gigabytes.
func chunkShift(width int) uint {
	if width <= 8 {
		return chunkBits
	}
	return uint(max(4, chunkBits-(bits.Len(uint(width-1))-3)))
}

// wideChunkBits sets the rows per chunk of the wide class-count rows
// (2^10): few levels of a column are usually promoted, so their chunks are
// kept small.
const wideChunkBits = 10

// perLevel is an array of width values per index, stored in chunks of
// 2^bits indexes (bits 0 means chunkBits), so that growing never copies and
// never holds twice the memory.
type perLevel[T any] struct {
	width  int
	bits   uint
	chunks [][]T
	slab   hugemem.Slab[T] // where the chunks come from (huge pages once large)
}

// row returns the width values of index l.
func (p *perLevel[T]) row(l int) []T {
	c := p.chunks[l>>p.shift()]
	o := (l & (1<<p.shift() - 1)) * p.width
	return c[o : o+p.width : o+p.width]
}

// shift returns the chunk size exponent.
func (p *perLevel[T]) shift() uint {
	if p.bits == 0 {
		return chunkBits
	}
	return p.bits
}

// grow makes room for n indexes.
func (p *perLevel[T]) grow(n int) {
	for len(p.chunks)<<p.shift() < n {
		p.chunks = append(p.chunks, p.slab.Take(p.width<<p.shift()))
	}
}

// narrowCell is the type of a narrow class-count cell.
type narrowCell interface{ uint8 | uint16 }

// classCells holds, for every level l, width = Folds*Classes class counts
// (cell f*Classes+c: rows of level l in fold f of class c).
//
// Layout: every level has a narrow row of nw = max(width, 1+idxCells) cells
// of type N (uint8 in Stats: nw = max(width, 5) bytes per level; with
// uint16, 2*max(width, 3) bytes). A narrow cell holds a count up to
// max(N)-1. When a count would pass that, the level is promoted: its counts
// move to a wide row of width uint64 cells (8*width bytes) in wide, a
// chunked array of 2^wideChunkBits rows per chunk, and its narrow row then
// holds the marker max(N) in cell 0 and the wide row's index, little-endian,
// in cells 1..idxCells. A level's memory is thus nw*sizeof(N) bytes, plus
// 8*width bytes once promoted: for a binary target with 5 folds, 10 bytes
// for a level with fewer than 255 rows in each fold and class (a unique id),
// 90 bytes for a level with more (a postcode of a large table), against 40
// bytes for uint32 cells throughout. A level is promoted only once it has
// at least 255 rows, so the wide rows take at most 8*width/255 bytes per row
// of the table; being uint64, they never wrap.
//
// A level is promoted only by a count passing max(N)-1, so cell 0 of an
// unpromoted row never holds the marker.
type classCells[N narrowCell] struct {
	width  int // cells per level: Folds*Classes
	narrow perLevel[N]
	wide   perLevel[uint64]
	nwide  int // wide rows in use
}

// marker returns the value of cell 0 of a promoted narrow row.
func (k *classCells[N]) marker() N { return ^N(0) }

// idxCells returns the narrow cells after the marker that hold a wide row
// index (32 bits).
func idxCells[N narrowCell]() int {
	if uint64(^N(0)) == math.MaxUint8 {
		return 4
	}
	return 2
}

// cellBits returns the bits of a narrow cell.
func cellBits[N narrowCell]() uint {
	if uint64(^N(0)) == math.MaxUint8 {
		return 8
	}
	return 16
}

// newClassCells returns empty counts of width cells per level.
func newClassCells[N narrowCell](width int) classCells[N] {
	nw := 0
	if width > 0 {
		nw = max(width, 1+idxCells[N]())
	}
	return classCells[N]{
		width:  width,
		narrow: perLevel[N]{width: nw, bits: chunkShift(nw)},
		wide:   perLevel[uint64]{width: width, bits: wideChunkBits},
	}
}

// grow makes room for n levels.
func (k *classCells[N]) grow(n int) {
	if k.width > 0 {
		k.narrow.grow(n)
	}
}

// cells returns the counts of level l: the narrow cells (narrow[:width]),
// or, for a promoted level, the wide ones; the other is nil. With width 0
// both are empty.
func (k *classCells[N]) cells(l int) (narrow []N, wide []uint64) {
	if k.width == 0 {
		return nil, nil
	}
	row := k.narrow.row(l)
	if row[0] == k.marker() {
		return nil, k.wideOf(row)
	}
	return row[:k.width:k.width], nil
}

// wideOf returns the wide row a promoted narrow row points to.
func (k *classCells[N]) wideOf(row []N) []uint64 {
	var idx uint32
	b := cellBits[N]()
	for i := idxCells[N](); i >= 1; i-- {
		idx = idx<<b | uint32(row[i])
	}
	return k.wide.row(int(idx))
}

// promote moves the counts of the level whose narrow row is row to a new
// wide row and returns it.
func (k *classCells[N]) promote(row []N) []uint64 {
	if k.nwide == math.MaxUint32 {
		// Unreachable: it would take 255 * 2^32 rows.
		panic(fmt.Sprintf("colstats: more than %d levels with large class counts", uint32(math.MaxUint32)))
	}
	idx := k.nwide
	k.nwide++
	k.wide.grow(k.nwide)
	w := k.wide.row(idx)
	for i := range w {
		w[i] = uint64(row[i])
	}
	clear(row)
	row[0] = k.marker()
	b := cellBits[N]()
	for i := 1; i <= idxCells[N](); i++ {
		row[i] = N(uint32(idx) >> (b * uint(i-1)))
	}
	return w
}

// inc adds one to cell i of level l.
func (k *classCells[N]) inc(l, i int) {
	row := k.narrow.row(l)
	m := k.marker()
	if row[0] == m {
		k.wideOf(row)[i]++
		return
	}
	if row[i] == m-1 {
		k.promote(row)[i]++
		return
	}
	row[i]++
}

// add adds v to cell i of level l.
func (k *classCells[N]) add(l, i int, v uint64) {
	if v == 0 {
		return
	}
	row := k.narrow.row(l)
	m := k.marker()
	switch {
	case row[0] == m:
		k.wideOf(row)[i] += v
	case v > uint64(m-1-row[i]):
		k.promote(row)[i] += v
	default:
		row[i] += N(v)
	}
}

// set sets cell i of level l to v.
func (k *classCells[N]) set(l, i int, v uint64) {
	row := k.narrow.row(l)
	m := k.marker()
	switch {
	case row[0] == m:
		k.wideOf(row)[i] = v
	case v > uint64(m-1):
		k.promote(row)[i] = v
	default:
		row[i] = N(v)
	}
}

// get returns cell i of level l.
func (k *classCells[N]) get(l, i int) uint64 {
	nr, wr := k.cells(l)
	if wr != nil {
		return wr[i]
	}
	return uint64(nr[i])
}

// sum returns the sum of the cells of level l.
func (k *classCells[N]) sum(l int) uint64 {
	nr, wr := k.cells(l)
	if wr != nil {
		return sumCells(wr)
	}
	return sumCells(nr)
}

// sumCells returns the sum of row.
func sumCells[T uint8 | uint16 | uint64](row []T) uint64 {
	var n uint64
	for _, v := range row {
		n += uint64(v)
	}
	return n
}

// totals adds the counts of every level to tot (len width): one
// sequential pass over the narrow rows, then one over the wide rows.
func (k *classCells[N]) totals(tot []uint64) {
	w, nw, m := k.width, k.narrow.width, k.marker()
	if w == 0 {
		return
	}
	for _, ch := range k.narrow.chunks {
		// Cells of levels not yet added are zero and add nothing.
		for i := 0; i+nw <= len(ch); i += nw {
			if ch[i] == m {
				continue // counted from its wide row
			}
			for j, v := range ch[i : i+w : i+w] {
				tot[j] += uint64(v)
			}
		}
	}
	for r := 0; r < k.nwide; r++ {
		for j, v := range k.wide.row(r) {
			tot[j] += v
		}
	}
}

// rowCounts holds a count per level, modulo 2^64: uint32 counts in chunks
// of 2^chunkBits levels, a chunk allocated only once some level in it has
// a count (4 bytes per level of such chunks, none otherwise; growing never
// copies). A count passing 2^32-1 keeps its higher 32 bits in hi, a map
// that is nil until some level needs it.
type rowCounts struct {
	chunks [][]uint32
	hi     map[int]uint32
	slab   hugemem.Slab[uint32]
}

// grow makes room for n levels.
func (r *rowCounts) grow(n int) {
	for len(r.chunks)<<chunkBits < n {
		r.chunks = append(r.chunks, nil)
	}
}

// at returns the low 32 bits of level l, allocating its chunk.
func (r *rowCounts) at(l int) *uint32 {
	c := &r.chunks[l>>chunkBits]
	if *c == nil {
		*c = r.slab.Take(1 << chunkBits)
	}
	return &(*c)[l&(1<<chunkBits-1)]
}

// inc adds one to level l.
func (r *rowCounts) inc(l int) {
	p := r.at(l)
	*p++
	if *p == 0 {
		r.carry(l, 1)
	}
}

// carry adds c to the higher 32 bits of level l, modulo 2^32.
func (r *rowCounts) carry(l int, c uint64) {
	if r.hi == nil {
		r.hi = make(map[int]uint32)
	}
	h := r.hi[l] + uint32(c)
	if h == 0 {
		delete(r.hi, l)
	} else {
		r.hi[l] = h
	}
}

// add adds n to level l, modulo 2^64.
func (r *rowCounts) add(l int, n uint64) {
	if n == 0 {
		return
	}
	p := r.at(l)
	lo := uint64(*p) + n&math.MaxUint32
	*p = uint32(lo)
	if c := n>>32 + lo>>32; c != 0 {
		r.carry(l, c)
	}
}

// get returns the count of level l.
func (r *rowCounts) get(l int) uint64 {
	c := r.chunks[l>>chunkBits]
	if c == nil {
		return 0
	}
	v := uint64(c[l&(1<<chunkBits-1)])
	if r.hi != nil {
		v |= uint64(r.hi[l]) << 32
	}
	return v
}

// set sets the count of level l to n.
func (r *rowCounts) set(l int, n uint64) {
	if n == 0 && r.chunks[l>>chunkBits] == nil {
		return
	}
	*r.at(l) = uint32(n)
	switch {
	case n>>32 != 0:
		if r.hi == nil {
			r.hi = make(map[int]uint32)
		}
		r.hi[l] = uint32(n >> 32)
	case r.hi != nil:
		delete(r.hi, l)
	}
}
