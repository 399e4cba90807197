// Package hashenc holds the pieces of manyfold's hashed-bucket encoding:
// feature hashing with an index hash and a sign hash (Weinberger, Dasgupta,
// Langford, Smola, Attenberg, "Feature hashing for large scale multitask
// learning", ICML 2009), and the standard occupancy formulas that tell how
// many levels collide for a given bucket count.
//
// The hash is XXH64 as specified in the xxHash repository
// (doc/xxhash_spec.md), so bucket assignments are stable across platforms
// and releases.
package hashenc

import (
	"math"

	"github.com/cespare/xxhash/v2"
)

// Sum returns the XXH64 hash of level with the given seed. Seed 0 is the
// plain XXH64 that Parquet's Bloom filters also use. Sum does not allocate.
func Sum(level []byte, seed uint64) uint64 {
	if seed == 0 {
		return xxhash.Sum64(level)
	}
	var d xxhash.Digest
	d.ResetWithSeed(seed)
	d.Write(level) // never fails
	return d.Sum64()
}

// Bucket returns h mod buckets, the index hash's bucket of a level hashed to
// h. buckets == 0 has no bucket to give and returns 0.
func Bucket(h, buckets uint64) uint64 {
	if buckets == 0 {
		return 0
	}
	return h % buckets
}

// Sign returns the sign hash xi(h) in {-1, +1} of a level hashed to h: +1 when
// the top bit of h is 0, -1 otherwise. Taking the top bit keeps the sign
// independent of the bucket, which Bucket draws from the low bits when
// buckets is a power of two.
func Sign(h uint64) int8 {
	if h>>63 == 0 {
		return 1
	}
	return -1
}

// ExpectedOccupied returns B*(1-(1-1/B)^n), the expected number of occupied
// buckets when n levels are hashed uniformly into B buckets (standard
// occupancy result). It is computed as -B*expm1(n*log1p(-1/B)) so that it
// stays accurate when B is large and n/B small.
//
// Edge cases: n == 0 gives 0; B == 1 gives 1 for any n > 0; n < 0, B < 1,
// B = +Inf or NaN arguments give NaN.
func ExpectedOccupied(levels, buckets float64) float64 {
	n, b := levels, buckets
	if !(n >= 0) || !(b >= 1) || math.IsInf(b, 1) {
		return math.NaN()
	}
	if n == 0 {
		return 0
	}
	return -b * math.Expm1(n*math.Log1p(-1/b))
}

// SharedChance returns 1-(1-1/B)^(n-1), the chance that a given level shares
// its bucket with at least one of the other n-1 levels when n levels are
// hashed uniformly into B buckets (standard occupancy result), computed as
// -expm1((n-1)*log1p(-1/B)) for accuracy at large B.
//
// Edge cases: n <= 1 gives 0 (no other level); B == 1 gives 1 for n > 1;
// n < 0, B < 1, B = +Inf or NaN arguments give NaN.
func SharedChance(levels, buckets float64) float64 {
	n, b := levels, buckets
	if !(n >= 0) || !(b >= 1) || math.IsInf(b, 1) {
		return math.NaN()
	}
	if n <= 1 {
		return 0
	}
	return -math.Expm1((n - 1) * math.Log1p(-1/b))
}
