package folds

import (
	"encoding/binary"
	"math"
	"strconv"
	"testing"

	"github.com/cespare/xxhash/v2"
)

// xxh64 is the reference XXH64 of b with seed, from the dependency's full
// implementation.
func xxh64(b []byte, seed uint64) uint64 {
	d := xxhash.NewWithSeed(seed)
	d.Write(b)
	return d.Sum64()
}

// TestHash8 checks the 8-byte fast path against the full XXH64, and the full
// XXH64 with a seed against the specification's vectors (xxHash repository,
// doc/xxhash_spec.md, cli/xsum_sanity_check.c).
func TestHash8(t *testing.T) {
	const fox = "The quick brown fox jumps over the lazy dog"
	if got := xxh64([]byte(fox), 1); got != 0xDF5091B6DAD2C6DB {
		t.Fatalf("reference XXH64(fox, seed 1) = %#x, want 0xDF5091B6DAD2C6DB", got)
	}
	if got := xxh64(nil, 0); got != 0xEF46DB3751D8E999 {
		t.Fatalf("reference XXH64(\"\", seed 0) = %#x, want 0xEF46DB3751D8E999", got)
	}
	var buf [8]byte
	xs := []uint64{0, 1, 2, 255, 256, 1 << 32, math.MaxUint64, 0x0123456789ABCDEF}
	for i := uint64(0); i < 1000; i++ {
		xs = append(xs, i*0x9E3779B97F4A7C15)
	}
	for _, seed := range []uint64{0, 1, 42, math.MaxUint64} {
		for _, x := range xs {
			binary.LittleEndian.PutUint64(buf[:], x)
			if got, want := hash8(seed, x), xxh64(buf[:], seed); got != want {
				t.Fatalf("hash8(%d, %#x) = %#x, XXH64 = %#x", seed, x, got, want)
			}
		}
	}
}

func TestRowDeterministic(t *testing.T) {
	const rows, k = 10000, 5
	differ := 0
	for r := uint64(0); r < rows; r++ {
		a := Row(7, r, k)
		if a < 0 || a >= k {
			t.Fatalf("Row(7, %d, %d) = %d out of range", r, k, a)
		}
		if b := Row(7, r, k); a != b {
			t.Fatalf("Row(7, %d) not deterministic: %d then %d", r, a, b)
		}
		// The fold is XXH64 of the little-endian row number, so Key of those
		// bytes agrees.
		var buf [8]byte
		binary.LittleEndian.PutUint64(buf[:], r)
		if c := Key(7, buf[:], k); c != a {
			t.Fatalf("Row(7, %d) = %d but Key of its 8 bytes = %d", r, a, c)
		}
		if Row(8, r, k) != a {
			differ++
		}
	}
	// Independent seeds agree on a row with chance 1/k: expect 8000 of 10000
	// to differ; 7700 is more than 7 standard deviations (40) below.
	if differ < 7700 {
		t.Fatalf("seeds 7 and 8 give different folds on only %d of %d rows", differ, rows)
	}
}

// TestRowUniform checks fold sizes over 1e6 rows with Pearson's chi-square
// statistic against the 99.9th percentile of the chi-square distribution
// with k-1 degrees of freedom (standard tables: 18.467 for 4 df, 27.877 for
// 9 df; checked numerically with the regularized incomplete gamma function).
func TestRowUniform(t *testing.T) {
	const rows = 1000000
	tests := []struct {
		k     int
		bound float64
	}{{5, 18.467}, {10, 27.877}}
	for _, tc := range tests {
		for _, seed := range []uint64{0, 1, 20240601} {
			counts := make([]float64, tc.k)
			for r := uint64(0); r < rows; r++ {
				counts[Row(seed, r, tc.k)]++
			}
			want := float64(rows) / float64(tc.k)
			chi2 := 0.0
			for _, c := range counts {
				chi2 += (c - want) * (c - want) / want
			}
			if chi2 > tc.bound {
				t.Errorf("k=%d seed=%d: chi-square %.2f > %.3f, counts %v", tc.k, seed, chi2, tc.bound, counts)
			}
		}
	}
}

