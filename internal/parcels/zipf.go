package parcels

import (
	"math"
	"math/bits"
)

// zipf samples ranks 0..n-1 with probability proportional to (rank+1)^-s.
//
// The head, the first min(n, headRanks) ranks, is sampled by inverse CDF:
// cum holds the cumulative probabilities as 63-bit thresholds and a guide
// table indexed by the top bits of the uniform word gives the first rank
// whose threshold can exceed it, so a draw costs one guide lookup and about
// one comparison, in tables small enough to stay in cache. A word beyond
// the head's mass selects the tail, sampled by rejection-inversion
// (Hörmann and Derflinger, "Rejection-inversion to generate variates from
// monotone discrete distributions", ACM TOMACS 6(3), 1996): a continuous
// hat whose integral H inverts in closed form, rejecting the part of each
// unit interval above the point mass. The tail needs no table, and the
// normalising sum is closed-form beyond 2^16 terms, so neither memory nor
// setup time grows with the number of ranks.
type zipf struct {
	cum   []uint64 // cum[i]: P(rank <= i) * 2^63 for the head ranks
	guide []int32  // guide[t]: the smallest i with cum[i] > t << shift, or len(cum)
	shift uint
	head  uint64 // P(rank < len(cum)) * 2^63; 2^63 when there is no tail

	// Tail: 1-based ranks k0..n drawn with u uniform on [hLo, hHi].
	s, oneMinusS float64
	k0, n        int
	hLo, hHi     float64
	squeeze      float64 // x beyond k-1/2+squeeze is accepted at once
	total        float64 // sum of (rank+1)^-s over all ranks
}

// headRanks bounds the table part of a sampler.
const headRanks = 1 << 15

// one63 is 2^63, the scale of the thresholds.
const one63 = 1 << 63

// newZipf builds the sampler for n ≥ 1 ranks and exponent s ≥ 0.
func newZipf(n int, s float64) *zipf { return newZipfHead(n, s, headRanks) }

// newZipfHead builds the sampler with at most maxHead ≥ 1 table ranks.
func newZipfHead(n int, s float64, maxHead int) *zipf {
	z := &zipf{s: s, oneMinusS: 1 - s, n: n}
	z.total = z.sumWeights(n)
	nh := min(n, maxHead)
	z.cum = make([]uint64, nh)
	acc := 0.0
	for i := range nh {
		acc += z.weight(i)
		c := uint64(min(acc/z.total, 1) * one63)
		if i > 0 && c < z.cum[i-1] {
			c = z.cum[i-1]
		}
		z.cum[i] = c
	}
	if nh == n {
		z.cum[n-1] = one63
	}
	z.head = z.cum[nh-1]
	z.k0 = nh + 1
	z.hLo, z.hHi = z.bigH(float64(z.k0)-0.5), z.bigH(float64(n)+0.5)
	z.squeeze = squeezeWidth(s, z.k0)

	// A guide of about as many entries as head ranks (a power of two
	// between 2^8 and 2^16) keeps the expected scan near one step.
	gbits := max(8, min(bits.Len(uint(nh)), 16))
	z.shift = uint(63 - gbits)
	z.guide = make([]int32, 1<<gbits)
	i := 0
	for t := range z.guide {
		lo := uint64(t) << z.shift
		for i < nh && z.cum[i] <= lo {
			i++
		}
		z.guide[t] = int32(i)
	}
	return z
}

// weight returns the unnormalised probability of rank i, (i+1)^-s.
func (z *zipf) weight(i int) float64 { return math.Exp(-z.s * math.Log(float64(i+1))) }

// exactTerms is the number of leading weights sumWeights adds one by one.
const exactTerms = 1 << 16

