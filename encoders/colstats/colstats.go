// Package colstats gathers the per-level statistics of one categorical
// column that every manyfold encoder is derived from, split by fold, and
// turns them into encoded values.
//
// For a level c and fold f it holds the number of rows whose target is known
// and either the count of each target class (classification) or the sum and
// sum of squares of the target (regression); for each level it also holds
// the number of rows of any target (frequency, top-k). All of these are sums,
// so statistics gathered over two shards of a table merge, by addition, into
// those of the whole table (see Merge).
//
// Level 0 is the null level; level i > 0 is id i-1 of the level table.
package colstats

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"slices"
	"sort"

	"manyfold/encoders/levels"
	"manyfold/encoders/smooth"
	"manyfold/internal/hugemem"
)

// Task is the kind of target a statistic describes.
type Task uint8

// The tasks.
const (
	Binary Task = iota
	Multiclass
	Regression
)

var taskNames = [...]string{Binary: "binary", Multiclass: "multiclass", Regression: "regression"}

// String returns binary, multiclass or regression.
func (t Task) String() string {
	if int(t) < len(taskNames) {
		return taskNames[t]
	}
	return fmt.Sprintf("task(%d)", uint8(t))
}

// ParseTask parses a task name.
func ParseTask(s string) (Task, error) {
	for i, n := range taskNames {
		if n == s {
			return Task(i), nil
		}
	}
	return 0, fmt.Errorf("unknown task %q (want binary, multiclass or regression)", s)
}

// Stats holds the statistics of one column.
type Stats struct {
	Task    Task
	Folds   int // K >= 1
	Classes int // classification: number of class slots; regression: 0

	Levels *levels.Table

	// n is the number of level slots, the null slot included.
	n int

	// rows: per level, the rows not in the class counts (classification:
	// rows whose target is unknown, none in a table whose every target is
	// known, so that rows takes no memory; see rowCounts) or all rows
	// (regression). RowCount adds the class counts to it.
	rows rowCounts

	// Per level, in chunks of whole levels, so that growing never copies
	// and never holds twice the memory:
	// cls: rows of level l in fold f of class c at cell f*C+c
	// (classification), one byte per cell until a count passes 254 (see
	// classCells);
	// cnt.row(l)[f]: rows of level l in fold f whose target is known
	// (regression); raw and pool, their exact sums as they are added, and
	// once sealed sum and sumSq, the sum and the sum of squares of their
	// target about Origin, rounded, and full, the level's two sums over
	// all folds (see exact.go): 28 bytes per level and fold, 16 per level,
	// and the exact sums of the cells of two rows or more.
	cls        classCells[uint8]
	cnt        perLevel[uint32]
	raw        perLevel[float64]
	pool       sumsPool
	sum, sumSq perLevel[float64]
	full       perLevel[float64]
	// exact: raw and pool hold the cells' exact sums (false for
	// statistics read back rounded from mapping tables, and for compare's
	// views); sealed: sum, sumSq and full are set (Seal).
	exact, sealed bool

	// Origin is, for a regression target, the value its sums are taken
	// about: the cells hold sum(y - Origin) and sum((y - Origin)^2). A
	// target far from zero (a cost around 1e8) would otherwise lose every
	// digit of its spread when the within and between sums of squares are
	// formed, as SumSq - Sum^2/n cancels catastrophically (Chan, Golub and
	// LeVeque, "Algorithms for computing the sample variance", The American
	// Statistician 37(3), 1983: computing with shifted data). The fit takes
	// the first known target value, so shifting every target by c shifts
	// Origin by c and leaves the cells unchanged. 0 for classification.
	Origin float64

	// Parents, when set (a hierarchical prior), holds the parent group of
	// every level slot (-1: none, or several): the empirical-Bayes m is
	// then estimated from the spread of the level means around their
	// parents' (smooth.NestedMoments), as the prior a level is pulled to
	// is its parent's value.
	Parents []int32
}

// New returns empty statistics for k folds.
func New(task Task, k, classes int, sizeHint int) *Stats {
	s := &Stats{Task: task, Folds: k, Levels: levels.New(sizeHint), exact: task == Regression}
	if task != Regression {
		s.Classes = classes
	}
	s.grow(1) // the null level
	return s
}

// NumLevels returns the number of level slots, the null slot included.
func (s *Stats) NumLevels() int { return s.n }

// RowCount returns the rows of level slot l, whatever their target.
func (s *Stats) RowCount(l int) uint64 {
	if s.Task == Regression {
		return s.rows.get(l)
	}
	return s.cls.sum(l) + s.rows.get(l)
}

// SetRows sets the rows of level slot l (for statistics read back from
// mapping tables), before or after its class counts are set.
func (s *Stats) SetRows(l int, n uint64) {
	if s.Task != Regression {
		n -= s.cls.sum(l) // modulo 2^64 until the class counts are set
	}
	s.rows.set(l, n)
}

func (s *Stats) grow(n int) {
	if n <= s.n {
		return
	}
	s.n = n
	s.rows.grow(n)
	if s.Task == Regression {
		sh := chunkShift(s.Folds)
		s.cnt.width, s.raw.width = s.Folds, s.Folds
		s.cnt.bits, s.raw.bits = sh, sh
		s.cnt.grow(n)
		if s.exact {
			s.raw.grow(n)
		}
		if s.sealed {
			s.growSealed()
		}
	} else {
		if s.cls.width != s.Folds*s.Classes {
			s.cls = newClassCells[uint8](s.Folds * s.Classes)
		}
		s.cls.grow(n)
	}
}

// Level returns the slot of a level's bytes, adding it if new.
func (s *Stats) Level(b []byte) int {
	id := int(s.Levels.Intern(b)) + 1
	if id >= s.n {
		s.grow(id + 1)
	}
	return id
}

