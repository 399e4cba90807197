package exactsum

import (
	"bytes"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"strconv"
	"testing"
)

// ratSum is the reference: math/big's rationals add without rounding, and
// Rat.Float64 rounds to the nearest float64 (the standard library's
// documented behaviour), independently of this package's 192-bit form.
func ratSum(xs []float64) *big.Rat {
	r := new(big.Rat)
	for _, x := range xs {
		r.Add(r, new(big.Rat).SetFloat64(x))
	}
	return r
}

// sumOf returns the exact sum of xs.
func sumOf(xs []float64) *Sum {
	var s Sum
	for _, x := range xs {
		s.Add(x)
	}
	return &s
}

func ratFloat(r *big.Rat) float64 {
	f, _ := r.Float64()
	return f
}

// sets of terms that exercise each path: decimals as targets hold them,
// integers, wide exponents (the big form), subnormals, cancellation.
func termSets(rng *rand.Rand) map[string][]float64 {
	sets := map[string][]float64{}
	var cents, ints, wide, tiny, cancel []float64
	for i := 0; i < 2000; i++ {
		cents = append(cents, float64(rng.IntN(1000000))/100)
		ints = append(ints, float64(rng.IntN(2000)-1000))
		wide = append(wide, math.Ldexp(rng.Float64()-0.5, rng.IntN(1200)-600))
		tiny = append(tiny, math.Ldexp(rng.Float64(), -1074+rng.IntN(60)))
		x := math.Ldexp(rng.Float64(), rng.IntN(100))
		cancel = append(cancel, x, -x*(1+0x1p-52))
	}
	sets["cents"], sets["ints"], sets["wide"], sets["tiny"], sets["cancel"] = cents, ints, wide, tiny, cancel
	// A classic case of common practice (from memory): 1e16 + 1 - 1e16 is
	// 0 in floating point and 1 exactly.
	sets["classic"] = []float64{1e16, 1, -1e16}
	// Ties to even: 1 + 2^-53 rounds to 1, 1 + 2^-53 + 2^-105 to 1 + 2^-52.
	sets["tie"] = []float64{1, 0x1p-53}
	sets["tie up"] = []float64{1, 0x1p-53, 0x1p-105}
	sets["huge"] = []float64{math.MaxFloat64, math.MaxFloat64, -math.MaxFloat64}
	sets["overflow"] = []float64{math.MaxFloat64, math.MaxFloat64}
	return sets
}

func TestSumMatchesRationals(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for name, xs := range termSets(rng) {
		s := sumOf(xs)
		want := ratFloat(ratSum(xs))
		if got := s.Float64(); got != want && !(math.IsInf(got, 1) && name == "overflow") {
			t.Errorf("%s: %v, rationals give %v", name, got, want)
		}
		if name == "overflow" && !math.IsInf(s.Float64(), 1) {
			t.Errorf("overflow: %v, want +Inf", s.Float64())
		}
	}
	if s := sumOf([]float64{1e16, 1, -1e16}); s.Float64() != 1 {
		t.Errorf("1e16 + 1 - 1e16 = %v, want 1", s.Float64())
	}
}

// TestOrderFree: every order and every grouping of the terms (sums of
// parts added together, as shards merge) gives the same bytes.
func TestOrderFree(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for name, xs := range termSets(rng) {
		var ref Sum
		for _, x := range xs {
			ref.Add(x)
		}
		want := ref.AppendBinary(nil)
		for trial := 0; trial < 5; trial++ {
			ys := append([]float64(nil), xs...)
			rng.Shuffle(len(ys), func(i, j int) { ys[i], ys[j] = ys[j], ys[i] })
			parts := make([]Sum, 1+rng.IntN(7))
			for _, y := range ys {
				parts[rng.IntN(len(parts))].Add(y)
			}
			var all Sum
			for i := range parts {
				all.AddSum(&parts[i])
			}
			if got := all.AppendBinary(nil); !bytes.Equal(got, want) {
				t.Fatalf("%s trial %d: %x, want %x", name, trial, got, want)
			}
			if all.Float64() != ref.Float64() && !math.IsNaN(ref.Float64()) {
				t.Fatalf("%s trial %d: %v, want %v", name, trial, all.Float64(), ref.Float64())
			}
		}
	}
}

