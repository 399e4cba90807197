package colstats

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// refStats is a plain model of the class counts of a Stats: ref[l][f*C+c]
// and the rows of unknown target per level.
type refStats struct {
	folds, classes int
	cells          [][]uint64
	unknown        []uint64
}

func newRef(folds, classes, levels int) *refStats {
	r := &refStats{folds: folds, classes: classes, cells: make([][]uint64, levels), unknown: make([]uint64, levels)}
	for l := range r.cells {
		r.cells[l] = make([]uint64, folds*classes)
	}
	return r
}

// checkAgainst compares every reader of the class counts of s with ref.
func checkAgainst(t *testing.T, s *Stats, ref *refStats) {
	t.Helper()
	K, C := ref.folds, ref.classes
	tot := make([]uint64, K*C)
	for l := range ref.cells {
		cells := ref.cells[l]
		var rows uint64
		for i, v := range cells {
			tot[i] += v
			rows += v
		}
		rows += ref.unknown[l]
		if got := s.RowCount(l); got != rows {
			t.Errorf("level %d: RowCount %d, want %d", l, got, rows)
		}
		for c := 0; c < C; c++ {
			var want uint64
			for f := 0; f < K; f++ {
				want += cells[f*C+c]
			}
			if got := s.ClassCount(l, c); got != want {
				t.Errorf("level %d: ClassCount(%d) %d, want %d", l, c, got, want)
			}
		}
		if C == 2 {
			n0, n1 := s.ClassTotals2(l)
			if n0 != s.ClassCount(l, 0) || n1 != s.ClassCount(l, 1) {
				t.Errorf("level %d: ClassTotals2 %d %d, ClassCount %d %d", l, n0, n1, s.ClassCount(l, 0), s.ClassCount(l, 1))
			}
		}
		for e := -1; e < K; e++ {
			use := make([]bool, K)
			for f := range use {
				use[f] = f != e
			}
			for o := 0; o < C; o++ {
				var n, k uint64
				for f := 0; f < K; f++ {
					if f == e {
						continue
					}
					for c := 0; c < C; c++ {
						n += cells[f*C+c]
					}
					k += cells[f*C+o]
				}
				want := Agg{N: float64(n), Sum: float64(k), SumSq: float64(k)}
				if got := s.TargetMask(l, o, o, use); got != want {
					t.Errorf("level %d: TargetMask(o %d, all but %d) %v, want %v", l, o, e, got, want)
				}
				if s.Task == Binary && o < 2 {
					if got := s.Target(l, 0, e, o); got != want {
						t.Errorf("level %d: Target(pos %d, exclude %d) %v, want %v", l, o, e, got, want)
					}
				}
			}
		}
	}
	got := s.CellTotals()
	for i := range tot {
		if got[i] != tot[i] {
			t.Errorf("CellTotals[%d] = %d, want %d", i, got[i], tot[i])
		}
	}
	// The batch reads: RowCounts from the start and from an odd slot,
	// OutOfFold2s for every level in every fold (and in none).
	want := func(l int) (rows, n [][2]uint64) {
		var all uint64
		for _, v := range ref.cells[l] {
			all += v
		}
		for e := -1; e < K; e++ {
			var nn, kk uint64
			for f := 0; f < K; f++ {
				if f != e {
					nn += ref.cells[l][f*C] + ref.cells[l][f*C+1]
					kk += ref.cells[l][f*C+1]
				}
			}
			n = append(n, [2]uint64{nn, kk})
		}
		return [][2]uint64{{all + ref.unknown[l], 0}}, n
	}
	for _, from := range []int{0, 1} {
		rc := make([]uint64, len(ref.cells)-from)
		s.RowCounts(from, rc)
		for i, got := range rc {
			if rows, _ := want(from + i); got != rows[0][0] {
				t.Errorf("RowCounts from %d: level %d has %d rows, want %d", from, from+i, got, rows[0][0])
			}
		}
	}
	if C != 2 || s.Task != Binary {
		return
	}
	all := make([]int, len(ref.cells))
	for l := range all {
		all[l] = len(all) - 1 - l // not in memory order
	}
	n0s, n1s, rs := make([]int64, len(all)), make([]int64, len(all)), make([]int64, len(all))
	s.ClassTotals2s(all, n0s, n1s, rs)
	for i, l := range all {
		var a, b uint64
		for f := 0; f < K; f++ {
			a, b = a+ref.cells[l][f*C], b+ref.cells[l][f*C+1]
		}
		if r, _ := want(l); n0s[i] != int64(a) || n1s[i] != int64(b) || rs[i] != int64(r[0][0]) {
			t.Errorf("ClassTotals2s level %d: %d %d %d rows, want %d %d %d", l, n0s[i], n1s[i], rs[i], a, b, r[0][0])
		}
	}
	var ls, fold []int32
	for l := range ref.cells {
		for e := -1; e < K; e++ {
			ls, fold = append(ls, int32(l)), append(fold, int32(e))
		}
	}
	ls, fold = append(ls, -1), append(fold, 0)
	n, k, rows := make([]uint64, len(ls)), make([]uint64, len(ls)), make([]uint64, len(ls))
	s.OutOfFold2s(ls, fold, 1, n, k, rows)
	for i, l := range ls {
		if l < 0 {
			if n[i] != 0 || k[i] != 0 || rows[i] != 0 {
				t.Errorf("OutOfFold2s of an unseen level: %d %d %d", n[i], k[i], rows[i])
			}
			continue
		}
		r, nk := want(int(l))
		if w := nk[fold[i]+1]; n[i] != w[0] || k[i] != w[1] || rows[i] != r[0][0] {
			t.Errorf("OutOfFold2s level %d, fold %d: %d %d %d rows, want %d %d %d", l, fold[i], n[i], k[i], rows[i], w[0], w[1], r[0][0])
		}
	}
}