// LevelBatch sets slots[i] to Level(keys[i]) for every i, adding new
// levels in the order of keys, as calls of Level one by one would; ids is
// scratch of at least len(keys). It interns by levels.Table.InternBatch,
// which overlaps the cache misses of groups of keys.
func (s *Stats) LevelBatch(keys [][]byte, ids []uint32, slots []int32) {
	s.InternBatch(keys, ids, slots)
	s.Settle(s.Levels.Len())
}

// InternBatch is LevelBatch without making room for the new levels in the
// counters: it touches only Levels, so it may run while another goroutine
// counts rows of levels interned earlier. Settle must be called before
// the new slots are counted.
func (s *Stats) InternBatch(keys [][]byte, ids []uint32, slots []int32) {
	ids = ids[:len(keys)]
	s.Levels.InternBatch(keys, ids)
	for i, id := range ids {
		slots[i] = int32(id + 1)
	}
}

// Settle makes room in the counters for the first n levels of Levels (see
// InternBatch): n is Levels.Len() after the interning of the slots to be
// counted. NumLevels then counts them.
func (s *Stats) Settle(n int) { s.grow(n + 1) }

// LookupBatch sets slots[i] to Lookup(keys[i]) for every i; ids is scratch
// of at least len(keys). It looks up by levels.Table.LookupBatch.
func (s *Stats) LookupBatch(keys [][]byte, ids []uint32, slots []int32) {
	ids = ids[:len(keys)]
	s.Levels.LookupBatch(keys, ids)
	for i, id := range ids {
		if id == levels.NoID {
			slots[i] = -1
		} else {
			slots[i] = int32(id + 1)
		}
	}
}

// Lookup returns the slot of a level's bytes, or -1 when it was never seen.
func (s *Stats) Lookup(b []byte) int {
	id, ok := s.Levels.Lookup(b)
	if !ok {
		return -1
	}
	return int(id) + 1
}

// Bytes returns the text of level slot l (nil for the null level).
func (s *Stats) Bytes(l int) []byte {
	if l == 0 {
		return nil
	}
	return s.Levels.Level(uint32(l - 1))
}

// AddClasses widens the class slots to n (n >= Classes), keeping counts.
func (s *Stats) AddClasses(n int) {
	if n <= s.Classes || s.Task == Regression {
		return
	}
	old := s.cls
	s.Classes = n
	s.cls = newClassCells[uint8](s.Folds * n)
	s.cls.grow(s.n)
	if old.width == 0 {
		return
	}
	oc := old.width / s.Folds
	for l := 0; l < s.n; l++ {
		for f := 0; f < s.Folds; f++ {
			for c := 0; c < oc; c++ {
				s.cls.add(l, f*n+c, old.get(l, f*oc+c))
			}
		}
	}
}

// AddRow counts a row of level l whose target is unknown.
func (s *Stats) AddRow(l int) { s.rows.inc(l) }

// AddClass counts a row of level l in fold f with target class c.
func (s *Stats) AddClass(l, f, c int) {
	s.cls.inc(l, f*s.Classes+c)
}

// SetClass sets the count of class c of level l in fold f (for statistics
// read back from mapping tables), leaving RowCount(l) as it was.
func (s *Stats) SetClass(l, f, c int, v uint32) {
	i := f*s.Classes + c
	s.rows.add(l, s.cls.get(l, i)-uint64(v)) // modulo 2^64
	s.cls.set(l, i, uint64(v))
}

// SetValue sets the row count, target sum and sum of squares of level l in
// fold f of a regression target, the sums taken about Origin and rounded
// (statistics read back from mapping tables, to be applied): the
// statistics hold no exact sums then, and are sealed.
func (s *Stats) SetValue(l, f int, n uint32, sum, sumSq float64) {
	if !s.sealed {
		s.exact, s.sealed = false, true
		s.growSealed()
	}
	s.cnt.row(l)[f], s.sum.row(l)[f], s.sumSq.row(l)[f] = n, sum, sumSq
}

// ClassCount returns the rows of level l of class c over all folds.
func (s *Stats) ClassCount(l, c int) uint64 {
	nr, wr := s.cls.cells(l)
	if wr != nil {
		return classCount(wr, s.Classes, c)
	}
	return classCount(nr, s.Classes, c)
}

// classCount returns the sum of row[f*classes+c] over the folds f.
func classCount[T uint8 | uint64](row []T, classes, c int) uint64 {
	var n uint64
	for i := c; i < len(row); i += classes {
		n += uint64(row[i])
	}
	return n
}

// ClassTotals2 returns the rows of level l of class 0 and of class 1 over
// all folds, for statistics with two classes: ClassCount(l, 0) and
// ClassCount(l, 1) from one read of the level's counts.
func (s *Stats) ClassTotals2(l int) (n0, n1 uint64) {
	nr, wr := s.cls.cells(l)
	if wr != nil {
		return totals2(wr)
	}
	return totals2(nr)
}

// ClassTotals2s sets n0[i] and n1[i] to ClassTotals2(ls[i]) and rows[i]
// to RowCount(ls[i]) for every i, for statistics with two classes. It
// gives the same counts as those calls, faster when the levels are
// scattered over more memory than the cache holds (a table written in
// canonical order): each level's counts are fetched by a loop that does
// nothing else, so that their cache misses overlap.
func (s *Stats) ClassTotals2s(ls []int, n0, n1, rows []int64) {
	c := &s.cls
	var head [cellGroup]uint8
	for g := 0; g < len(ls); g += cellGroup {
		grp := ls[g:min(g+cellGroup, len(ls))]
		loadHeads(c, grp, &head)
		for j, l := range grp {
			var all, k1 uint64
			if c.width > 0 {
				if nr, wr := c.cellsAt(l, head[j]); wr != nil {
					all, _, k1, _ = foldCounts2(wr, -1, 1)
				} else {
					all, _, k1, _ = foldCounts2(nr, -1, 1)
				}
			}
			i := g + j
			n0[i], n1[i] = int64(all-k1), int64(k1)
			rows[i] = int64(all + s.rows.get(l))
		}
	}
}

