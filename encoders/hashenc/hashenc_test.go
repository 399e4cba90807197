package hashenc

import (
	"math"
	"strconv"
	"testing"

	"github.com/cespare/xxhash/v2"
)

func TestSum(t *testing.T) {
	const fox = "The quick brown fox jumps over the lazy dog"
	tests := []struct {
		in   string
		seed uint64
		want uint64
	}{
		// XXH64 vectors: xxHash repository, doc/xxhash_spec.md and the
		// sanity-check vectors of cli/xsum_sanity_check.c.
		{"", 0, 0xEF46DB3751D8E999},
		{"a", 0, 0xD24EC4F1A98C6E5B},
		{"abc", 0, 0x44BC2CF5AD770999},
		{fox, 0, 0x0B242D361FDA71BC},
		{fox, 1, 0xDF5091B6DAD2C6DB},
	}
	for _, tc := range tests {
		t.Run(strconv.Quote(tc.in)+"/seed"+strconv.FormatUint(tc.seed, 10), func(t *testing.T) {
			if got := Sum([]byte(tc.in), tc.seed); got != tc.want {
				t.Fatalf("Sum(%q, %d) = %#016x, want %#016x", tc.in, tc.seed, got, tc.want)
			}
		})
	}
}

// TestSumSeedPaths checks that the seeded path agrees with the seed-0 fast
// path's definition over lengths that cross XXH64's 4-, 8- and 32-byte stripes
// and that seeds change the hash.
func TestSumSeedPaths(t *testing.T) {
	buf := make([]byte, 100)
	for i := range buf {
		buf[i] = byte(i*7 + 3)
	}
	for n := 0; n <= len(buf); n++ {
		b := buf[:n]
		var d xxhash.Digest
		d.ResetWithSeed(0)
		d.Write(b)
		if got, want := Sum(b, 0), d.Sum64(); got != want {
			t.Fatalf("len %d: Sum(b, 0) = %#x, seeded digest with seed 0 = %#x", n, got, want)
		}
		if Sum(b, 1) == Sum(b, 0) || Sum(b, 1) == Sum(b, 2) {
			t.Fatalf("len %d: seeds 0, 1, 2 do not all differ", n)
		}
	}
}

func TestSumNoAlloc(t *testing.T) {
	b := []byte("postcode-40217")
	if n := testing.AllocsPerRun(100, func() { Sum(b, 7) }); n != 0 {
		t.Fatalf("Sum allocates %v times per call", n)
	}
}

func TestBucketSign(t *testing.T) {
	tests := []struct {
		h, buckets, wantBucket uint64
		wantSign               int8
	}{
		{0, 10, 0, 1},
		{12345, 1000, 345, 1},
		{1<<63 - 1, 1 << 20, 1<<20 - 1, 1},
		{1 << 63, 1 << 20, 0, -1},
		{math.MaxUint64, 7, math.MaxUint64 % 7, -1},
		{99, 1, 0, 1},
		{99, 0, 0, 1}, // no buckets: 0, documented
	}
	for _, tc := range tests {
		if got := Bucket(tc.h, tc.buckets); got != tc.wantBucket {
			t.Errorf("Bucket(%#x, %d) = %d, want %d", tc.h, tc.buckets, got, tc.wantBucket)
		}
		if got := Sign(tc.h); got != tc.wantSign {
			t.Errorf("Sign(%#x) = %d, want %d", tc.h, got, tc.wantSign)
		}
	}
}

func TestOccupancy(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name          string
		n, b          float64
		occ, shared   float64
		occTol, shTol float64 // absolute tolerances
	}{
		// Standard occupancy results B*(1-(1-1/B)^n) and 1-(1-1/B)^(n-1),
		// values computed from the formula (6 decimals).
		{"n1000 B1024", 1000, 1024, 638.542031, 0.623208, 1e-6, 1e-6},
		{"n1e4 B2^20", 10000, 1 << 20, 9952.472229, 0.009490, 1e-6, 1e-6},
		{"n1e6 B2^20", 1e6, 1 << 20, 644536.130060, 0.614677, 1e-6, 1e-6},
		// Exact small cases.
		{"one level", 1, 1024, 1, 0, 1e-12, 0},
		{"two levels two buckets", 2, 2, 1.5, 0.5, 1e-12, 1e-15},
		{"one bucket", 5, 1, 1, 1, 0, 0},
		// Huge B, tiny n: occupied ~ n, shared ~ (n-1)/B; the naive pow form
		// gives 0 for both here, as 1-1/B rounds to 1.
		{"B 1e18", 3, 1e18, 3, 2e-18, 1e-12, 1e-30},
		// Edge cases of the doc comments.
		{"no levels", 0, 1024, 0, 0, 0, 0},
		{"no levels one bucket", 0, 1, 0, 0, 0, 0},
		{"zero buckets", 10, 0, nan, nan, 0, 0},
		{"negative levels", -1, 10, nan, nan, 0, 0},
		{"inf buckets", 10, math.Inf(1), nan, nan, 0, 0},
		{"NaN levels", nan, 10, nan, nan, 0, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			check := func(what string, got, want, tol float64) {
				if math.IsNaN(want) {
					if !math.IsNaN(got) {
						t.Errorf("%s(%v, %v) = %v, want NaN", what, tc.n, tc.b, got)
					}
					return
				}
				if !(math.Abs(got-want) <= tol) {
					t.Errorf("%s(%v, %v) = %.9g, want %.9g ± %g", what, tc.n, tc.b, got, want, tol)
				}
			}
			check("ExpectedOccupied", ExpectedOccupied(tc.n, tc.b), tc.occ, tc.occTol)
			check("SharedChance", SharedChance(tc.n, tc.b), tc.shared, tc.shTol)
		})
	}
}

// TestOccupancySimulated hashes n synthetic levels with Sum and compares the
// occupied bucket count with ExpectedOccupied: the variance of the occupied
// count is below its mean, so 5 standard deviations is a generous bound.
func TestOccupancySimulated(t *testing.T) {
	const n, b = 1000, 1024
	for seed := uint64(0); seed < 4; seed++ {
		used := make([]bool, b)
		occupied := 0
		for i := 0; i < n; i++ {
			k := Bucket(Sum([]byte("sender-account-"+strconv.Itoa(i)), seed), b)
			if !used[k] {
				used[k] = true
				occupied++
			}
		}
		want := ExpectedOccupied(n, b)
		if math.Abs(float64(occupied)-want) > 5*math.Sqrt(want) {
			t.Errorf("seed %d: %d buckets occupied, expected %.1f", seed, occupied, want)
		}
	}
}

func BenchmarkSum(b *testing.B) {
	for _, size := range []int{8, 16, 64} {
		key := make([]byte, size)
		for i := range key {
			key[i] = 'a' + byte(i%26)
		}
		for _, seed := range []uint64{0, 1} {
			b.Run("len="+strconv.Itoa(size)+"/seed="+strconv.FormatUint(seed, 10), func(b *testing.B) {
				b.SetBytes(int64(size))
				var sink uint64
				for i := 0; i < b.N; i++ {
					key[0] = byte(i)
					sink += Sum(key, seed)
				}
				benchSink = sink
			})
		}
	}
}

var benchSink uint64