// shapes are the (task, folds, classes) layouts the tests run on: a row
// narrower than a wide-row pointer (1 fold, 2 classes), the benchmark
// layout (5 folds, 2 classes) and a multi-class one.
var shapes = []struct {
	task           Task
	folds, classes int
}{
	{Binary, 1, 2},
	{Binary, 2, 2},
	{Binary, 5, 2},
	{Multiclass, 3, 3},
}

// TestPromotionBoundary drives one cell of a level to 254 (the largest
// narrow count), then to 255 (one past it, which promotes the level), in
// every fold/class position, with distinct counts in the other cells, by
// AddClass and by SetClass, and compares every reader with a plain model.
func TestPromotionBoundary(t *testing.T) {
	for _, sh := range shapes {
		W := sh.folds * sh.classes
		for i := 0; i < W; i++ {
			for _, how := range []string{"AddClass", "SetClass"} {
				for _, n := range []uint64{253, 254, 255, 256, 1000} {
					t.Run(fmt.Sprintf("%s/%dx%d/cell%d/%s/%d", sh.task, sh.folds, sh.classes, i, how, n), func(t *testing.T) {
						s := New(sh.task, sh.folds, sh.classes, 0)
						ref := newRef(sh.folds, sh.classes, 3)
						other := s.Level([]byte("other"))
						l := s.Level([]byte("hot"))
						// Distinct small counts in every other cell of both levels.
						for j := 0; j < W; j++ {
							for _, lv := range []int{other, l} {
								if j == i && lv == l {
									continue
								}
								for r := 0; r < j+1; r++ {
									s.AddClass(lv, j/sh.classes, j%sh.classes)
								}
								ref.cells[lv][j] += uint64(j + 1)
							}
						}
						f, c := i/sh.classes, i%sh.classes
						if how == "AddClass" {
							for r := uint64(0); r < n; r++ {
								s.AddClass(l, f, c)
							}
						} else {
							// As a mapping table is read back: the cell,
							// then the level's rows.
							rows := s.RowCount(l)
							s.SetClass(l, f, c, uint32(n))
							s.SetRows(l, rows+n)
						}
						ref.cells[l][i] = n
						if promoted := s.cls.nwide == 1; promoted != (n > 254) {
							t.Errorf("%d rows in a cell: promoted %v, want %v", n, promoted, n > 254)
						}
						checkAgainst(t, s, ref)
						// Counting on after promotion stays exact.
						s.AddClass(l, f, c)
						s.AddClass(other, f, c)
						ref.cells[l][i]++
						ref.cells[other][i]++
						checkAgainst(t, s, ref)
					})
				}
			}
		}
	}
}

