package colstats

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sort"
	"testing"
	"time"
)

// build returns binary statistics with one fold from (level, class) rows.
func build(rows [][2]string) *Stats {
	s := New(Binary, 1, 2, 0)
	for _, r := range rows {
		l := s.Level([]byte(r[0]))
		c := 0
		if r[1] == "1" {
			c = 1
		}
		s.AddClass(l, 0, c)
	}
	return s
}

func TestTopKAndShares(t *testing.T) {
	// Reference check (computed; the tie rule is a convention of ours):
	// counts A=4, B=5, C=1 -> shares 0.4, 0.5, 0.1; top-2 = {B, A}, C -> other.
	var rows [][2]string
	for i := 0; i < 4; i++ {
		rows = append(rows, [2]string{"A", "0"})
	}
	for i := 0; i < 5; i++ {
		rows = append(rows, [2]string{"B", "0"})
	}
	rows = append(rows, [2]string{"C", "1"})
	s := build(rows)
	codes := s.TopK(2, 1, nil)
	want := map[string]int32{"A": 2, "B": 1, "C": 0}
	for lv, code := range want {
		if got := codes[s.Lookup([]byte(lv))]; got != code {
			t.Errorf("top-2 code of %s = %d, want %d", lv, got, code)
		}
	}
	shares := map[string]float64{"A": 0.4, "B": 0.5, "C": 0.1}
	for lv, sh := range shares {
		if got := float64(s.RowCount(s.Lookup([]byte(lv)))) / 10; math.Abs(got-sh) > 1e-15 {
			t.Errorf("share of %s = %v, want %v", lv, got, sh)
		}
	}
}

func TestTopKTiesByBytes(t *testing.T) {
	s := build([][2]string{{"b", "0"}, {"a", "0"}, {"c", "0"}, {"c", "0"}})
	codes := s.TopK(3, 1, nil)
	for lv, want := range map[string]int32{"c": 1, "a": 2, "b": 3} {
		if got := codes[s.Lookup([]byte(lv))]; got != want {
			t.Errorf("code of %s = %d, want %d", lv, got, want)
		}
	}
	if codes := s.TopK(3, 2, nil); codes[s.Lookup([]byte("a"))] != 0 || codes[s.Lookup([]byte("c"))] != 1 {
		t.Errorf("min count 2: got %v", codes)
	}
}

func TestOutOfFoldWorkedExample(t *testing.T) {
	// Reference check (Pargent et al. 2022 protocol; values computed from the
	// Cestnik 1990 m-estimate): rows A1 A1 A0 A1 B0 B0 B1 B0 in folds
	// 0 1 0 1 0 1 0 1, m = 1 with the prior of the fitting rows: fold-0 rows
	// get A -> 5/6, B -> 1/6; fold-1 rows get A -> 0.5, B -> 0.5.
	rows := []struct {
		lv   string
		y, f int
	}{{"A", 1, 0}, {"A", 1, 1}, {"A", 0, 0}, {"A", 1, 1}, {"B", 0, 0}, {"B", 0, 1}, {"B", 1, 0}, {"B", 0, 1}}
	s := New(Binary, 2, 2, 0)
	for _, r := range rows {
		s.AddClass(s.Level([]byte(r.lv)), r.f, r.y)
	}
	sm := Smoothing{Kind: SmoothM, M: 1}
	want := map[int]map[string]float64{0: {"A": 5.0 / 6, "B": 1.0 / 6}, 1: {"A": 0.5, "B": 0.5}}
	for f, lv := range want {
		ft := s.Fit(0, f, 1, sm, nil, nil)
		for name, v := range lv {
			got := ft.Encode(s.Target(s.Lookup([]byte(name)), 0, f, 1))
			if math.Abs(got-v) > 1e-12 {
				t.Errorf("fold %d level %s = %v, want %v", f, name, got, v)
			}
		}
	}
}

func TestMergeEqualsWhole(t *testing.T) {
	rows := [][2]string{{"x", "1"}, {"y", "0"}, {"x", "0"}, {"z", "1"}, {"y", "1"}, {"x", "1"}}
	whole := build(rows)
	a, b := build(rows[:3]), build(rows[3:])
	if err := a.Merge(b); err != nil {
		t.Fatal(err)
	}
	for _, lv := range []string{"x", "y", "z"} {
		w, m := whole.Lookup([]byte(lv)), a.Lookup([]byte(lv))
		if whole.RowCount(w) != a.RowCount(m) || whole.Target(w, 0, -1, 1) != a.Target(m, 0, -1, 1) {
			t.Errorf("level %s: merged %v/%v, whole %v/%v", lv, a.RowCount(m), a.Target(m, 0, -1, 1), whole.RowCount(w), whole.Target(w, 0, -1, 1))
		}
	}
	if err := a.Merge(New(Regression, 1, 0, 0)); err == nil {
		t.Error("merging regression into binary statistics succeeded")
	}
}