// OutOfFold2s sets, for every row i of a table with two classes, n[i]
// and k[i] to the rows of level ls[i] outside fold fold[i] and those of
// them of class slot pos (what Target(ls[i], 0, fold[i], pos) gives as N
// and Sum), and rows[i] to RowCount(ls[i]): one read of each row's counts
// serves both its out-of-fold target statistic and its frequency. A
// negative ls[i] (a level not seen) gives zeros. As in ClassTotals2s, the
// counts of a group of rows are loaded by a loop of their own, so that
// their cache misses overlap.
func (s *Stats) OutOfFold2s(ls, fold []int32, pos int, n, k, rows []uint64) {
	c := &s.cls
	var head [cellGroup]uint8
	for g := 0; g < len(ls); g += cellGroup {
		grp := ls[g:min(g+cellGroup, len(ls))]
		loadHeads(c, grp, &head)
		for j, l32 := range grp {
			i := g + j
			if l32 < 0 {
				n[i], k[i], rows[i] = 0, 0, 0
				continue
			}
			l := int(l32)
			var all, in, kAll, kIn uint64
			if c.width > 0 {
				if nr, wr := c.cellsAt(l, head[j]); wr != nil {
					all, in, kAll, kIn = foldCounts2(wr, int(fold[i]), pos)
				} else {
					all, in, kAll, kIn = foldCounts2(nr, int(fold[i]), pos)
				}
			}
			n[i], k[i] = all-in, kAll-kIn
			rows[i] = all + s.rows.get(l)
		}
	}
}

// cellGroup is the number of levels whose first cells ClassTotals2s and
// OutOfFold2s load (loadHeads) before reading any level's counts.
const cellGroup = 32

// loadHeads sets head[j] to the first narrow cell of level grp[j] (a
// negative level is passed over), by a loop that does nothing else: the
// loads of the group are then in flight at once, and the reads of their
// counts that follow find the rows in the cache.
func loadHeads[L int | int32](c *classCells[uint8], grp []L, head *[cellGroup]uint8) {
	if c.width == 0 {
		return
	}
	nw, sh := c.narrow.width, c.narrow.shift()
	mask, chunks := 1<<sh-1, c.narrow.chunks
	for j, l := range grp {
		if l >= 0 {
			head[j] = chunks[int(l)>>sh][(int(l)&mask)*nw]
		}
	}
}

// cellsAt is cells for level l whose first narrow cell is head (loadHeads).
func (k *classCells[N]) cellsAt(l int, head N) (narrow []N, wide []uint64) {
	row := k.narrow.row(l)
	if head == k.marker() {
		return nil, k.wideOf(row)
	}
	return row[:k.width:k.width], nil
}

// foldCounts2 returns, for the cells of a level with two classes, its rows
// of all folds and of fold f, and those of class pos of all folds and of
// fold f (f outside the folds counts no rows as in it).
func foldCounts2[T uint8 | uint64](row []T, f, pos int) (all, in, kAll, kIn uint64) {
	for i := 0; i+1 < len(row); i += 2 {
		all += uint64(row[i]) + uint64(row[i+1])
		kAll += uint64(row[i+pos])
	}
	if i := 2 * f; f >= 0 && i+1 < len(row) {
		in = uint64(row[i]) + uint64(row[i+1])
		kIn = uint64(row[i+pos])
	}
	return all, in, kAll, kIn
}

// AppendBytes appends Bytes(l) for every l of ls to data and, after each,
// the length of data to ends (see levels.Table.AppendLevels).
func (s *Stats) AppendBytes(data []byte, ends []int32, ls []int) ([]byte, []int32) {
	var ids [256]uint32
	for len(ls) > 0 {
		n := min(len(ls), len(ids))
		for i, l := range ls[:n] {
			ids[i] = uint32(l - 1) // the null slot 0: an id not in the table
		}
		data, ends = s.Levels.AppendLevels(data, ends, ids[:n])
		ls = ls[n:]
	}
	return data, ends
}

// totals2 returns the sums of the even and of the odd cells of row.
func totals2[T uint8 | uint64](row []T) (n0, n1 uint64) {
	for f := 0; f+1 < len(row); f += 2 {
		n0 += uint64(row[f])
		n1 += uint64(row[f+1])
	}
	return n0, n1
}

// Agg is the target statistic of a set of rows for one output: n rows and
// the sum of the target (the count of the class for classification) and of
// its square; for regression, of the target less the Stats' Origin.
type Agg struct{ N, Sum, SumSq float64 }

// Outputs returns the number of target outputs: 1 for binary and
// regression, the number of classes for multi-class.
func (s *Stats) Outputs() int {
	if s.Task == Multiclass {
		return s.Classes
	}
	return 1
}

// Target returns the statistic of level l for output o over the rows of all
// folds but exclude (exclude < 0: all folds). For binary the positive class
// is class slot pos.
//
// For a binary target with two class slots it sums the level's counts in
// one loop over the folds without a fold mask: n = sum over folds f !=
// exclude of count(f,0)+count(f,1), k = the same sum of count(f,pos),
// giving Agg{n, k, k} as TargetMask does.
func (s *Stats) Target(l, o, exclude, pos int) Agg {
	if s.Task == Binary && s.Classes == 2 && uint(pos) < 2 {
		var n, k uint64
		if nr, wr := s.cls.cells(l); wr != nil {
			n, k = binaryCounts(wr, exclude, pos)
		} else {
			n, k = binaryCounts(nr, exclude, pos)
		}
		return Agg{N: float64(n), Sum: float64(k), SumSq: float64(k)}
	}
	return s.targetMask(l, o, pos, nil, exclude)
}