// TestPromotionUint16 checks the boundary of two-byte narrow cells:
// 65534 stays narrow, 65535 promotes.
func TestPromotionUint16(t *testing.T) {
	for _, width := range []int{2, 10} {
		for i := 0; i < width; i++ {
			k := newClassCells[uint16](width)
			k.grow(2)
			k.add(1, i, math.MaxUint16-1)
			if k.nwide != 0 || k.get(1, i) != math.MaxUint16-1 {
				t.Fatalf("width %d cell %d: 65534 rows: %d wide rows, count %d", width, i, k.nwide, k.get(1, i))
			}
			k.inc(1, (i+1)%width)
			k.inc(1, i)
			if k.nwide != 1 || k.get(1, i) != math.MaxUint16 || k.sum(1) != math.MaxUint16+1 {
				t.Fatalf("width %d cell %d: 65535 rows: %d wide rows, count %d, sum %d", width, i, k.nwide, k.get(1, i), k.sum(1))
			}
		}
	}
}

// TestMergePromoted merges a narrow level into a promoted one, a promoted
// level into a narrow one, and two narrow levels whose sum passes 254.
func TestMergePromoted(t *testing.T) {
	for _, sh := range shapes {
		t.Run(fmt.Sprintf("%s/%dx%d", sh.task, sh.folds, sh.classes), func(t *testing.T) {
			W := sh.folds * sh.classes
			a, b := New(sh.task, sh.folds, sh.classes, 0), New(sh.task, sh.folds, sh.classes, 0)
			// Level "n+p": narrow in a, promoted in b; "p+n": the reverse;
			// "n+n": 200 + 100 rows in cell W-1, narrow in both.
			counts := map[string][2]uint64{"n+p": {3, 300}, "p+n": {400, 5}, "n+n": {200, 100}}
			ref := newRef(sh.folds, sh.classes, 5)
			for _, lv := range []string{"n+p", "p+n", "n+n"} {
				la, lb := a.Level([]byte(lv)), b.Level([]byte(lv))
				for j := 0; j < W; j++ {
					f, c := j/sh.classes, j%sh.classes
					na, nb := uint64(j+1), uint64(j+2)
					if j == W-1 {
						na, nb = counts[lv][0], counts[lv][1]
					}
					for r := uint64(0); r < na; r++ {
						a.AddClass(la, f, c)
					}
					for r := uint64(0); r < nb; r++ {
						b.AddClass(lb, f, c)
					}
					ref.cells[la][j] = na + nb
				}
			}
			a.AddRow(1)
			b.AddRow(1)
			ref.unknown[1] = 2
			if err := a.Merge(b); err != nil {
				t.Fatal(err)
			}
			checkAgainst(t, a, ref)
			if a.cls.nwide != 3 {
				t.Errorf("%d promoted levels after the merge, want 3", a.cls.nwide)
			}
		})
	}
}

// TestPermuteClassesPromoted renumbers the classes of a narrow and of a
// promoted level.
func TestPermuteClassesPromoted(t *testing.T) {
	const K, C = 2, 3
	s := New(Multiclass, K, C, 0)
	ref := newRef(K, C, 3)
	rng := rand.New(rand.NewPCG(7, 7))
	for _, lv := range []string{"narrow", "wide"} {
		l := s.Level([]byte(lv))
		for j := 0; j < K*C; j++ {
			n := uint64(rng.IntN(100))
			if lv == "wide" && j == 2 {
				n = 999
			}
			for r := uint64(0); r < n; r++ {
				s.AddClass(l, j/C, j%C)
			}
			ref.cells[l][j] = n
		}
	}
	pos := []int{2, 0, 1}
	s.PermuteClasses(pos)
	perm := newRef(K, C, 3)
	for l := range ref.cells {
		for f := 0; f < K; f++ {
			for c := 0; c < C; c++ {
				perm.cells[l][f*C+pos[c]] = ref.cells[l][f*C+c]
			}
		}
	}
	if s.cls.nwide != 1 {
		t.Fatalf("%d promoted levels, want 1", s.cls.nwide)
	}
	checkAgainst(t, s, perm)
}