// TestAddDiff checks the sums of y - o and (y - o)^2 against rationals.
func TestAddDiff(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	cases := map[string][]float64{}
	for name, xs := range termSets(rng) {
		if name != "huge" && name != "overflow" {
			cases[name] = xs
		}
	}
	cases["offset"] = []float64{1e8 + 0.25, 1e8 - 0.5, 1e8 + 0.37, 1e8}
	cases["extreme"] = []float64{0x1p-1000, 0x1p900, -0x1p-1074, 3}
	for name, ys := range cases {
		for _, o := range []float64{0, ys[0], 12.37, -0x1p-600} {
			var s, q Sum
			ro, rs, rq := new(big.Rat).SetFloat64(o), new(big.Rat), new(big.Rat)
			for _, y := range ys {
				AddDiff(&s, &q, y, o)
				d := new(big.Rat).Sub(new(big.Rat).SetFloat64(y), ro)
				rs.Add(rs, d)
				rq.Add(rq, d.Mul(d, d))
			}
			if s.Float64() != ratFloat(rs) || q.Float64() != ratFloat(rq) {
				t.Errorf("%s about %v: sums %v %v, rationals %v %v", name, o, s.Float64(), q.Float64(), ratFloat(rs), ratFloat(rq))
			}
			ds, dq := Diff(ys[1], o)
			var a, b Sum
			AddDiff(&a, &b, ys[1], o)
			if ds != a.Float64() || dq != b.Float64() {
				t.Errorf("%s about %v: Diff %v %v, AddDiff %v %v", name, o, ds, dq, a.Float64(), b.Float64())
			}
		}
	}
}

// TestRecenter: sums about one origin moved to another equal the sums
// taken about the other directly.
func TestRecenter(t *testing.T) {
	ys := []float64{12.37, 3.51, 1e4, 0.01, 7}
	for _, c := range [][2]float64{{12.37, 3.51}, {0, 1e8}, {3.51, 3.51}, {-0.1, 0x1p-900}} {
		var s, q, s2, q2 Sum
		for _, y := range ys {
			AddDiff(&s, &q, y, c[0])
			AddDiff(&s2, &q2, y, c[1])
		}
		Recenter(uint64(len(ys)), &s, &q, c[0], c[1])
		if !s.Equal(&s2) || !q.Equal(&q2) {
			t.Errorf("%v -> %v: %v %v, want %v %v", c[0], c[1], s.Float64(), q.Float64(), s2.Float64(), q2.Float64())
		}
	}
}

func TestBinaryRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	for name, xs := range termSets(rng) {
		s := sumOf(xs)
		b := s.AppendBinary(nil)
		var d Sum
		if err := d.Decode(b); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if !d.Equal(s) || !bytes.Equal(d.AppendBinary(nil), b) {
			t.Errorf("%s: round trip changed the value", name)
		}
	}
	var z Sum
	if b := z.AppendBinary(nil); len(b) != 0 {
		t.Errorf("zero encodes as %x", b)
	}
	for _, bad := range [][]byte{{2, 0, 1}, {0, 0}, {0, 0, 2}, {0, 0, 0, 1}, {0, 0x80, 0x80, 0x80, 0x80, 0x80, 1}, {0, 0x81, 0x00, 1}, append([]byte{0, 0}, make([]byte, MaxEncodedLen)...)} {
		var d Sum
		if err := d.Decode(bad); err == nil {
			t.Errorf("%x decoded", bad)
		}
	}
}

// FuzzDecode: any bytes either decode to a value whose encoding is the
// same bytes, or are refused; never a panic.
func FuzzDecode(f *testing.F) {
	var s Sum
	for _, x := range []float64{1, -3.5, 0x1p-1074, math.MaxFloat64, 12.37} {
		s.Add(x)
		f.Add(s.AppendBinary(nil))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		var d Sum
		if err := d.Decode(b); err != nil {
			return
		}
		if got := d.AppendBinary(nil); !bytes.Equal(got, b) {
			t.Fatalf("%x re-encodes as %x", b, got)
		}
		_ = d.Float64()
	})
}