// binaryCounts returns, for the cells of a level with two classes, the
// rows n and the rows k of class pos over all folds but exclude.
func binaryCounts[T uint8 | uint64](row []T, exclude, pos int) (n, k uint64) {
	for f := 0; f+1 < len(row); f += 2 {
		if f != 2*exclude {
			n += uint64(row[f]) + uint64(row[f+1])
			k += uint64(row[f+pos])
		}
	}
	return n, k
}

// TargetMask returns the statistic of level l for output o over the rows
// of the folds f with use[f] (len(use) == Folds). It is Target for an
// arbitrary set of folds: compare keeps outer and inner folds as the cells
// of one Stats and sums the cells a fit may see. For binary the positive
// class is class slot pos.
func (s *Stats) TargetMask(l, o, pos int, use []bool) Agg {
	return s.targetMask(l, o, pos, use, -1)
}

// targetMask is TargetMask over the folds f with use[f] (nil: every fold)
// and f != exclude: Target's fold set without a mask per fold, so that
// memory stays linear in the folds.
func (s *Stats) targetMask(l, o, pos int, use []bool, exclude int) Agg {
	var a Agg
	if s.Task == Regression {
		cnt, sum, sq := s.cnt.row(l), s.sum.row(l), s.sumSq.row(l)
		if use == nil && exclude < 0 && s.full.chunks != nil {
			for _, c := range cnt {
				a.N += float64(c)
			}
			full := s.full.row(l)
			a.Sum, a.SumSq = full[0], full[1]
			return a
		}
		for f := 0; f < s.Folds; f++ {
			if (use == nil || use[f]) && f != exclude {
				a.N += float64(cnt[f])
				a.Sum += sum[f]
				a.SumSq += sq[f]
			}
		}
		return a
	}
	if s.Task == Binary {
		o = pos
	}
	var n, k uint64
	if nr, wr := s.cls.cells(l); wr != nil {
		n, k = maskCounts(wr, s.Classes, o, use, exclude)
	} else {
		n, k = maskCounts(nr, s.Classes, o, use, exclude)
	}
	a.N, a.Sum, a.SumSq = float64(n), float64(k), float64(k)
	return a
}

// maskCounts returns, for the cells of a level, the rows n and the rows k
// of class o over the folds f with use[f] (nil: every fold) and f !=
// exclude.
func maskCounts[T uint8 | uint64](row []T, classes, o int, use []bool, exclude int) (n, k uint64) {
	for f := 0; f < len(row)/classes; f++ {
		if (use != nil && !use[f]) || f == exclude {
			continue
		}
		for _, v := range row[f*classes : (f+1)*classes] {
			n += uint64(v)
		}
		k += uint64(row[f*classes+o])
	}
	return n, k
}

// FitMask is Fit over the rows of the folds f with use[f] instead of all
// folds but one.
func (s *Stats) FitMask(o, pos int, sm Smoothing, use, keep []bool, order []uint32) Fitted {
	return s.fitMask(o, pos, sm, use, -1, keep, order)
}

// fitMask is FitMask over the folds f with use[f] (nil: every fold) and f
// != exclude.
func (s *Stats) fitMask(o, pos int, sm Smoothing, use []bool, exclude int, keep []bool, order []uint32) Fitted {
	var acc fitAcc
	nested := s.Parents != nil && sm.Kind == SmoothEB
	n := s.n
	if order != nil {
		n = len(order)
	}
	for i := 0; i < n; i++ {
		l := i
		if order != nil {
			l = int(order[i])
		}
		s.fitAdd(&acc, l, o, pos, use, exclude, keep, nested)
	}
	return s.fitEnd(&acc, sm, nested)
}

// fitAcc gathers a fit over the levels: the fitting rows' total and the
// moments of the levels' means for empirical Bayes.
type fitAcc struct {
	tot Agg
	mo  smooth.Moments
	nm  smooth.NestedMoments
}

// fitAdd adds level l's statistics of output o, over the folds f with
// use[f] (nil: every fold) and f != exclude, to acc.
func (s *Stats) fitAdd(acc *fitAcc, l, o, pos int, use []bool, exclude int, keep []bool, nested bool) {
	a := s.targetMask(l, o, pos, use, exclude)
	acc.tot.N += a.N
	acc.tot.Sum += a.Sum
	if a.N > 0 && (keep == nil || keep[l]) {
		ls := smooth.LevelStats{N: a.N, Sum: a.Sum, SumSq: a.SumSq}
		if nested {
			p := -1
			if l < len(s.Parents) {
				p = int(s.Parents[l])
			}
			acc.nm.Add(ls, p)
		} else {
			acc.mo.Add(ls)
		}
	}
}

// fitEnd returns the fit gathered in acc.
func (s *Stats) fitEnd(acc *fitAcc, sm Smoothing, nested bool) Fitted {
	m := math.NaN()
	if sm.Kind == SmoothEB {
		if nested {
			m, _, _ = acc.nm.Estimate()
		} else {
			m, _, _ = acc.mo.Estimate()
		}
	}
	return fitted(acc.tot, m, sm, s.Origin)
}

// SmoothKind names a way of pulling a level's mean towards its prior.
type SmoothKind uint8

// The smoothings: the m-estimate with m estimated by empirical Bayes, the
// m-estimate with a given m, the sigmoid blend.
const (
	SmoothEB SmoothKind = iota
	SmoothM
	SmoothBlend
)

// String returns eb, m or blend.
func (k SmoothKind) String() string { return [...]string{"eb", "m", "blend"}[k] }

