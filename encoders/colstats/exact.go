package colstats

import (
	"math"
	"runtime"
	"sync"

	"manyfold/encoders/exactsum"
)

// A regression target's cells are summed exactly (encoders/exactsum), so
// that they do not depend on the order of the rows: a table cut into
// shards, fitted shard by shard and merged, gives the same bits as the
// whole table read once. Each cell holds sum(y - Origin) and
// sum((y - Origin)^2) as exact values, rounded once when the pass ends
// (Seal), to the nearest float64.
//
// While rows are added, a cell keeps its row count (cnt) and one float64
// (raw): the row's target itself while the cell has one row, which is
// exact as it is; from the second row on, the index of its exact sums in
// pool, boxed in the payload of a NaN (a target is never NaN). A nearly
// unique id column thus costs 8 bytes more a cell, and only cells of two
// rows or more cost their exact sums (about 80 bytes).
//
// Seal rounds every cell into sum and sumSq (what Target and the fits
// read), and each level's total over the folds, rounded from its exact
// value too, into full: the full-data statistic of a level is the same
// whether the level's rows were counted in one pass or merged from
// shards, which a sum of its rounded fold cells would not be.

// cellSums are the exact sums of a cell of two rows or more.
type cellSums struct{ sum, sq exactsum.Sum }

const (
	boxTag  = 0x7ff8_0000_0000_0000 // a quiet NaN
	boxMask = 1<<51 - 1
)

func box(i int) float64    { return math.Float64frombits(boxTag | uint64(i)) }
func isBox(v float64) bool { return v != v }
func unbox(v float64) int  { return int(math.Float64bits(v) & boxMask) }

// poolChunk is the cells of a chunk of the pool (2^12): the pool grows a
// chunk at a time, so growing never copies the cells before.
const poolChunk = 12

// sumsPool holds exact sums, in chunks of 2^poolChunk: it grows a chunk
// at a time, so growing never copies the cells before. Stats and Running
// keep the exact sums of their cells of two rows or more in one.
type sumsPool struct {
	chunks [][]cellSums
	n      int
}

// add adds an empty cell and returns its index.
func (p *sumsPool) add() int {
	i := p.n
	if i>>poolChunk == len(p.chunks) {
		p.chunks = append(p.chunks, make([]cellSums, 1<<poolChunk))
	}
	p.n++
	return i
}

// at returns the cell of index i.
func (p *sumsPool) at(i int) *cellSums { return &p.chunks[i>>poolChunk][i&(1<<poolChunk-1)] }

// poolAt returns the cell of index i of the pool.
func (s *Stats) poolAt(i int) *cellSums { return s.pool.at(i) }

// pooled returns the exact sums of cell (l, f), moving a cell of one row
// (or none) into the pool first.
func (s *Stats) pooled(l, f int) *cellSums {
	r := &s.raw.row(l)[f]
	if isBox(*r) {
		return s.poolAt(unbox(*r))
	}
	i := s.pool.add()
	if s.cnt.row(l)[f] > 0 {
		p := s.poolAt(i)
		exactsum.AddDiff(&p.sum, &p.sq, *r, s.Origin)
	}
	*r = box(i)
	return s.poolAt(i)
}

// AddValue counts a row of level l in fold f with numeric target y: its
// cell adds y - Origin and its square, exactly. Origin must be set before
// the first row, and the statistics not yet sealed.
func (s *Stats) AddValue(l, f int, y float64) {
	s.rows.inc(l)
	c := &s.cnt.row(l)[f]
	if *c == 0 && !isBox(s.raw.row(l)[f]) {
		s.raw.row(l)[f] = y
	} else {
		p := s.pooled(l, f)
		exactsum.AddDiff(&p.sum, &p.sq, y, s.Origin)
	}
	*c++
}

// SetExact sets the cell of level l in fold f of a regression target to n
// rows whose exact sums about Origin are sum and sq (statistics read back
// from mapping tables, to be merged), leaving RowCount(l) as it was.
func (s *Stats) SetExact(l, f int, n uint32, sum, sq *exactsum.Sum) {
	p := s.pooled(l, f)
	p.sum.Set(sum)
	p.sq.Set(sq)
	s.cnt.row(l)[f] = n
}

// addCell adds to cell (l, f) of s the cell (ol, f) of o, exactly; o's
// sums are about o.Origin and are moved to s.Origin (exactsum.Recenter).
// Statistics without exact sums (read back rounded) add their rounded
// sums as if exact.
func (s *Stats) addCell(l, f int, o *Stats, ol int) {
	n := o.cnt.row(ol)[f]
	if n == 0 {
		return
	}
	var src cellSums
	switch {
	case !o.exact:
		src.sum.Add(o.sum.row(ol)[f])
		src.sq.Add(o.sumSq.row(ol)[f])
	case !isBox(o.raw.row(ol)[f]):
		y := o.raw.row(ol)[f]
		if s.cnt.row(l)[f] == 0 && !isBox(s.raw.row(l)[f]) {
			s.raw.row(l)[f] = y // one row: the target itself
			s.cnt.row(l)[f] = 1
			return
		}
		exactsum.AddDiff(&src.sum, &src.sq, y, s.Origin)
		p := s.pooled(l, f)
		p.sum.AddSum(&src.sum)
		p.sq.AddSum(&src.sq)
		s.cnt.row(l)[f] += n
		return
	default:
		op := o.poolAt(unbox(o.raw.row(ol)[f]))
		src.sum.Set(&op.sum)
		src.sq.Set(&op.sq)
	}
	exactsum.Recenter(uint64(n), &src.sum, &src.sq, o.Origin, s.Origin)
	p := s.pooled(l, f)
	p.sum.AddSum(&src.sum)
	p.sq.AddSum(&src.sq)
	s.cnt.row(l)[f] += n
}

