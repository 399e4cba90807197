// Package exactsum adds float64 values without rounding, so that a sum
// does not depend on the order of its terms: statistics of a regression
// target summed over shards, merged from mapping tables or accumulated row
// by row in one pass come out bit for bit the same.
//
// A Sum holds its value as an integer times a power of two, the form of a
// fixed-point superaccumulator (Neal, "Fast exact summation using small
// and large superaccumulators", arXiv:1505.05571, 2015): every finite
// float64 is such a number, and so is any sum of them. The integer lives in
// 192 bits, with the exponent chosen by the terms (the smallest last bit
// seen), which holds the sums a target column produces: cents from 0.01 to
// 10^4 squared span about 150 bits. A sum that would pass 188 bits moves to
// an arbitrary-precision integer (math/big) and stays there, slower but
// still exact. Only the final conversion, Float64, rounds: to nearest, ties
// to even, as IEEE 754 addition does.
//
// The per-row helpers (AddDiff) use the error-free transformations TwoSum
// (Knuth, The Art of Computer Programming vol. 2, 4.2.2, Theorem B) and
// TwoProduct by fused multiply-add (Ogita, Rump and Oishi, "Accurate sum
// and dot product", SIAM J. Sci. Comput. 26(6), 2005, section 2), which
// split a rounded sum or product into the rounded result and its exact
// error.
package exactsum

import (
	"math"
	"math/big"
	"math/bits"
)

// Sum is an exact sum of float64 values. The zero value is 0. A Sum must
// not be copied after its first Add if it may have moved to big (the copy
// would share the big integer); use Set.
type Sum struct {
	w   [3]uint64 // two's complement integer v; value v * 2^exp
	exp int32
	big *big.Int // when not nil, the value is big * 2^exp and w is unused
}

// headroom is the largest magnitude, in bits, that w may hold before an
// addition: two such terms add to less than 2^189, which fits the 192-bit
// two's complement with room to spare.
const headroom = 188

// split returns x as m * 2^e with m odd (or 0) and |m| < 2^53.
func split(x float64) (neg bool, m uint64, e int32) {
	b := math.Float64bits(x)
	neg = b>>63 != 0
	be := int32(b>>52) & 0x7ff
	m = b & (1<<52 - 1)
	if be == 0 {
		e = -1074
	} else {
		m |= 1 << 52
		e = be - 1075
	}
	if m == 0 {
		return neg, 0, 0
	}
	tz := bits.TrailingZeros64(m)
	return neg, m >> tz, e + int32(tz)
}

// Add adds x, which must be finite (NaN and infinities are not numbers a
// sum can hold exactly; callers refuse them first).
func (s *Sum) Add(x float64) {
	neg, m, e := split(x)
	if m == 0 {
		return
	}
	// The common cases, inline: the sum is below 2^188 (its top word
	// within ±2^60) and the term fits beside it, at or above its last bit
	// or after shifting the sum up to the term's.
	if top := int64(s.w[2]); s.big == nil && top < 1<<60 && top >= -1<<60 {
		if isZero(s.w) {
			s.w, s.exp = signed(neg, [3]uint64{m}), e
			return
		}
		up := e - s.exp
		if up < 0 && bitLen(abs(s.w))-int(up) <= headroom {
			s.w = shl(s.w, uint(-up))
			s.exp, up = e, 0
		}
		if up >= 0 && int(up)+bits.Len64(m) <= headroom {
			var t [3]uint64
			r := uint(up) % 64
			switch up / 64 {
			case 0:
				t[0], t[1] = m<<r, m>>(64-r)
			case 1:
				t[1], t[2] = m<<r, m>>(64-r)
			default:
				t[2] = m << r
			}
			s.w = addSigned(s.w, t, neg)
			return
		}
	}
	s.addInt(neg, [3]uint64{m}, bits.Len64(m), e)
}