func TestKey(t *testing.T) {
	keys := []string{"", "PC-40217", "PC-40218", "acct-0001", "route/north/7", "\x00", "\x00\x00"}
	for _, key := range keys {
		f := Key(3, []byte(key), 5)
		if f < 0 || f >= 5 {
			t.Fatalf("Key(%q) = %d out of range", key, f)
		}
		// A copy of the key, read from another buffer, gets the same fold.
		cp := append([]byte(nil), key...)
		if g := Key(3, cp, 5); g != f {
			t.Fatalf("Key(%q) = %d, copy gives %d", key, f, g)
		}
		// The fold is XXH64 with the seed, mod k.
		if want := int(xxh64([]byte(key), 3) % 5); f != want {
			t.Fatalf("Key(%q) = %d, want XXH64 mod 5 = %d", key, f, want)
		}
		if want := int(xxh64([]byte(key), 0) % 5); Key(0, []byte(key), 5) != want {
			t.Fatalf("Key(0, %q) = %d, want %d", key, Key(0, []byte(key), 5), want)
		}
	}
	differ := 0
	for i := 0; i < 1000; i++ {
		b := []byte("sender-" + strconv.Itoa(i))
		if Key(1, b, 10) != Key(2, b, 10) {
			differ++
		}
	}
	if differ < 800 { // expect 900, sd about 9.5
		t.Fatalf("seeds 1 and 2 give different key folds for only %d of 1000 keys", differ)
	}
}

func TestSingleFold(t *testing.T) {
	for _, k := range []int{1, 0, -3} {
		if Row(1, 99, k) != 0 || Key(1, []byte("x"), k) != 0 || Block(5, 10, k) != 0 {
			t.Fatalf("k=%d: want fold 0 everywhere", k)
		}
		s := NewStratifier(1, k)
		for i := 0; i < 10; i++ {
			if f := s.Next(i % 3); f != 0 {
				t.Fatalf("k=%d: Stratifier.Next = %d, want 0", k, f)
			}
		}
	}
}

// classStream returns a deterministic stream of classes with uneven shares,
// including a negative and a large class code.
func classStream(n int) []int {
	classes := []int{0, 0, 0, 1, 0, 2, 0, 1, -1, 0, 1 << 40, 0, 1, 0, 0, 3}
	out := make([]int, n)
	state := uint64(99)
	for i := range out {
		state = state*6364136223846793005 + 1442695040888963407
		out[i] = classes[state>>60]
	}
	return out
}

func TestStratifierBalance(t *testing.T) {
	for _, k := range []int{2, 5, 10, 7} {
		s := NewStratifier(11, k)
		counts := map[int][]int{}
		for i, c := range classStream(20000) {
			f := s.Next(c)
			if f < 0 || f >= k {
				t.Fatalf("k=%d row %d: fold %d out of range", k, i, f)
			}
			if counts[c] == nil {
				counts[c] = make([]int, k)
			}
			counts[c][f]++
			lo, hi := counts[c][0], counts[c][0]
			for _, n := range counts[c] {
				lo, hi = min(lo, n), max(hi, n)
			}
			if hi-lo > 1 {
				t.Fatalf("k=%d row %d class %d: fold counts %v differ by more than 1", k, i, c, counts[c])
			}
		}
		if len(counts) != 6 {
			t.Fatalf("k=%d: saw %d classes, want 6", k, len(counts))
		}
	}
}