// Smoothing names how a level's mean is pulled towards its prior.
type Smoothing struct {
	Kind SmoothKind
	M    float64 // m-estimate weight (SmoothM)
	K, F float64 // blend midpoint and steepness (SmoothBlend)
	// Interior keeps a class rate strictly inside (0, 1), for a log-odds
	// output: in the blend (whose weight rounds to 1 for large n) and in
	// an m-estimate with m = 0, a level's own rate enters as
	// (s + 1/2)/(n + 1), the Haldane-Anscombe correction (Haldane, Annals
	// of Human Genetics 20, 1956; Anscombe, Biometrika 43, 1956), which
	// lies strictly between 0 and 1 for every n >= 0 and s in [0, n]. (Only
	// where the weight is exactly 1 would do, but a weight of 1 - 1e-16
	// would then leave 1e-16 of the prior: a log-odds of -37.)
	Interior bool
}

// Fitted holds, for one output and one set of fitting rows, the prior and
// the smoothing weight that encode a level's statistic.
type Fitted struct {
	Prior float64
	M     float64 // the m in use: given, or estimated (SmoothEB); NaN for a blend
	Sm    Smoothing
	// Origin is the Stats' Origin: the statistics Encode takes are sums
	// about it, while Prior and the encoded values are the target's own.
	Origin float64
}

// Encode returns the smoothed mean of a level with statistic a: the
// m-estimate (s + m*p)/(n + m) (Cestnik 1990) for SmoothM and SmoothEB, the
// sigmoid blend lambda*s/n + (1-lambda)*p (Micci-Barreca 2001) for
// SmoothBlend.
// A level with no rows gets the prior. With an infinite m (empirical Bayes found no
// between-level variance) every level gets the prior.
//
// With an Origin o (regression), a holds sums about o, and the value is
// o + the same formula over those sums with the prior p - o: the formulas
// are affine in the target, so this is the same value, computed from
// numbers of the size of the target's spread rather than of its level.
func (ft *Fitted) Encode(a Agg) float64 {
	if a.N == 0 {
		return ft.Prior
	}
	if ft.Sm.Kind != SmoothBlend && math.IsInf(ft.M, 1) {
		return ft.Prior
	}
	if ft.Sm.Interior {
		return ft.interior(a)
	}
	if o := ft.Origin; o != 0 {
		if ft.Sm.Kind == SmoothBlend {
			return o + smooth.Blend(a.Sum, a.N, ft.Sm.K, ft.Sm.F, ft.Prior-o)
		}
		return o + smooth.MEstimate(a.Sum, a.N, ft.M, ft.Prior-o)
	}
	if ft.Sm.Kind == SmoothBlend {
		return smooth.Blend(a.Sum, a.N, ft.Sm.K, ft.Sm.F, ft.Prior)
	}
	return smooth.MEstimate(a.Sum, a.N, ft.M, ft.Prior)
}

// interior is Encode for a class rate kept strictly inside (0, 1)
// (Smoothing.Interior): the blend lambda r + (1 - lambda) p, and for m = 0
// the rate r alone, with the level's rate r = (s + 1/2)/(n + 1) in place of
// s/n; an m-estimate with m > 0 is a weighted mean of s/n and a prior
// inside (0, 1), so inside too, and is left as it is. The result is
// strictly inside (0, 1) whenever the prior is (both classes among the
// fitting rows); a log-odds output still clips the prior's own edge cases.
func (ft *Fitted) interior(a Agg) float64 {
	r := (a.Sum + 0.5) / (a.N + 1)
	if ft.Sm.Kind == SmoothBlend {
		lambda := smooth.BlendWeight(a.N, ft.Sm.K, ft.Sm.F)
		return lambda*r + (1-lambda)*ft.Prior
	}
	if ft.M == 0 {
		return r
	}
	return smooth.MEstimate(a.Sum, a.N, ft.M, ft.Prior)
}

// FitFolds returns the fits of every output o that derive-style callers
// need: full[o] is Fit(o, -1, pos, sm, keep, order) and byFold[e][o] is
// Fit(o, e, pos, sm, keep, order) for every fold e (byFold is nil with one
// fold): with a canonical order, none depends on the order in which levels
// were first seen (a table read in shards gives the same fits). For classification with SmoothM or SmoothBlend a fit depends
// only on the per-fold totals of the counts, which are integers and sum
// exactly in any order: FitFolds then takes one sequential pass over the
// count cells (CellTotals, O(levels*Folds*Classes), no random access)
// instead of Outputs*(Folds+1) passes over the levels, with bit-identical
// results. SmoothEB and regression sum float moments in a fixed order and
// take the Fit path.
func (s *Stats) FitFolds(pos int, sm Smoothing, keep []bool, order []uint32) (full []Fitted, byFold [][]Fitted) {
	k, outs := s.Folds, s.Outputs()
	full = make([]Fitted, outs)
	if k > 1 {
		byFold = make([][]Fitted, k)
		for e := range byFold {
			byFold[e] = make([]Fitted, outs)
		}
	}
	if s.Task == Regression || sm.Kind == SmoothEB {
		// One pass over the levels in order gathers every fit: the same
		// sums, in the same order, as a pass per fit, each level's cells
		// read once.
		acc := make([]fitAcc, (k+1)*outs) // [(e+1)*outs+o], e = -1 for full
		nested := s.Parents != nil && sm.Kind == SmoothEB
		n := s.n
		if order != nil {
			n = len(order)
		}
		last := -1
		if byFold != nil {
			last = k - 1
		}
		for i := 0; i < n; i++ {
			l := i
			if order != nil {
				l = int(order[i])
			}
			for e := -1; e <= last; e++ {
				for o := 0; o < outs; o++ {
					s.fitAdd(&acc[(e+1)*outs+o], l, o, pos, nil, e, keep, nested)
				}
			}
		}
		for o := 0; o < outs; o++ {
			full[o] = s.fitEnd(&acc[o], sm, nested)
			for e := range byFold {
				byFold[e][o] = s.fitEnd(&acc[(e+1)*outs+o], sm, nested)
			}
		}
		return full, byFold
	}
	tot := s.CellTotals()
	C := s.Classes
	fit := func(o, exclude int) Fitted {
		if s.Task == Binary {
			o = pos
		}
		var n, kk uint64
		for f := 0; f < k; f++ {
			if f == exclude {
				continue
			}
			for c := 0; c < C; c++ {
				n += tot[f*C+c]
			}
			kk += tot[f*C+o]
		}
		return fitted(Agg{N: float64(n), Sum: float64(kk), SumSq: float64(kk)}, math.NaN(), sm, 0)
	}
	for o := 0; o < outs; o++ {
		full[o] = fit(o, -1)
		for e := range byFold {
			byFold[e][o] = fit(o, e)
		}
	}
	return full, byFold
}