// addInt adds (-1)^neg * mag * 2^e, where mag has at most nb bits.
func (s *Sum) addInt(neg bool, mag [3]uint64, nb int, e int32) {
	if top := int64(s.w[2]); s.big == nil && top < 1<<60 && top >= -1<<60 {
		if isZero(s.w) && nb <= headroom {
			s.w, s.exp = signed(neg, mag), e
			return
		}
		up := e - s.exp
		if up < 0 && bitLen(abs(s.w))-int(up) <= headroom {
			s.w = shl(s.w, uint(-up))
			s.exp, up = e, 0
		}
		if up >= 0 && int(up)+nb <= headroom {
			s.w = addSigned(s.w, shl(mag, uint(up)), neg)
			return
		}
	}
	if s.big != nil {
		s.addBig(neg, toBig(mag), e)
		return
	}
	if isZero(s.w) {
		if nb <= headroom {
			s.w, s.exp = signed(neg, mag), e
			return
		}
		s.exp = e
		s.toBig()
		s.addBig(neg, toBig(mag), e)
		return
	}
	cur := bitLen(abs(s.w))
	if e < s.exp {
		up := int(s.exp - e)
		if cur+up > headroom {
			s.toBig()
			s.addBig(neg, toBig(mag), e)
			return
		}
		s.w = shl(s.w, uint(up))
		s.exp = e
		cur += up
	}
	up := int(e - s.exp)
	if up+nb > headroom || cur > headroom {
		s.toBig()
		s.addBig(neg, toBig(mag), e)
		return
	}
	s.w = addSigned(s.w, shl(mag, uint(up)), neg)
}

// AddSum adds the value of o.
func (s *Sum) AddSum(o *Sum) {
	if o.big != nil {
		if s.big == nil {
			s.toBig()
		}
		s.addBig(false, o.big, o.exp)
		return
	}
	if isZero(o.w) {
		return
	}
	neg := int64(o.w[2]) < 0
	mag := abs(o.w)
	s.addInt(neg, mag, bitLen(mag), o.exp)
}

// Set makes s a copy of o.
func (s *Sum) Set(o *Sum) {
	*s = Sum{w: o.w, exp: o.exp}
	if o.big != nil {
		s.big = new(big.Int).Set(o.big)
	}
}

// IsZero reports whether the sum is 0.
func (s *Sum) IsZero() bool {
	if s.big != nil {
		return s.big.Sign() == 0
	}
	return isZero(s.w)
}

func (s *Sum) toBig() {
	b := toBig(abs(s.w))
	if int64(s.w[2]) < 0 {
		b.Neg(b)
	}
	s.big, s.w = b, [3]uint64{}
}

// addBig adds (-1)^neg * v * 2^e to the big form (v is not changed).
func (s *Sum) addBig(neg bool, v *big.Int, e int32) {
	t := new(big.Int).Set(v)
	if neg {
		t.Neg(t)
	}
	if s.big.Sign() == 0 {
		s.big, s.exp = t, e
		return
	}
	if e < s.exp {
		s.big.Lsh(s.big, uint(s.exp-e))
		s.exp = e
	}
	t.Lsh(t, uint(e-s.exp))
	s.big.Add(s.big, t)
}

// Float64 returns the sum rounded to the nearest float64, ties to even
// (±Inf beyond the largest finite value), as one IEEE 754 addition of its
// exact terms would round.
func (s *Sum) Float64() float64 {
	if s.big != nil {
		return bigFloat(s.big, s.exp)
	}
	if isZero(s.w) {
		return 0
	}
	return round3(int64(s.w[2]) < 0, abs(s.w), s.exp)
}

// round3 returns (-1)^neg * mag * 2^exp rounded to the nearest float64,
// ties to even (mag not 0).
func round3(neg bool, mag [3]uint64, exp int32) float64 {
	p := bitLen(mag) - 1 // the top bit
	mant, shift := mag[0], 0
	if p > 52 {
		r := uint(p - 52)
		mant = shr(mag, r)[0]
		if bit(mag, r-1) && (mant&1 != 0 || anyBelow(mag, r-1)) {
			mant++
			if mant == 1<<53 {
				mant >>= 1
				r++
			}
		}
		shift = int(r)
	}
	// mant * 2^(exp + shift), mant below 2^53: exact unless the result
	// leaves the normal range.
	if top := int(exp) + shift + bits.Len64(mant) - 1; top < -1022 || top > 1023 {
		b := toBig(mag)
		if neg {
			b.Neg(b)
		}
		return bigFloat(b, exp)
	}
	f := math.Ldexp(float64(mant), int(exp)+shift)
	if neg {
		f = -f
	}
	return f
}

// bigFloat returns v * 2^e rounded to the nearest float64, ties to even.
func bigFloat(v *big.Int, e int32) float64 {
	f := new(big.Float).SetInt(v) // exact: the precision grows to fit
	f.SetMantExp(f, int(e))
	r, _ := f.Float64()
	return r
}

