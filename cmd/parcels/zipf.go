package parcels

import (
	"math"
	"math/bits"
)

// zipf samples ranks 0..n-1 with probability proportional to (rank+1)^-s
// by inverse CDF: cum holds the cumulative probabilities as 63-bit
// thresholds, and a guide table indexed by the top bits of the uniform word
// gives the first rank whose threshold can exceed it, so a draw costs one
// guide lookup and on average about one threshold comparison.
type zipf struct {
	cum   []uint64 // cum[i]: P(rank <= i) * 2^63; cum[n-1] = 2^63
	guide []int32  // guide[t]: the smallest i with cum[i] > t << shift
	shift uint
}

// one63 is 2^63, the scale of the thresholds.
const one63 = 1 << 63

// newZipf builds the sampler for n ≥ 1 ranks and exponent s ≥ 0.
func newZipf(n int, s float64) *zipf {
	w := make([]float64, n)
	total := 0.0
	for i := range w {
		w[i] = math.Pow(float64(i+1), -s)
		total += w[i]
	}
	z := &zipf{cum: make([]uint64, n)}
	acc := 0.0
	for i := range w {
		acc += w[i]
		c := uint64(acc / total * one63)
		if c > one63 || i == n-1 {
			c = one63
		}
		if i > 0 && c < z.cum[i-1] {
			c = z.cum[i-1]
		}
		z.cum[i] = c
	}
	// A guide of about n entries (a power of two between 2^8 and 2^20)
	// keeps the expected scan near one step.
	gbits := bits.Len(uint(n))
	gbits = max(8, min(gbits, 20))
	z.shift = uint(63 - gbits)
	z.guide = make([]int32, 1<<gbits)
	i := 0
	for t := range z.guide {
		lo := uint64(t) << z.shift
		for z.cum[i] <= lo {
			i++
		}
		z.guide[t] = int32(i)
	}
	return z
}

// n returns the number of ranks.
func (z *zipf) n() int { return len(z.cum) }

// prob returns the probability of rank i as the sampler realises it.
func (z *zipf) prob(i int) float64 {
	lo := uint64(0)
	if i > 0 {
		lo = z.cum[i-1]
	}
	return float64(z.cum[i]-lo) / one63
}

// sample maps a uniform 64-bit word to a rank.
func (z *zipf) sample(h uint64) int {
	u := h >> 1
	i := int(z.guide[u>>z.shift])
	cum := z.cum
	for cum[i] <= u {
		i++
	}
	return i
}
