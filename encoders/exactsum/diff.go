package exactsum

import (
	"math"
	"math/big"
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
	var a, b Sum
	AddDiff(&a, &b, y, o)
	return a.Float64(), b.Float64()
}