func TestAddClassesAndPermute(t *testing.T) {
	s := New(Multiclass, 2, 1, 0)
	l := s.Level([]byte("p"))
	s.AddClass(l, 1, 0)
	s.AddClasses(3)
	s.AddClass(l, 1, 2)
	s.AddClass(l, 0, 1)
	s.PermuteClasses([]int{2, 0, 1}) // old 0 -> 2, old 1 -> 0, old 2 -> 1
	for o, want := range []float64{1, 1, 1} {
		if got := s.Target(l, o, -1, 0).Sum; got != want {
			t.Errorf("class %d sum = %v, want %v", o, got, want)
		}
	}
	if got := s.Target(l, 2, 0, 0).Sum; got != 1 { // old class 0 was in fold 1
		t.Errorf("class 2 outside fold 0 = %v, want 1", got)
	}
}

func TestEncodeEdgeCases(t *testing.T) {
	ft := Fitted{Prior: 0.3, M: math.Inf(1), Sm: Smoothing{Kind: SmoothEB}}
	if v := ft.Encode(Agg{N: 10, Sum: 10}); v != 0.3 {
		t.Errorf("infinite m gave %v, want the prior", v)
	}
	ft = Fitted{Prior: 0.3, M: 2, Sm: Smoothing{Kind: SmoothM, M: 2}}
	if v := ft.Encode(Agg{}); v != 0.3 {
		t.Errorf("empty level gave %v, want the prior", v)
	}
	// Cestnik 1990 m-estimate, computed: s=3, n=4, m=2, p=0.5 -> 2/3.
	ft = Fitted{Prior: 0.5, M: 2, Sm: Smoothing{Kind: SmoothM, M: 2}}
	if v := ft.Encode(Agg{N: 4, Sum: 3}); math.Abs(v-2.0/3) > 1e-15 {
		t.Errorf("m-estimate = %v, want 2/3", v)
	}
}

// TestTargetMask checks TargetMask and FitMask against Target and Fit for
// every "all folds but f" mask, and a mask of two cells against the worked
// out-of-fold example of the team's reference (computed from the formula:
// rows A1 A1 A0 A1 B0 B0 B1 B0 in folds 0 1 0 1 0 1 0 1; the fold-1 cells
// alone hold A 2/2 and B 0/2).
func TestTargetMask(t *testing.T) {
	for _, task := range []Task{Binary, Regression} {
		s := New(task, 2, 2, 0)
		rows := []struct {
			lv   string
			y, f int
		}{{"A", 1, 0}, {"A", 1, 1}, {"A", 0, 0}, {"A", 1, 1}, {"B", 0, 0}, {"B", 0, 1}, {"B", 1, 0}, {"B", 0, 1}}
		for _, r := range rows {
			l := s.Level([]byte(r.lv))
			if task == Regression {
				s.AddValue(l, r.f, float64(r.y))
			} else {
				s.AddClass(l, r.f, r.y)
			}
		}
		s.Seal()
		for ex := -1; ex < 2; ex++ {
			use := []bool{ex != 0, ex != 1}
			for l := 0; l < s.NumLevels(); l++ {
				if got, want := s.TargetMask(l, 0, 1, use), s.Target(l, 0, ex, 1); got != want {
					t.Errorf("%s: TargetMask(%d, use %v) = %+v, want Target(exclude %d) = %+v", task, l, use, got, ex, want)
				}
			}
			for _, sm := range []Smoothing{{Kind: SmoothEB}, {Kind: SmoothM, M: 1}} {
				got, want := s.FitMask(0, 1, sm, use, nil, nil), s.Fit(0, ex, 1, sm, nil, nil)
				if !(got.Prior == want.Prior && (got.M == want.M || math.IsNaN(got.M) && math.IsNaN(want.M) || math.IsInf(got.M, 1) && math.IsInf(want.M, 1))) {
					t.Errorf("%s %s: FitMask(use %v) = %+v, want %+v", task, sm.Kind, use, got, want)
				}
			}
		}
		a := s.TargetMask(s.Lookup([]byte("A")), 0, 1, []bool{false, true})
		b := s.TargetMask(s.Lookup([]byte("B")), 0, 1, []bool{false, true})
		if a.N != 2 || a.Sum != 2 || b.N != 2 || b.Sum != 0 {
			t.Errorf("%s: fold-1 cells: A %+v, B %+v; want A n=2 sum=2, B n=2 sum=0", task, a, b)
		}
		if got := s.TargetMask(s.Lookup([]byte("A")), 0, 1, []bool{false, false}); got != (Agg{}) {
			t.Errorf("%s: empty mask gives %+v, want zero", task, got)
		}
	}
}