// CellTotals returns, for classification, the rows of every fold f and
// class c over all levels at index f*Classes+c: one sequential pass over
// the count cells.
func (s *Stats) CellTotals() []uint64 {
	tot := make([]uint64, s.cls.width)
	s.cls.totals(tot)
	return tot
}

// Fit computes the prior (the mean target of the fitting rows) and, for
// SmoothEB, the empirical-Bayes m over the levels, for output o over
// all folds but exclude. keep reports which level slots count as seen
// (nil: all); levels left out still count towards the prior. order gives
// the slots in the order their statistics are summed (nil: slot order); a
// canonical order (Sorted) makes the result independent of the order in
// which levels were first seen.
func (s *Stats) Fit(o, exclude, pos int, sm Smoothing, keep []bool, order []uint32) Fitted {
	return s.fitMask(o, pos, sm, nil, exclude, keep, order)
}

// fitted returns the fit of the fitting rows' total tot, taken about
// origin, with the empirical-Bayes m estimated (used by SmoothEB).
func fitted(tot Agg, estimated float64, sm Smoothing, origin float64) Fitted {
	ft := Fitted{Sm: sm, M: math.NaN(), Origin: origin}
	if tot.N > 0 {
		ft.Prior = tot.Sum / tot.N
		if origin != 0 {
			ft.Prior += origin
		}
	} else {
		ft.Prior = math.NaN()
	}
	switch sm.Kind {
	case SmoothM:
		ft.M = sm.M
	case SmoothEB:
		ft.M = estimated
	}
	return ft
}

// Merge adds the statistics of o into s. Both must have the same task and
// folds; classes are matched by slot, so both must list classes in the same
// order (see the mapping package, which merges by class label). A
// regression target's sums add exactly; s must not be sealed, and is
// sealed by the caller once every merge is done.
func (s *Stats) Merge(o *Stats) error {
	if s.Task != o.Task || s.Folds != o.Folds {
		return fmt.Errorf("cannot merge %s statistics with %d folds into %s with %d", o.Task, o.Folds, s.Task, s.Folds)
	}
	s.AddClasses(o.Classes)
	for l := 0; l < o.n; l++ {
		d := 0
		if l > 0 {
			d = s.Level(o.Bytes(l))
		}
		s.rows.add(d, o.rows.get(l))
		s.addLevel(d, o, l)
	}
	return nil
}

// Sorted returns the level slots in a canonical order: the null level first
// (if it has rows), then levels by their bytes ascending. Slots with no
// rows are left out. It sorts compact keys (the first 8 bytes of each level
// as a big-endian number beside its slot, in two parallel arrays) by radix
// sort (sortKeys: in place, most significant byte first, down to buckets
// of at most lsdMax keys, which are finished least significant byte first
// through a scratch buffer of that size while they sit in the cache),
// comparing whole levels only among keys whose 8 bytes tie: O(n) passes
// over the keys for the prefix bytes. The slots are sorted in the returned
// array itself, so the memory beyond the result is 8 bytes per level, for
// the prefixes, plus the scratch buffer.
func (s *Stats) Sorted() []uint32 {
	n, null := 0, s.RowCount(0) > 0
	for l := 1; l < s.n; l++ {
		if s.RowCount(l) > 0 {
			n++
		}
	}
	out := hugemem.Make[uint32](n + 1)[:0]
	if null {
		out = append(out, 0)
	}
	start := len(out)
	pre := hugemem.Make[uint64](n)[:0]
	for l := 1; l < s.n; l++ {
		if s.RowCount(l) > 0 {
			out = append(out, uint32(l))
			pre = append(pre, prefix8(s.Bytes(l)))
		}
	}
	sc := &sortScratch{pre: make([]uint64, min(n, lsdMax)), slot: make([]uint32, min(n, lsdMax))}
	s.sortKeys(pre, out[start:], 56, sc)
	return out
}

// radixMin is the bucket size below which sortKeys compares keys instead of
// distributing them.
const radixMin = 48

// lsdMax is the largest bucket sortKeys finishes least significant byte
// first: 12 bytes a key, so that a bucket and its scratch (768 KiB) stay
// in a core's L2 cache through the passes. A variable so that tests
// exercise both sorts.
var lsdMax = 1 << 15

// sortScratch is the buffer of sortLSD.
type sortScratch struct {
	pre  []uint64
	slot []uint32
}