// TestRandomStreamMatchesModel counts a stream of 50k rows over levels
// from a few rows to thousands (so some promote and most do not), with
// rows of unknown target, and compares with a plain model; then widens the
// classes (AddClasses) and rolls all levels up into one.
func TestRandomStreamMatchesModel(t *testing.T) {
	const K, C, L = 5, 2, 3000
	s := New(Binary, K, C, 0)
	ref := newRef(K, C, L+1)
	rng := rand.New(rand.NewPCG(3, 9))
	slot := make([]int, L+1)
	for i := 1; i <= L; i++ {
		slot[i] = s.Level(fmt.Appendf(nil, "PC%05d", i))
	}
	for r := 0; r < 50_000; r++ {
		i := 1 + rng.IntN(L) // half uniform, half a skewed head
		if r%2 == 0 {
			i = int(math.Min(L, 1+rng.ExpFloat64()*8))
		}
		l := slot[i]
		if rng.IntN(50) == 0 {
			s.AddRow(l)
			ref.unknown[l]++
			continue
		}
		f, c := rng.IntN(K), rng.IntN(C)
		s.AddClass(l, f, c)
		ref.cells[l][f*C+c]++
	}
	if s.cls.nwide == 0 || s.cls.nwide > 50 {
		t.Fatalf("%d promoted levels; the stream should promote a few", s.cls.nwide)
	}
	checkAgainst(t, s, ref)

	p, of := s.Rollup(func([]byte) []byte { return []byte("all") })
	one := newRef(K, C, 2)
	for l := range ref.cells {
		d := of[l]
		for j, v := range ref.cells[l] {
			one.cells[d][j] += v
		}
		one.unknown[d] += ref.unknown[l]
	}
	checkAgainst(t, p, one)

	s.Task = Multiclass
	s.AddClasses(3)
	wide := newRef(K, 3, L+1)
	for l := range ref.cells {
		for f := 0; f < K; f++ {
			copy(wide.cells[l][f*3:f*3+C], ref.cells[l][f*C:(f+1)*C])
		}
		wide.unknown[l] = ref.unknown[l]
	}
	checkAgainst(t, s, wide)
}

// TestRowCounts checks the row counts past 2^32-1 and SetRows before and
// after SetClass.
func TestRowCounts(t *testing.T) {
	var r rowCounts
	r.grow(3)
	r.add(1, math.MaxUint32)
	r.inc(1)
	if got := r.get(1); got != 1<<32 {
		t.Errorf("2^32-1 + 1 = %d", got)
	}
	r.add(1, 3<<32+5)
	if got := r.get(1); got != 4<<32+5 {
		t.Errorf("2^32 + 3*2^32+5 = %d", got)
	}
	back := uint64(4<<32 + 5)
	r.add(1, -back) // back to zero, modulo 2^64
	if got := r.get(1); got != 0 || len(r.hi) != 0 {
		t.Errorf("back to zero: %d, %d high words", got, len(r.hi))
	}
	r.set(2, 7<<32)
	if got := r.get(2); got != 7<<32 || r.get(0) != 0 {
		t.Errorf("set 7*2^32: %d (level 0: %d)", got, r.get(0))
	}

	for _, first := range []string{"rows", "classes"} {
		s := New(Binary, 2, 2, 0)
		l := s.Level([]byte("x"))
		if first == "rows" {
			s.SetRows(l, 20)
		}
		s.SetClass(l, 0, 1, 6)
		s.SetClass(l, 1, 0, 300)
		if first == "classes" {
			s.SetRows(l, 20+294)
		} else {
			s.SetRows(l, 20+294) // a mapping table gives all rows
		}
		if got := s.RowCount(l); got != 314 {
			t.Errorf("%s first: RowCount %d, want 314", first, got)
		}
		if got := s.ClassCount(l, 0); got != 300 {
			t.Errorf("%s first: ClassCount(0) %d, want 300", first, got)
		}
	}

	s := New(Regression, 2, 0, 0)
	l := s.Level([]byte("x"))
	s.AddValue(l, 0, 1.5)
	s.AddRow(l)
	if got := s.RowCount(l); got != 2 {
		t.Errorf("regression RowCount %d, want 2", got)
	}
}