// TestTopKBy ranks by the given counts, not by RowCount.
func TestTopKBy(t *testing.T) {
	s := build([][2]string{{"A", "0"}, {"A", "0"}, {"A", "0"}, {"B", "0"}, {"C", "0"}, {"C", "0"}})
	a, b, c := s.Lookup([]byte("A")), s.Lookup([]byte("B")), s.Lookup([]byte("C"))
	rows := make([]uint64, s.NumLevels())
	rows[a], rows[b], rows[c] = 0, 5, 2 // A absent from this subset
	codes := s.TopKBy(2, 1, rows, nil)
	if codes[b] != 1 || codes[c] != 2 || codes[a] != 0 {
		t.Errorf("TopKBy codes A=%d B=%d C=%d, want 0 1 2", codes[a], codes[b], codes[c])
	}
	all := make([]uint64, s.NumLevels())
	for l := range all {
		all[l] = s.RowCount(l)
	}
	if got, want := s.TopKBy(2, 1, all, nil), s.TopK(2, 1, nil); !equalCodes(got, want) {
		t.Errorf("TopKBy(Rows) = %v, TopK = %v", got, want)
	}
}

func equalCodes(a, b []int32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// sortedRef is the canonical order by its definition: the null slot first
// when it has rows, then the slots with rows by their bytes.
func sortedRef(s *Stats) []uint32 {
	var out, rest []uint32
	if s.RowCount(0) > 0 {
		out = append(out, 0)
	}
	for l := 1; l < s.NumLevels(); l++ {
		if s.RowCount(l) > 0 {
			rest = append(rest, uint32(l))
		}
	}
	sort.Slice(rest, func(i, j int) bool { return bytes.Compare(s.Bytes(int(rest[i])), s.Bytes(int(rest[j]))) < 0 })
	return append(out, rest...)
}

func TestSortedMatchesDefinition(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	cases := []struct {
		name string
		n    int
		gen  func(i int) []byte
	}{
		{"shipment ids", 20000, func(int) []byte {
			b := []byte("S")
			for j := 0; j < 10; j++ {
				b = append(b, "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ"[rng.IntN(36)])
			}
			return b
		}},
		// Long shared prefixes: every key ties on its first 8 bytes with
		// many others, so buckets end by comparing whole levels.
		{"shared prefix", 5000, func(i int) []byte { return fmt.Appendf(nil, "acct-0000%d", rng.IntN(100000)) }},
		// Short levels, empty level, zero bytes: "ab" and "ab\x00" tie on
		// the padded prefix and must still order by bytes.
		{"short and zeros", 3000, func(i int) []byte {
			b := make([]byte, rng.IntN(10))
			for j := range b {
				b[j] = []byte{0, 1, 'a', 'b', 0xff}[rng.IntN(5)]
			}
			return b
		}},
		{"few", 5, func(i int) []byte { return []byte{byte('e' - i)} }},
	}
	// With lsdMax lowered, buckets larger than it are distributed in place
	// first, as those of millions of levels are.
	for _, lsd := range []int{lsdMax, 100} {
		old := lsdMax
		lsdMax = lsd
		t.Cleanup(func() { lsdMax = old })
		for _, tc := range cases {
			t.Run(fmt.Sprint(tc.name, "/lsdMax=", lsd), func(t *testing.T) {
				testSorted(t, tc.n, tc.gen)
			})
		}
		lsdMax = old
	}
}

// testSorted checks Sorted against sortedRef on n levels from gen, every
// seventh keeping no rows.
func testSorted(t *testing.T, n int, gen func(i int) []byte) {
	s := New(Binary, 1, 2, 0)
	s.AddRow(0)
	for i := 0; i < n; i++ {
		l := s.Level(gen(i))
		if i%7 != 3 { // some levels keep no rows and are left out
			s.AddRow(l)
		}
	}
	got, want := s.Sorted(), sortedRef(s)
	if !slices.Equal(got, want) {
		t.Fatalf("Sorted differs from the byte order (%d vs %d slots)", len(got), len(want))
	}
}

func TestFitFoldsMatchesFit(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	for _, task := range []Task{Binary, Multiclass, Regression} {
		for _, sm := range []Smoothing{{Kind: SmoothM, M: 20}, {Kind: SmoothBlend, K: 5, F: 2}, {Kind: SmoothEB}} {
			const k = 4
			classes := 2
			if task == Multiclass {
				classes = 3
			}
			s := New(task, k, classes, 0)
			for i := 0; i < 30000; i++ {
				l := s.Level(fmt.Appendf(nil, "P%d", rng.IntN(3000)))
				if task == Regression {
					s.AddValue(l, rng.IntN(k), rng.Float64()*10)
				} else {
					s.AddClass(l, rng.IntN(k), rng.IntN(classes))
				}
			}
			s.Seal()
			keep := make([]bool, s.NumLevels())
			for l := range keep {
				keep[l] = l%5 != 0
			}
			order := s.Sorted()
			full, byFold := s.FitFolds(1, sm, keep, order)
			same := func(a, b Fitted) bool {
				return math.Float64bits(a.Prior) == math.Float64bits(b.Prior) && (a.M == b.M || math.IsNaN(a.M) && math.IsNaN(b.M))
			}
			for o := 0; o < s.Outputs(); o++ {
				if w := s.Fit(o, -1, 1, sm, keep, order); !same(full[o], w) {
					t.Errorf("%s %s full[%d] = %+v, Fit gives %+v", task, sm.Kind, o, full[o], w)
				}
				for e := 0; e < k; e++ {
					// Every fold's fit sums in the canonical order too.
					if w := s.Fit(o, e, 1, sm, keep, order); !same(byFold[e][o], w) {
						t.Errorf("%s %s fold %d output %d = %+v, Fit gives %+v", task, sm.Kind, e, o, byFold[e][o], w)
					}
				}
			}
		}
	}
}

// BenchmarkSorted orders 2M random shipment-id-like levels (11 bytes, a
// constant first byte). Run: go test -run '^$' -bench Sorted ./encoders/colstats
func BenchmarkSorted(b *testing.B) {
	s := benchStats()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		s.Sorted()
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/2e6, "ns/level")
}

