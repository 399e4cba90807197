package colstats

import "manyfold/encoders/exactsum"

// Running holds what the ordered scheme encodes a row from: per level and
// output, the statistics of the level's rows read so far (Agg), to which
// each row is added after it is encoded (the ordered target statistic,
// Prokhorenkova et al., "CatBoost: unbiased boosting with categorical
// features", NeurIPS 2018, section 3.2).
//
// A regression target's sums are exact (package exactsum) and rounded
// once per row read, as a sealed cell of Stats is: the running statistics
// of a level do not depend on how its earlier rows were grouped, so a
// shard of a table may start from the sums of the shards before it
// (Start) and give the bits of the one pass. A level of one row keeps
// that row's y in raw when y - origin rounds, and nothing more when it is
// exact (its Agg.Sum is then the exact difference, and raw is left
// untouched: a nearly unique id column's pages of raw are mostly never
// written); from the second row its exact sums are pooled, as Stats does.
// Class counts are integers, exact as float64 below 2^53.
type Running struct {
	outs       int
	regression bool
	origin     float64
	agg        []Agg // [l*outs+o], what Agg returns

	// Regression only, per level: 0 (for a level of one row: its exact
	// difference is agg.Sum), the one row's y, or the index of its exact
	// sums in pool boxed in a NaN (y is never 0 there: 0 - origin is
	// exact).
	raw  []float64
	pool sumsPool
}

// NewRunning returns empty running statistics of n levels and outs
// outputs, for statistics of task; a regression target's sums are taken
// about origin (Stats.Origin).
func NewRunning(n, outs int, task Task, origin float64) *Running {
	r := &Running{outs: outs, regression: task == Regression, origin: origin, agg: make([]Agg, n*outs)}
	if r.regression {
		r.raw = make([]float64, n)
	}
	return r
}

// Agg returns the statistics of the rows of level l added so far, for
// output o.
func (r *Running) Agg(l, o int) Agg { return r.agg[l*r.outs+o] }

// AddClass adds a row of level l whose contribution to output o is y (1
// for a row of the output's class, else 0).
func (r *Running) AddClass(l, o int, y float64) {
	a := &r.agg[l*r.outs+o]
	a.N++
	a.Sum += y
	a.SumSq += y * y
}

// AddValue adds a row of level l with regression target y (finite): the
// level's sums of y - origin and its square grow exactly and are rounded
// again.
func (r *Running) AddValue(l int, y float64) {
	a := &r.agg[l*r.outs]
	if a.N == 0 {
		// y - origin rounded is the sum; when it is exact (TwoSum's
		// error 0), its square rounded once is the sum of squares.
		if d, t := exactsum.TwoSum(y, -r.origin); t == 0 {
			*a = Agg{N: 1, Sum: d, SumSq: d * d}
			return
		}
		r.raw[l] = y
		var sum, sq exactsum.Sum
		exactsum.AddDiff(&sum, &sq, y, r.origin)
		*a = Agg{N: 1, Sum: sum.Float64(), SumSq: sq.Float64()}
		return
	}
	p := r.cell(l)
	exactsum.AddDiff(&p.sum, &p.sq, y, r.origin)
	*a = Agg{N: a.N + 1, Sum: p.sum.Float64(), SumSq: p.sq.Float64()}
}

// cell returns the exact sums of level l, pooling them first if the
// level has none.
func (r *Running) cell(l int) *cellSums {
	x := r.raw[l]
	if isBox(x) {
		return r.pool.at(unbox(x))
	}
	i := r.pool.add()
	r.raw[l] = box(i)
	p := r.pool.at(i)
	switch a := r.agg[l*r.outs]; {
	case a.N == 0:
	case x == 0: // the exact difference
		exactsum.AddDiff(&p.sum, &p.sq, a.Sum, 0)
	default:
		exactsum.AddDiff(&p.sum, &p.sq, x, r.origin)
	}
	return p
}

// Start adds, to level l, the rows of level bl of before (statistics of
// the same classes in the same slots, not sealed: the rows before a shard
// of the table) over all folds. With one output, a classification target
// is binary and its output counts class slot pos; with more, output o
// counts class slot o. Rows of unknown target are not counted, as AddClass
// and AddValue are not called for them.
func (r *Running) Start(l int, before *Stats, bl, pos int) {
	if !r.regression {
		var n uint64
		for c := range before.Classes {
			n += before.ClassCount(bl, c)
		}
		for o := range r.outs {
			c := o
			if r.outs == 1 {
				c = pos
			}
			k := float64(before.ClassCount(bl, c))
			a := &r.agg[l*r.outs+o]
			a.N += float64(n)
			a.Sum += k
			a.SumSq += k
		}
		return
	}
	sum, sq := before.ExactTarget(bl)
	var n uint64
	for f := 0; f < before.Folds; f++ {
		n += uint64(before.cnt.row(bl)[f])
	}
	if n == 0 {
		return
	}
	exactsum.Recenter(n, &sum, &sq, before.Origin, r.origin)
	a := &r.agg[l*r.outs]
	p := r.cell(l)
	p.sum.AddSum(&sum)
	p.sq.AddSum(&sq)
	*a = Agg{N: a.N + float64(n), Sum: p.sum.Float64(), SumSq: p.sq.Float64()}
}
