package exactsum

import (
	"math"
	"math/big"
	"math/bits"
)

// TwoSum returns s = fl(a + b) and its error t, with s + t = a + b exactly
// when s is finite (Knuth, TAOCP vol. 2, 4.2.2, Theorem B: six operations,
// no branch, any order of magnitudes).
func TwoSum(a, b float64) (s, t float64) {
	s = a + b
	bb := s - a
	t = (a - (s - bb)) + (b - bb)
	return s, t
}

// TwoProduct returns p = fl(a * b) and its error e, with p + e = a * b
// exactly when no underflow or overflow occurs (Ogita, Rump and Oishi
// 2005, section 2: the error of a product is itself a float64, which a
// fused multiply-add computes).
func TwoProduct(a, b float64) (p, e float64) {
	p = a * b
	return p, math.FMA(a, b, -p)
}

// safeProduct bounds the magnitudes for which TwoProduct is exact: below
// 2^-480 an operand's square could underflow into the subnormals, where
// the error term is not representable; above 2^500 it could overflow.
const (
	tinyFactor = 0x1p-480
	hugeFactor = 0x1p500
)

// AddDiff adds the exact values of y - o to sum and (y - o)^2 to sq, for
// finite y and o: the per-row step of a regression target's statistics
// taken about an origin o. It costs two to eight exact additions (y - o is
// split by TwoSum into s + t, and (s + t)^2 = s^2 + 2st + t^2 into the
// products and their errors); values far outside the range of targets
// (below 2^-480 or above 2^500 in magnitude) take an arbitrary-precision
// path, exact too.
func AddDiff(sum, sq *Sum, y, o float64) {
	if addDiffInt(sum, sq, y, o) {
		return
	}
	s, t := TwoSum(y, -o)
	a := math.Abs(s)
	if a > hugeFactor || (a != 0 && a < tinyFactor) || (t != 0 && math.Abs(t) < tinyFactor) {
		addDiffBig(sum, sq, y, o)
		return
	}
	sum.Add(s)
	p, e := TwoProduct(s, s)
	sq.Add(p)
	sq.Add(e)
	if t != 0 {
		sum.Add(t)
		p, e = TwoProduct(2*s, t)
		sq.Add(p)
		sq.Add(e)
		p, e = TwoProduct(t, t)
		sq.Add(p)
		sq.Add(e)
	}
}

// addDiffInt is AddDiff's common case, in integers: with y = my 2^ey and
// o = mo 2^eo, y - o = D 2^E exactly for E = min(ey, eo) and D = my
// 2^(ey-E) - mo 2^(eo-E), and (y - o)^2 = D^2 2^2E; one term is added to
// each sum. It reports false, adding nothing, when D would pass 94 bits
// (its square 188), for AddDiff's general path.
func addDiffInt(sum, sq *Sum, y, o float64) bool {
	neg, d, q, e, ok := diffInt(y, o)
	if ok && !isZero(d) {
		sum.addInt(neg, d, bitLen(d), e)
		sq.addInt(false, q, bitLen(q), 2*e)
	}
	return ok
}

// diffInt returns y - o = (-1)^neg d 2^e and (y - o)^2 = q 2^2e as
// integers (addDiffInt's arithmetic); ok is false when d would pass 94
// bits.
func diffInt(y, o float64) (neg bool, d, q [3]uint64, e int32, ok bool) {
	ny, my, ey := split(y)
	no, mo, eo := split(o)
	switch {
	case my == 0 && mo == 0:
		return false, d, q, 0, true
	case my == 0:
		ey = eo
	case mo == 0:
		eo = ey
	}
	e = min(ey, eo)
	sy, so := uint(ey-e), uint(eo-e)
	if sy > 41 || so > 41 { // 53 + 41 = 94 bits
		return false, d, q, 0, false
	}
	// |y| and |o| as 128-bit integers at 2^e; D = y - o, signed.
	yl, yh := my<<sy, my>>(64-sy)
	ol, oh := mo<<so, mo>>(64-so)
	if sy == 0 {
		yh = 0
	}
	if so == 0 {
		oh = 0
	}
	if ny {
		yl, yh = neg2(yl, yh)
	}
	if !no { // subtract o
		ol, oh = neg2(ol, oh)
	}
	var c uint64
	dl, c := bits.Add64(yl, ol, 0)
	dh, _ := bits.Add64(yh, oh, c)
	neg = int64(dh) < 0
	if neg {
		dl, dh = neg2(dl, dh)
	}
	if bits.Len64(dh) > 30 {
		return false, d, q, 0, false
	}
	// D^2 = dl^2 + 2 dl dh 2^64 + dh^2 2^128.
	h1, l1 := bits.Mul64(dl, dl)
	h2, l2 := bits.Mul64(dl, dh)
	h2, l2 = h2<<1|l2>>63, l2<<1
	q[0] = l1
	q[1], c = bits.Add64(h1, l2, 0)
	q[2] = h2 + dh*dh + c
	return neg, [3]uint64{dl, dh}, q, e, true
}

// neg2 returns the two's complement negation of the 128-bit (lo, hi).
func neg2(lo, hi uint64) (uint64, uint64) {
	var b uint64
	lo, b = bits.Sub64(0, lo, 0)
	hi, _ = bits.Sub64(0, hi, b)
	return lo, hi
}

// addDiffBig is AddDiff in arbitrary precision.
func addDiffBig(sum, sq *Sum, y, o float64) {
	var d Sum
	d.Add(y)
	d.Add(-o)
	v, e := d.mantExp()
	var t Sum
	t.setMantExp(v, e)
	sum.AddSum(&t)
	v2 := new(big.Int).Mul(v, v)
	t.setMantExp(v2, 2*e)
	sq.AddSum(&t)
}

// Diff returns the exact sums of y - o and (y - o)^2 over the rows that
// AddDiff added to sum and sq, rounded: what a cell of one row holds.
func Diff(y, o float64) (sum, sq float64) {
	s, t := TwoSum(y, -o)
	if t == 0 && math.Abs(s) <= hugeFactor && (s == 0 || math.Abs(s) >= tinyFactor) {
		return s, s * s
	}
	if neg, d, q, e, ok := diffInt(y, o); ok {
		if isZero(d) {
			return 0, 0
		}
		return round3(neg, d, e), round3(false, q, 2*e)
	}
	var a, b Sum
	AddDiff(&a, &b, y, o)
	return a.Float64(), b.Float64()
}