// benchStats holds 2M random shipment-id-like levels (11 bytes, a constant
// first byte), one row each.
func benchStats() *Stats {
	rng := rand.New(rand.NewPCG(1, 2))
	s := New(Binary, 1, 2, 2_000_000)
	buf := make([]byte, 11)
	for i := 0; i < 2_000_000; i++ {
		buf[0] = 'S'
		for j := 1; j < len(buf); j++ {
			buf[j] = "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ"[rng.IntN(36)]
		}
		s.AddRow(s.Level(buf))
	}
	return s
}

// BenchmarkTarget computes the out-of-fold statistic of 1M binary levels
// with 5 folds, the fold excluded cycling: by Target (the binary fast
// path) and by TargetMask with the equivalent fold mask. Run:
// go test -run '^$' -bench Target ./encoders/colstats
func BenchmarkTarget(b *testing.B) {
	const n, k = 1 << 20, 5
	s := New(Binary, k, 2, n)
	rng := rand.New(rand.NewPCG(4, 4))
	for i := 0; i < 4*n; i++ {
		s.AddClass(s.Level(fmt.Appendf(nil, "L%d", i%n)), rng.IntN(k), rng.IntN(2))
	}
	masks := make([][]bool, k) // masks[e]: every fold but e
	for e := range masks {
		masks[e] = make([]bool, k)
		for f := range masks[e] {
			masks[e][f] = f != e
		}
	}
	for _, mask := range []bool{false, true} {
		name := "Target"
		if mask {
			name = "TargetMask"
		}
		b.Run(name, func(b *testing.B) {
			var sum float64
			for i := 0; i < b.N; i++ {
				l, e := 1+i%n, i%k
				var a Agg
				if mask {
					use := masks[e]
					a = s.TargetMask(l, 0, 1, use)
				} else {
					a = s.Target(l, 0, e, 1)
				}
				sum += a.Sum
			}
			if sum < 0 {
				b.Fatal(sum)
			}
		})
	}
}