// addClassStreams returns the level slots of a unique-id-like stream (every
// row a new level), of a postcode-like one (40k levels, each seen about
// n/40k times) and of one of 500 levels seen n/500 times (every level
// promoted), n rows each.
func addClassStreams(n int) map[string][]int {
	rng := rand.New(rand.NewPCG(5, 5))
	id, pc := make([]int, n), make([]int, n)
	for i := range id {
		id[i] = 1 + i
		pc[i] = 1 + rng.IntN(40_000)
	}
	hot := make([]int, n)
	for i := range hot {
		hot[i] = 1 + rng.IntN(500)
	}
	return map[string][]int{"unique-id": id, "postcode": pc, "hot-500": hot}
}

// BenchmarkAddClass counts 2M rows with a binary target and 5 folds into
// one-byte cells (Stats.AddClass), into two-byte cells (the same layout
// with uint16) and, for reference, into plain uint32 cells, for a
// unique-id-like, a postcode-like and a 500-level stream. Run:
// go test -run '^$' -bench AddClass -benchmem ./encoders/colstats
func BenchmarkAddClass(b *testing.B) {
	const n, K, C = 2_000_000, 5, 2
	streams := addClassStreams(n)
	fold := make([]uint8, n)
	class := make([]uint8, n)
	rng := rand.New(rand.NewPCG(6, 6))
	for i := range fold {
		fold[i], class[i] = uint8(rng.IntN(K)), uint8(rng.IntN(7)/6)
	}
	for _, name := range []string{"unique-id", "postcode", "hot-500"} {
		slots := streams[name]
		levels := distinct(slots)
		b.Run(name+"/uint8", func(b *testing.B) {
			var bytes int
			for b.Loop() {
				s := New(Binary, K, C, 0)
				s.grow(levels + 1)
				for i, l := range slots {
					s.AddClass(l, int(fold[i]), int(class[i]))
				}
				bytes = len(s.cls.narrow.chunks)<<chunkBits*s.cls.narrow.width + s.cls.nwide*8*K*C
			}
			b.ReportMetric(float64(bytes)/float64(levels), "B/level")
		})
		b.Run(name+"/uint16", func(b *testing.B) {
			var bytes int
			for b.Loop() {
				k := newClassCells[uint16](K * C)
				k.grow(levels + 1)
				for i, l := range slots {
					k.inc(l, int(fold[i])*C+int(class[i]))
				}
				bytes = len(k.narrow.chunks)<<chunkBits*k.narrow.width*2 + k.nwide*8*K*C
			}
			b.ReportMetric(float64(bytes)/float64(levels), "B/level")
		})
		b.Run(name+"/uint32-ref", func(b *testing.B) {
			for b.Loop() {
				p := perLevel[uint32]{width: K * C}
				p.grow(levels + 1)
				var rows perLevel[uint32]
				rows.width = 1
				rows.grow(levels + 1)
				for i, l := range slots {
					rows.row(l)[0]++
					p.row(l)[int(fold[i])*C+int(class[i])]++
				}
			}
		})
	}
}

// distinct returns the number of distinct level slots of a stream.
func distinct(slots []int) int {
	m := 0
	for _, l := range slots {
		m = max(m, l)
	}
	return m
}