// exactCell adds the exact sums of cell (l, f) to sum and sq.
func (s *Stats) exactCell(l, f int, sum, sq *exactsum.Sum) {
	if s.cnt.row(l)[f] == 0 {
		return
	}
	if !s.exact {
		sum.Add(s.sum.row(l)[f])
		sq.Add(s.sumSq.row(l)[f])
		return
	}
	r := s.raw.row(l)[f]
	if !isBox(r) {
		exactsum.AddDiff(sum, sq, r, s.Origin)
		return
	}
	p := s.poolAt(unbox(r))
	sum.AddSum(&p.sum)
	sq.AddSum(&p.sq)
}

// ExactTarget returns the exact sums about Origin of the target of level
// l over all folds: what a mapping table records beside the rounded ones.
func (s *Stats) ExactTarget(l int) (sum, sq exactsum.Sum) {
	for f := 0; f < s.Folds; f++ {
		s.exactCell(l, f, &sum, &sq)
	}
	return sum, sq
}

// ExactTargets calls each(i, n, sum, sq) with the rows of known target n
// and the exact sums of level ls[i], as ExactTarget gives them, for every
// i in order. It reads the levels'
// cells a group at a time in a loop that does nothing else, so that the
// cache misses of levels scattered over memory (ls in canonical order)
// overlap, then computes the sums from the copies.
func (s *Stats) ExactTargets(ls []int, each func(i int, n uint64, sum, sq *exactsum.Sum)) {
	const group = 256
	k := s.Folds
	cnt := make([]uint32, group*k)
	raw := make([]float64, group*k)
	var sum, sq exactsum.Sum // one of each, reused: each takes their address
	for from := 0; from < len(ls); from += group {
		part := ls[from:min(from+group, len(ls))]
		if s.exact {
			for j, l := range part {
				for f, c := range s.cnt.row(l) {
					cnt[j*k+f] = c
				}
			}
			for j, l := range part {
				for f, r := range s.raw.row(l) {
					raw[j*k+f] = r
				}
			}
		}
		for j, l := range part {
			sum, sq = exactsum.Sum{}, exactsum.Sum{}
			var n uint64
			if !s.exact {
				sum, sq = s.ExactTarget(l)
				for _, c := range s.cnt.row(l) {
					n += uint64(c)
				}
			} else {
				for f, c := range cnt[j*k : (j+1)*k] {
					n += uint64(c)
					switch r := raw[j*k+f]; {
					case c == 0:
					case !isBox(r):
						exactsum.AddDiff(&sum, &sq, r, s.Origin)
					default:
						p := s.poolAt(unbox(r))
						sum.AddSum(&p.sum)
						sq.AddSum(&p.sq)
					}
				}
			}
			each(from+j, n, &sum, &sq)
		}
	}
}

// Seal ends the adding of a regression target's rows: every cell's exact
// sums are rounded into the sums Target and the fits read, and each
// level's total over the folds is rounded from its exact value. Later
// rows cannot be added; merges and roll-ups still read the exact sums. A
// no-op for classification and for sealed statistics.
func (s *Stats) Seal() {
	if s.Task != Regression || s.sealed {
		return
	}
	s.sealed = true
	s.growSealed()
	// Levels are sealed independently: a large column's levels are split
	// among goroutines (the result does not depend on how).
	parts := 1
	if s.n >= 1<<20 {
		parts = min(runtime.GOMAXPROCS(0), 8)
	}
	var wg sync.WaitGroup
	for p := range parts {
		wg.Add(1)
		go func() {
			defer wg.Done()
			s.sealLevels(p*s.n/parts, (p+1)*s.n/parts)
		}()
	}
	wg.Wait()
}

// sealLevels seals the levels from <= l < to.
func (s *Stats) sealLevels(from, to int) {
	for l := from; l < to; l++ {
		cnt, raw := s.cnt.row(l), s.raw.row(l)
		sum, sq, full := s.sum.row(l), s.sumSq.row(l), s.full.row(l)
		cells, last := 0, 0
		for f := range cnt {
			if cnt[f] == 0 {
				continue
			}
			cells, last = cells+1, f
			if isBox(raw[f]) {
				p := s.poolAt(unbox(raw[f]))
				sum[f], sq[f] = p.sum.Float64(), p.sq.Float64()
			} else {
				sum[f], sq[f] = exactsum.Diff(raw[f], s.Origin)
			}
		}
		switch cells {
		case 0:
		case 1:
			full[0], full[1] = sum[last], sq[last]
		default:
			a, b := s.ExactTarget(l)
			full[0], full[1] = a.Float64(), b.Float64()
		}
	}
}

// growSealed makes room in the rounded sums for every level slot.
func (s *Stats) growSealed() {
	if s.sum.width == 0 {
		sh := chunkShift(s.Folds)
		s.sum.width, s.sumSq.width, s.full.width = s.Folds, s.Folds, 2
		s.sum.bits, s.sumSq.bits = sh, sh
	}
	s.sum.grow(s.n)
	s.sumSq.grow(s.n)
	if s.exact {
		s.full.grow(s.n)
	}
}