// sortKeys sorts the keys (pre[i], slot[i]) by (pre, level bytes), all
// keys agreeing on the prefix bits above shift+8: an in-place distribution
// on the byte at shift (American flag sort), then each bucket on the next
// byte. A bucket that is small, or whose 8 prefix bytes all tie, is
// finished by comparison.
func (s *Stats) sortKeys(pre []uint64, slot []uint32, shift int, sc *sortScratch) {
	for {
		if len(pre) < radixMin || shift < 0 {
			s.sortCompare(pre, slot, shift < 0)
			return
		}
		if len(pre) <= lsdMax {
			s.sortLSD(pre, slot, shift, sc)
			return
		}
		var count [256]int
		for _, p := range pre {
			count[byte(p>>uint(shift))]++
		}
		if count[byte(pre[0]>>uint(shift))] == len(pre) {
			shift -= 8 // one bucket: go to the next byte without moving
			continue
		}
		var start, end [256]int
		o := 0
		for b := range count {
			start[b] = o
			o += count[b]
			end[b] = o
		}
		next := start
		for b := 0; b < 256; b++ {
			for next[b] < end[b] {
				p, sl := pre[next[b]], slot[next[b]]
				d := int(byte(p >> uint(shift)))
				for d != b {
					// Place the key in its bucket and carry the key it
					// displaces.
					j := next[d]
					pre[j], p = p, pre[j]
					slot[j], sl = sl, slot[j]
					next[d]++
					d = int(byte(p >> uint(shift)))
				}
				pre[next[b]], slot[next[b]] = p, sl
				next[b]++
			}
		}
		for b := 0; b < 256; b++ {
			if end[b]-start[b] > 1 {
				s.sortKeys(pre[start[b]:end[b]], slot[start[b]:end[b]], shift-8, sc)
			}
		}
		return
	}
}

// sortLSD sorts the keys (pre[i], slot[i]) by (pre, level bytes), all
// keys agreeing on the prefix bits above shift+8 (len(pre) <= lsdMax): one
// pass counts every byte from shift down, then a stable distribution per
// byte, least significant first, between the keys and the scratch (a byte
// that all keys share is skipped); last, each run of keys whose 8 bytes tie
// is ordered by comparison.
func (s *Stats) sortLSD(pre []uint64, slot []uint32, shift int, sc *sortScratch) {
	n := len(pre)
	nb := shift/8 + 1
	var hist [8][256]int32
	for _, p := range pre {
		for b := 0; b < nb; b++ {
			hist[b][byte(p>>(8*uint(b)))]++
		}
	}
	src, ssrc := pre, slot
	dst, sdst := sc.pre[:n], sc.slot[:n]
	for b := 0; b < nb; b++ {
		h := &hist[b]
		sh := 8 * uint(b)
		if int(h[byte(src[0]>>sh)]) == n {
			continue
		}
		var off [256]int32
		var sum int32
		for i, c := range h {
			off[i] = sum
			sum += c
		}
		for i, p := range src {
			d := byte(p >> sh)
			j := off[d]
			off[d] = j + 1
			dst[j], sdst[j] = p, ssrc[i]
		}
		src, dst = dst, src
		ssrc, sdst = sdst, ssrc
	}
	if &src[0] != &pre[0] {
		copy(pre, src)
		copy(slot, ssrc)
	}
	for i := 0; i < n; {
		j := i + 1
		for j < n && pre[j] == pre[i] {
			j++
		}
		if j-i > 1 {
			s.sortCompare(pre[i:j], slot[i:j], true)
		}
		i = j
	}
}

// sortCompare sorts the keys (pre[i], slot[i]) by (pre, level bytes) by
// comparison; tied says that every pre is the same, so that only the slots
// need moving.
func (s *Stats) sortCompare(pre []uint64, slot []uint32, tied bool) {
	if tied {
		slices.SortFunc(slot, func(a, b uint32) int {
			return bytes.Compare(s.Bytes(int(a)), s.Bytes(int(b)))
		})
		return
	}
	// Insertion sort: the keys are fewer than radixMin.
	for i := 1; i < len(pre); i++ {
		p, sl := pre[i], slot[i]
		j := i
		for ; j > 0; j-- {
			q := pre[j-1]
			if q < p || q == p && bytes.Compare(s.Bytes(int(slot[j-1])), s.Bytes(int(sl))) < 0 {
				break
			}
			pre[j], slot[j] = q, slot[j-1]
		}
		pre[j], slot[j] = p, sl
	}
}

// prefix8 returns the first 8 bytes of b as a big-endian number, padded
// with zeros, so that numbers order as the bytes do (a shorter level that
// is a prefix of a longer one ties here and is resolved by bytes.Compare).
func prefix8(b []byte) uint64 {
	if len(b) >= 8 {
		return binary.BigEndian.Uint64(b)
	}
	var v uint64
	for i := 0; i < 8; i++ {
		v <<= 8
		if i < len(b) {
			v |= uint64(b[i])
		}
	}
	return v
}

// TopK returns, for every level slot, its top-k code: levels ranked by row
// count descending, ties by level bytes ascending (the null level, if
// counted, sorts before every text), get codes 1..k; every other level and
// every level with fewer than minCount rows gets 0. keep, when not nil,
// excludes levels from ranking. It selects with a heap of k entries, so it
// takes O(n log k) time.
func (s *Stats) TopK(k int, minCount uint64, keep []bool) []int32 {
	return s.codes(s.TopKSlots(k, minCount, keep))
}

// TopKSlots returns the slots that TopK gives codes, best first: slot
// TopKSlots(...)[i] has code i+1. It reads the row counts in one pass over
// the statistics (RowCounts) and allocates nothing per level.
func (s *Stats) TopKSlots(k int, minCount uint64, keep []bool) []int {
	return s.topK(k, minCount, s.n, s.RowCounts, keep)
}

// TopKBy is TopK with the row count of each level slot taken from rows
// (len(rows) == NumLevels()) instead of RowCount: the counts of a subset
// of the folds, say. A slot with a zero count gets no code.
func (s *Stats) TopKBy(k int, minCount uint64, rows []uint64, keep []bool) []int32 {
	return s.codes(s.topK(k, minCount, len(rows), func(from int, dst []uint64) { copy(dst, rows[from:]) }, keep))
}

// codes returns the top-k code of every slot given the ranked slots.
func (s *Stats) codes(ranked []int) []int32 {
	codes := hugemem.Make[int32](s.n)
	for r, l := range ranked {
		codes[l] = int32(r + 1)
	}
	return codes
}