func ExampleSum() {
	terms := []float64{1e16, 1, -1e16}
	var s Sum
	f := 0.0
	for _, x := range terms {
		s.Add(x)
		f += x
	}
	fmt.Println(f, s.Float64())
	// Output: 0 1
}

// BenchmarkAddDiff: the per-row cost of a regression target's exact cell
// sums, on prices in cents about the first one (go test -run '^$' -bench
// AddDiff ./encoders/exactsum).
func BenchmarkAddDiff(b *testing.B) {
	rng := rand.New(rand.NewPCG(9, 10))
	ys := make([]float64, 4096)
	for i := range ys {
		ys[i] = float64(rng.IntN(1000000)) / 100
	}
	var s, q Sum
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		AddDiff(&s, &q, ys[i&4095], ys[0])
	}
}

func TestTextRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for name, xs := range termSets(rng) {
		s := sumOf(xs)
		txt := string(s.AppendText(nil))
		var d Sum
		if err := d.ParseText(txt); err != nil {
			t.Fatalf("%s: %q: %v", name, txt, err)
		}
		if !d.Equal(s) || string(d.AppendText(nil)) != txt {
			t.Errorf("%s: %q does not round-trip", name, txt)
		}
		// The text is a hexadecimal floating-point literal: parsed as a
		// float64 by strconv (the standard library) it rounds as Float64.
		if f, err := strconv.ParseFloat(txt, 64); err == nil && f != s.Float64() {
			t.Errorf("%s: %q parses as %v, Float64 gives %v", name, txt, f, s.Float64())
		}
	}
	var s Sum
	s.Add(12.375)
	if got := string(s.AppendText(nil)); got != "0x63p-3" {
		t.Errorf("12.375 is %q, want 0x63p-3 (99/8)", got)
	}
	for _, bad := range []string{"", "0x", "0x0p1", "0x2p1", "0X1p1", "0x1P1", "0x1p+1", "0x1p01", "-0", "0x1", "0xAp1", "1p1", "0x1p99999", "0x1p-0"} {
		var d Sum
		if err := d.ParseText(bad); err == nil {
			t.Errorf("%q parsed", bad)
		}
	}
}

// FuzzParseText: any text either parses to a value whose text is the same,
// or is refused; never a panic.
func FuzzParseText(f *testing.F) {
	for _, s := range []string{"0", "0x63p-3", "-0x1p-1074", "0x1fffffffffffffp971"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		var d Sum
		if err := d.ParseText(s); err != nil {
			return
		}
		if got := string(d.AppendText(nil)); got != s {
			t.Fatalf("%q re-formats as %q", s, got)
		}
	})
}

// BenchmarkAdd: one exact addition of a price in cents (go test -run '^$'
// -bench 'Add$' ./encoders/exactsum).
func BenchmarkAdd(b *testing.B) {
	rng := rand.New(rand.NewPCG(9, 10))
	ys := make([]float64, 4096)
	for i := range ys {
		ys[i] = float64(rng.IntN(1000000)) / 100
	}
	var s Sum
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		s.Add(ys[i&4095])
	}
}

// TestMultipleOf: a sum is a multiple of 2^exp when its last bit is at
// exp or above (from the binary expansions of the values, common
// practice: 1.5 = 2^0 + 2^-1).
func TestMultipleOf(t *testing.T) {
	cases := []struct {
		vals []float64
		exp  int
		want bool
	}{
		{nil, 0, true},
		{[]float64{1.5}, -1, true},
		{[]float64{1.5}, 0, false},
		{[]float64{6}, 1, true},
		{[]float64{6}, 2, false},
		{[]float64{5e-324}, -1074, true},
		{[]float64{5e-324}, -1073, false},
		{[]float64{1e300, 5e-324}, -1074, true},
	}
	for _, c := range cases {
		var s Sum
		for _, v := range c.vals {
			s.Add(v)
		}
		if got := s.MultipleOf(c.exp); got != c.want {
			t.Errorf("%v a multiple of 2^%d: %v, want %v", c.vals, c.exp, got, c.want)
		}
	}
}