// TestStratifierDeterministic: same seed same folds; another seed differs;
// a row's fold depends only on its class and rank within the class, so a
// stream with the classes interleaved differently gives each class the same
// fold sequence.
func TestStratifierDeterministic(t *testing.T) {
	const k = 5
	stream := classStream(5000)
	run := func(seed uint64, classes []int) map[int][]int {
		s := NewStratifier(seed, k)
		seq := map[int][]int{}
		for _, c := range classes {
			seq[c] = append(seq[c], s.Next(c))
		}
		return seq
	}
	a, b := run(5, stream), run(5, stream)
	reordered := make([]int, 0, len(stream)) // every class-0 row first, then the rest
	for _, c := range stream {
		if c == 0 {
			reordered = append(reordered, c)
		}
	}
	for _, c := range stream {
		if c != 0 {
			reordered = append(reordered, c)
		}
	}
	r := run(5, reordered)
	other := run(6, stream)
	differ, total := 0, 0
	for c, seq := range a {
		for i, f := range seq {
			if b[c][i] != f || r[c][i] != f {
				t.Fatalf("class %d rank %d: folds %d, %d, %d differ across identical runs", c, i, f, b[c][i], r[c][i])
			}
			total++
			if other[c][i] != f {
				differ++
			}
		}
		// Each full block of k rows of a class is a permutation of 0..k-1.
		for start := 0; start+k <= len(seq); start += k {
			seen := make([]bool, k)
			for _, f := range seq[start : start+k] {
				if seen[f] {
					t.Fatalf("class %d block at %d: %v is not a permutation", c, start, seq[start:start+k])
				}
				seen[f] = true
			}
		}
	}
	// Independent permutations agree at a position with chance 1/k.
	if float64(differ) < 0.7*float64(total) {
		t.Fatalf("seeds 5 and 6 differ on only %d of %d rows", differ, total)
	}
}

// TestStratifierPermutationsVary checks that blocks do not repeat one
// permutation: over 1200 blocks of k=5, all 120 permutations should appear.
func TestStratifierPermutationsVary(t *testing.T) {
	const k = 5
	s := NewStratifier(1, k)
	seen := map[[k]int]int{}
	for b := 0; b < 1200; b++ {
		var p [k]int
		for i := range p {
			p[i] = s.Next(1)
		}
		seen[p]++
	}
	// Expected missing permutations: 120*(1-1/120)^1200, about 0.005.
	if len(seen) != 120 {
		t.Fatalf("saw %d distinct permutations of 5, want all 120", len(seen))
	}
}

func TestBlock(t *testing.T) {
	for _, tc := range []struct {
		rows uint64
		k    int
	}{{10, 3}, {100, 5}, {7, 10}, {1, 5}, {1000003, 7}} {
		sizes := make([]uint64, tc.k)
		prev := 0
		for r := uint64(0); r < tc.rows; r++ {
			f := Block(r, tc.rows, tc.k)
			// Non-decreasing; with rows >= k no fold is skipped either (with
			// fewer rows than folds some folds are empty).
			if f < prev || (tc.rows >= uint64(tc.k) && f > prev+1) || f >= tc.k {
				t.Fatalf("rows=%d k=%d: Block(%d) = %d after %d: not contiguous", tc.rows, tc.k, r, f, prev)
			}
			prev = f
			sizes[f]++
		}
		if Block(0, tc.rows, tc.k) != 0 || (tc.rows >= uint64(tc.k) && Block(tc.rows-1, tc.rows, tc.k) != tc.k-1) {
			t.Fatalf("rows=%d k=%d: first or last block wrong", tc.rows, tc.k)
		}
		lo, hi := sizes[0], sizes[0]
		for _, n := range sizes {
			lo, hi = min(lo, n), max(hi, n)
		}
		if tc.rows >= uint64(tc.k) && hi-lo > 1 {
			t.Fatalf("rows=%d k=%d: block sizes %v differ by more than 1", tc.rows, tc.k, sizes)
		}
	}
	// Hand-checked values of floor(row*k/rows), including products past 2^64.
	for _, tc := range []struct {
		row, rows uint64
		k, want   int
	}{
		{3, 10, 3, 0}, {4, 10, 3, 1}, {7, 10, 3, 2}, {9, 10, 3, 2},
		{math.MaxUint64 - 1, math.MaxUint64, 10, 9},
		{math.MaxUint64 / 2, math.MaxUint64, 10, 4},
		{1 << 62, 1 << 63, 1000, 500},
		{10, 10, 3, 2}, {1 << 40, 10, 3, 2}, // past the end: last fold
		{0, 0, 3, 0}, // no rows
	} {
		if got := Block(tc.row, tc.rows, tc.k); got != tc.want {
			t.Errorf("Block(%d, %d, %d) = %d, want %d", tc.row, tc.rows, tc.k, got, tc.want)
		}
	}
}