// topK returns the best k of slots 0..n-1, best first, rows(from, dst)
// setting dst[i] to the row count of slot from+i.
func (s *Stats) topK(k int, minCount uint64, n int, rows func(from int, dst []uint64), keep []bool) []int {
	if k <= 0 {
		return nil
	}
	type entry struct {
		l    int
		rows uint64
	}
	// before reports whether a ranks before b.
	before := func(a, b entry) bool {
		if a.rows != b.rows {
			return a.rows > b.rows
		}
		if a.l == 0 || b.l == 0 {
			return a.l == 0
		}
		return bytes.Compare(s.Bytes(a.l), s.Bytes(b.l)) < 0
	}
	// h is a heap whose root is the worst-ranked of the best k so far.
	h := make([]entry, 0, min(k, n)) // room for what can be ranked, not for k
	down := func(i int) {
		for {
			c := 2*i + 1
			if c >= len(h) {
				return
			}
			if c+1 < len(h) && before(h[c], h[c+1]) {
				c++
			}
			if !before(h[i], h[c]) {
				return
			}
			h[i], h[c] = h[c], h[i]
			i = c
		}
	}
	var buf [4096]uint64
	for from := 0; from < n; from += len(buf) {
		rc := buf[:min(len(buf), n-from)]
		rows(from, rc)
		for i, r := range rc {
			l := from + i
			if r == 0 || r < minCount || (keep != nil && !keep[l]) {
				continue
			}
			e := entry{l, r}
			if len(h) < k {
				h = append(h, e)
				for i := len(h) - 1; i > 0; {
					p := (i - 1) / 2
					if !before(h[p], h[i]) {
						break
					}
					h[i], h[p] = h[p], h[i]
					i = p
				}
				continue
			}
			// Fewer rows than the root's: out, without comparing bytes.
			if r >= h[0].rows && before(e, h[0]) {
				h[0] = e
				down(0)
			}
		}
	}
	sort.Slice(h, func(i, j int) bool { return before(h[i], h[j]) })
	out := make([]int, len(h))
	for i, e := range h {
		out[i] = e.l
	}
	return out
}

// RowCounts sets dst[i] to RowCount(from+i) for every i
// (from+len(dst) <= NumLevels()): the counts of consecutive slots, read
// in one sequential pass over their cells.
func (s *Stats) RowCounts(from int, dst []uint64) {
	if s.Task == Regression || s.cls.width == 0 {
		for i := range dst {
			dst[i] = s.rows.get(from + i)
		}
		return
	}
	k := &s.cls
	w, nw, sh, marker := k.width, k.narrow.width, k.narrow.shift(), k.marker()
	mask := 1<<sh - 1
	for i := range dst {
		l := from + i
		o := (l & mask) * nw
		row := k.narrow.chunks[l>>sh][o : o+nw : o+nw]
		if row[0] == marker {
			dst[i] = sumCells(k.wideOf(row))
		} else {
			dst[i] = sumCells(row[:w])
		}
	}
	// Rows outside the class counts (an unknown target): most tables
	// have none, and their chunks are not allocated.
	rs := &s.rows
	for i := 0; i < len(dst); {
		l := from + i
		c := rs.chunks[l>>chunkBits]
		end := min(len(dst), i+(1<<chunkBits)-(l&(1<<chunkBits-1)))
		if c != nil {
			for ; i < end; i++ {
				dst[i] += rs.get(from + i)
			}
		}
		i = end
	}
}

// PermuteClasses renumbers class slots: old slot c becomes slot pos[c].
func (s *Stats) PermuteClasses(pos []int) {
	if s.Task == Regression || len(pos) != s.Classes {
		return
	}
	identity := true
	for c, p := range pos {
		identity = identity && c == p
	}
	if identity {
		return // the classes were first seen in sorted order
	}
	tmp := make([]uint64, s.Classes)
	tmp8 := make([]uint8, s.Classes)
	for l := 0; l < s.n; l++ {
		if nr, wr := s.cls.cells(l); wr != nil {
			permute(wr, pos, tmp)
		} else {
			permute(nr, pos, tmp8)
		}
	}
}

// permute moves, in every fold's cells of row, cell c to cell pos[c]; tmp
// is scratch of len(pos).
func permute[T uint8 | uint64](row []T, pos []int, tmp []T) {
	C := len(pos)
	for f := 0; f+C <= len(row); f += C {
		cells := row[f : f+C]
		for c, v := range cells {
			tmp[pos[c]] = v
		}
		copy(cells, tmp)
	}
}

// Rollup returns the statistics of parent levels, where the parent of a
// level's bytes is given by parent (a prefix, say), and the parent slot of
// every level slot. The null level's parent is the parent null level.
func (s *Stats) Rollup(parent func([]byte) []byte) (*Stats, []int32) {
	p := New(s.Task, s.Folds, s.Classes, 0)
	p.Origin = s.Origin
	of := make([]int32, s.n)
	for l := 0; l < s.n; l++ {
		d := 0
		if l > 0 {
			d = p.Level(parent(s.Bytes(l)))
		}
		of[l] = int32(d)
		p.rows.add(d, s.rows.get(l))
		p.addLevel(d, s, l)
	}
	if s.sealed {
		p.Seal()
	}
	return p, of
}

// addLevel adds the per-fold target statistics of level l of o to level d
// of s (same task and folds; o's classes are the first of s's). A
// regression target's cells add exactly (addCell), moved from o.Origin to
// s.Origin; s must not be sealed.
func (s *Stats) addLevel(d int, o *Stats, l int) {
	if s.Task == Regression {
		for f := 0; f < s.Folds; f++ {
			s.addCell(d, f, o, l)
		}
		return
	}
	for f := 0; f < s.Folds; f++ {
		for c := 0; c < o.Classes; c++ {
			s.cls.add(d, f*s.Classes+c, o.cls.get(l, f*o.Classes+c))
		}
	}
}