func TestTargetMatchesMask(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 1))
	for _, k := range []int{1, 2, 5} {
		s := New(Binary, k, 2, 0)
		for i := 0; i < 5000; i++ {
			s.AddClass(s.Level(fmt.Appendf(nil, "R-%03d", rng.IntN(300))), rng.IntN(k), rng.IntN(2))
		}
		for l := 0; l < s.NumLevels(); l++ {
			for e := -1; e < k; e++ {
				for pos := 0; pos < 2; pos++ {
					use := make([]bool, k)
					for f := range use {
						use[f] = f != e
					}
					if got, want := s.Target(l, 0, e, pos), s.TargetMask(l, 0, pos, use); got != want {
						t.Fatalf("k=%d level %d exclude %d pos %d: Target %+v, TargetMask %+v", k, l, e, pos, got, want)
					}
				}
			}
		}
	}
}

// BenchmarkTableGathers fetches the class totals and the bytes of 4M
// binary levels in a random order, as the mapping table of an id column
// does (canonical order is random in memory): ClassTotals2s and
// AppendBytes over chunks of 65,536 levels. Metrics in ns per level. Run:
// go test -run '^$' -bench TableGathers -benchtime 3x ./encoders/colstats
func BenchmarkTableGathers(b *testing.B) {
	const n = 4 << 20
	s := New(Binary, 5, 2, n)
	rng := rand.New(rand.NewPCG(9, 9))
	var buf []byte
	for i := 0; i < n; i++ {
		buf = fmt.Appendf(buf[:0], "S%010d", rng.Uint64()%1e10)
		s.AddClass(s.Level(buf), i%5, i%2)
	}
	order := make([]int, s.NumLevels()-1)
	for i := range order {
		order[i] = i + 1
	}
	rng.Shuffle(len(order), func(i, j int) { order[i], order[j] = order[j], order[i] })
	const chunk = 1 << 16
	n0, n1, rows := make([]int64, chunk), make([]int64, chunk), make([]int64, chunk)
	var data []byte
	var ends []int32
	var counts, text time.Duration
	b.ResetTimer()
	for it := 0; it < b.N; it++ {
		for start := 0; start < len(order); start += chunk {
			sel := order[start:min(start+chunk, len(order))]
			t0 := time.Now()
			s.ClassTotals2s(sel, n0, n1, rows)
			t1 := time.Now()
			data, ends = s.AppendBytes(data[:0], append(ends[:0], 0), sel)
			counts += t1.Sub(t0)
			text += time.Since(t1)
		}
	}
	per := float64(b.N * len(order))
	b.ReportMetric(float64(counts.Nanoseconds())/per, "counts-ns/level")
	b.ReportMetric(float64(text.Nanoseconds())/per, "bytes-ns/level")
}

// TestMergeMovesOrigin: statistics whose sums are taken about different
// origins merge into the sums about the receiver's origin, as if every row
// had been added to it (the expansion of sum((y - a)^k) about another
// origin, k = 1, 2), bit for bit: the sums are exact until sealed.
func TestMergeMovesOrigin(t *testing.T) {
	ys := []float64{1e8 + 0.5, 1e8 - 1.25, 1e8 + 2, 1e8 + 0.75, 1e8 - 0.5}
	whole := New(Regression, 1, 0, 4)
	whole.Origin = 1e8 + 0.5
	a, b := New(Regression, 1, 0, 4), New(Regression, 1, 0, 4)
	a.Origin, b.Origin = 1e8+0.5, 1e8-3
	for i, y := range ys {
		l := whole.Level([]byte("P1"))
		whole.AddValue(l, 0, y)
		part := a
		if i%2 == 1 {
			part = b
		}
		part.AddValue(part.Level([]byte("P1")), 0, y)
	}
	if err := a.Merge(b); err != nil {
		t.Fatal(err)
	}
	whole.Seal()
	a.Seal()
	want, got := whole.Target(1, 0, -1, 0), a.Target(1, 0, -1, 0)
	if got != want {
		t.Errorf("merged statistics about %g = %+v, want %+v", a.Origin, got, want)
	}
}

// TestMemoryLinearInFolds: statistics for k folds take memory linear in k
// (a k-by-k mask of the folds each fit may see took k^2 bytes, 400 MB at
// 20,000 folds, and the first chunk of counters 2^14 levels times k cells,
// 6.5 GB).
func TestMemoryLinearInFolds(t *testing.T) {
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	s := New(Regression, 20000, 0, 0)
	s.AddValue(s.Level([]byte("R1")), 19999, 2.5)
	s.Seal()
	if a := s.Target(1, 0, 3, 0); a.N != 1 || a.Sum != 2.5 {
		t.Fatalf("Target = %+v, want the one row", a)
	}
	runtime.ReadMemStats(&after)
	if got := after.TotalAlloc - before.TotalAlloc; got > 64<<20 {
		t.Errorf("20,000 folds allocated %d bytes, want under 64 MiB", got)
	}
}