func TestNoAlloc(t *testing.T) {
	key := []byte("PC-40217")
	s := NewStratifier(1, 5)
	s.Next(0)
	s.Next(1 << 40)
	var row uint64
	var sink int
	for name, f := range map[string]func(){
		"Row":       func() { row++; sink += Row(1, row, 5) },
		"Key":       func() { sink += Key(1, key, 5) },
		"Key seed0": func() { sink += Key(0, key, 5) },
		"Next":      func() { s.Next(0); s.Next(1 << 40) },
	} {
		if n := testing.AllocsPerRun(200, f); n != 0 {
			t.Errorf("%s allocates %v times per call", name, n)
		}
	}
}

var sink int

func BenchmarkRow(b *testing.B) {
	for i := 0; i < b.N; i++ {
		sink += Row(1, uint64(i), 5)
	}
}

func BenchmarkKey(b *testing.B) {
	key := []byte("sender-account-0042")
	for i := 0; i < b.N; i++ {
		key[len(key)-1] = byte(i)
		sink += Key(1, key, 5)
	}
}

func BenchmarkStratifierNext(b *testing.B) {
	s := NewStratifier(1, 5)
	for i := 0; i < b.N; i++ {
		sink += s.Next(i & 1)
	}
}

// TestStratumFollowsLabel: two passes that number the classes differently
// (first seen against sorted) give every row the same fold when each class
// is followed by its label, and each class stays balanced.
func TestStratumFollowsLabel(t *testing.T) {
	const k = 5
	rows := []string{"1", "0", "0", "1", "0", "1", "1", "1", "0", "0", "1", "0", "0"}
	pass := func(labels []string) []int {
		s := NewStratifier(9, k)
		streams := map[string]*Stratum{}
		var out []int
		for _, r := range rows {
			st := streams[r]
			if st == nil {
				st = s.Stratum(r)
				streams[r] = st
			}
			out = append(out, st.Next())
		}
		return out
	}
	a, b := pass([]string{"1", "0"}), pass([]string{"0", "1"})
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("row %d: fold %d in one pass, %d in the other", i, a[i], b[i])
		}
	}
	counts := map[string][]int{"0": make([]int, k), "1": make([]int, k)}
	for i, r := range rows {
		counts[r][a[i]]++
	}
	for label, c := range counts {
		lo, hi := c[0], c[0]
		for _, v := range c {
			lo, hi = min(lo, v), max(hi, v)
		}
		if hi-lo > 1 {
			t.Errorf("class %s: fold counts %v differ by more than 1", label, c)
		}
	}
	seq := func(seed uint64) (out [20]int) {
		st := NewStratifier(seed, k).Stratum("1")
		for i := range out {
			out[i] = st.Next()
		}
		return out
	}
	if seq(9) == seq(10) {
		t.Errorf("seeds 9 and 10 give one class the same 20 folds")
	}
}

// TestStratumFrom: a class's stream started after r rows gives the next
// rows the folds the whole stream gives them, at every offset within and
// between blocks (a shard of a sharded fit starts its classes so).
func TestStratumFrom(t *testing.T) {
	const k, n = 5, 60
	s := NewStratifier(11, k)
	whole := s.Stratum("late")
	var want []int
	for range n {
		want = append(want, whole.Next())
	}
	for _, r := range []uint64{0, 1, 4, 5, 6, 23, 59} {
		st := s.StratumFrom("late", r)
		for i := int(r); i < n; i++ {
			if got := st.Next(); got != want[i] {
				t.Fatalf("started after %d rows: row %d in fold %d, the whole stream's %d", r, i, got, want[i])
			}
		}
	}
}