// mantExp returns the value as v * 2^e with v a new big integer.
func (s *Sum) mantExp() (*big.Int, int32) {
	if s.big != nil {
		return new(big.Int).Set(s.big), s.exp
	}
	return signedBig(s.w), s.exp
}

// setMantExp sets the value v * 2^e, keeping v if it is too wide for the
// fixed form.
func (s *Sum) setMantExp(v *big.Int, e int32) {
	*s = Sum{}
	if v.Sign() == 0 {
		return
	}
	if tz := v.TrailingZeroBits(); tz > 0 {
		v = new(big.Int).Rsh(v, tz)
		e += int32(tz)
	}
	if v.BitLen() <= headroom {
		s.w, s.exp = signed(v.Sign() < 0, fromBig(new(big.Int).Abs(v))), e
		return
	}
	s.big, s.exp = v, e
}

func signedBig(w [3]uint64) *big.Int {
	b := toBig(abs(w))
	if int64(w[2]) < 0 {
		b.Neg(b)
	}
	return b
}

// The 192-bit integers: w[0] is the least significant word; as a signed
// number, two's complement.

func isZero(w [3]uint64) bool { return w[0]|w[1]|w[2] == 0 }

func abs(w [3]uint64) [3]uint64 {
	if int64(w[2]) < 0 {
		return neg3(w)
	}
	return w
}

func neg3(w [3]uint64) [3]uint64 {
	var c uint64
	var r [3]uint64
	r[0], c = bits.Sub64(0, w[0], 0)
	r[1], c = bits.Sub64(0, w[1], c)
	r[2], _ = bits.Sub64(0, w[2], c)
	return r
}

func signed(neg bool, mag [3]uint64) [3]uint64 {
	if neg {
		return neg3(mag)
	}
	return mag
}

func bitLen(w [3]uint64) int {
	switch {
	case w[2] != 0:
		return 128 + bits.Len64(w[2])
	case w[1] != 0:
		return 64 + bits.Len64(w[1])
	}
	return bits.Len64(w[0])
}

// shl returns w shifted left by n bits (n < 192), without branches on n:
// each result word is read from w padded with zero words below.
func shl(w [3]uint64, n uint) [3]uint64 {
	x := [6]uint64{0, 0, 0, w[0], w[1], w[2]} // x[3+i] = w[i]
	k, r := n/64%3, n%64
	return [3]uint64{
		x[3-k]<<r | x[2-k]>>(64-r),
		x[4-k]<<r | x[3-k]>>(64-r),
		x[5-k]<<r | x[4-k]>>(64-r),
	}
}

// addSigned returns a + t, or a - t if neg, with the sign applied without
// a branch (two's complement: a + (t XOR -1) + 1).
func addSigned(a, t [3]uint64, neg bool) [3]uint64 {
	var m uint64
	if neg {
		m = ^uint64(0)
	}
	var c uint64
	var r [3]uint64
	r[0], c = bits.Add64(a[0], t[0]^m, m&1)
	r[1], c = bits.Add64(a[1], t[1]^m, c)
	r[2], _ = bits.Add64(a[2], t[2]^m, c)
	return r
}

func shr(w [3]uint64, n uint) [3]uint64 {
	for n >= 64 {
		w = [3]uint64{w[1], w[2], 0}
		n -= 64
	}
	if n == 0 {
		return w
	}
	return [3]uint64{w[0]>>n | w[1]<<(64-n), w[1]>>n | w[2]<<(64-n), w[2] >> n}
}

// bit reports bit i of w.
func bit(w [3]uint64, i uint) bool { return w[i/64]>>(i%64)&1 != 0 }

// anyBelow reports whether any bit of w below bit i is set.
func anyBelow(w [3]uint64, i uint) bool {
	for k := uint(0); k < i/64; k++ {
		if w[k] != 0 {
			return true
		}
	}
	return w[i/64]&(1<<(i%64)-1) != 0
}

func toBig(w [3]uint64) *big.Int {
	b := new(big.Int).SetUint64(w[2])
	for _, x := range []uint64{w[1], w[0]} {
		b.Lsh(b, 64).Or(b, new(big.Int).SetUint64(x))
	}
	return b
}

// fromBig returns a magnitude of at most 192 bits as words.
func fromBig(b *big.Int) [3]uint64 {
	var w [3]uint64
	t := new(big.Int).Set(b)
	for i := range w {
		w[i] = t.Uint64() // the low 64 bits
		t.Rsh(t, 64)
	}
	return w
}