// sumWeights returns the sum of the first n weights: the leading terms
// added exactly (smallest first) and the rest, k = a..n with a > 2^16, by
// the Euler-Maclaurin formula
//
//	sum f(k) = integral_a^n f + (f(a)+f(n))/2 + (f'(n)-f'(a))/12 - (f'''(n)-f'''(a))/720 + R
//
// for f(x) = x^-s (computed from the formula), whose remainder R is of the
// order of f^(5)(a)/30240, below 1e-24 here.
func (z *zipf) sumWeights(n int) float64 {
	m := min(n, exactTerms)
	head := 0.0
	for i := m - 1; i >= 0; i-- {
		head += z.weight(i)
	}
	if n == m {
		return head
	}
	a, b := float64(m+1), float64(n)
	s := z.s
	f := func(x float64) float64 { return math.Exp(-s * math.Log(x)) }
	d1 := func(x float64) float64 { return -s * f(x) / x }
	d3 := func(x float64) float64 { return -s * (s + 1) * (s + 2) * f(x) / (x * x * x) }
	tail := z.bigH(b) - z.bigH(a) + (f(a)+f(b))/2 + (d1(b)-d1(a))/12 - (d3(b)-d3(a))/720
	return head + tail
}

// bigH is the integral of x^-s from 1 to x: (x^(1-s) - 1)/(1-s), or
// log(x) when s is 1.
func (z *zipf) bigH(x float64) float64 {
	lx := math.Log(x)
	if math.Abs(z.oneMinusS) < 1e-12 {
		return lx
	}
	return math.Expm1(z.oneMinusS*lx) / z.oneMinusS
}

// bigHInv is the inverse of bigH.
func (z *zipf) bigHInv(y float64) float64 {
	if math.Abs(z.oneMinusS) < 1e-12 {
		return math.Exp(y)
	}
	return math.Exp(math.Log1p(z.oneMinusS*y) / z.oneMinusS)
}

// ranks returns the number of ranks.
func (z *zipf) ranks() int { return z.n }

// prob returns the probability of rank i.
func (z *zipf) prob(i int) float64 { return z.weight(i) / z.total }

// sample maps a uniform 64-bit word to a rank.
func (z *zipf) sample(h uint64) int {
	u := h >> 1
	if u >= z.head {
		return z.sampleTail(h)
	}
	i := int(z.guide[u>>z.shift])
	cum := z.cum
	for cum[i] <= u {
		i++
	}
	return i
}

// sampleTail draws a rank of the tail by rejection-inversion, taking its
// uniforms from a generator seeded with h. For a convex decreasing mass
// function the hat area of rank k, H(k+1/2) - H(k-1/2), is at least the
// mass k^-s (the midpoint of a convex function lies below its mean), so
// accepting u only in the last k^-s of that interval is exact.
func (z *zipf) sampleTail(h uint64) int {
	st := stream{h}
	for {
		u := z.hLo + unit53(st.next())*(z.hHi-z.hLo)
		x := z.bigHInv(u)
		k := int(x + 0.5)
		k = max(z.k0, min(k, z.n))
		fk := float64(k)
		if x-(fk-0.5) > z.squeeze || u >= z.bigH(fk+0.5)-math.Exp(-z.s*math.Log(fk)) {
			return k - 1
		}
	}
}

// squeezeWidth bounds the rejected part of the unit x-interval of every
// rank k ≥ k0. That part is at most the hat's relative excess over the
// mass, (H(k+1/2) - H(k-1/2) - k^-s) / k^-s, as the hat density exceeds
// k^-s left of k. By Taylor expansion of x^-s about k (computed from the
// formula) the excess is s(s+1)/(24k²) + s(s+1)(s+2)(s+3)/(1920k⁴) + ...,
// a series of positive terms falling with k, dominated by its first term
// once k ≥ 100; the bound takes four times that term. Below 100 there is
// no squeeze (the width returned is 1) and every draw is checked exactly.
func squeezeWidth(s float64, k0 int) float64 {
	if k0 < 100 {
		return 1
	}
	k := float64(k0)
	return 4 * s * (s + 1) / (24 * k * k)
}
