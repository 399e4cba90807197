package exactsum

import "math/big"

// Recenter turns the sums of n values taken about the origin from, sum =
// Σ(y - from) and sq = Σ(y - from)^2, into the sums about the origin to,
// exactly: with d = from - to, Σ(y - to) = sum + n d and Σ(y - to)^2 =
// sq + 2 d sum + n d^2 (the square expanded). It works in arbitrary
// precision; merges of mapping tables fitted with different origins call
// it once a level.
func Recenter(n uint64, sum, sq *Sum, from, to float64) {
	if from == to {
		return
	}
	var ds Sum
	ds.Add(from)
	ds.Add(-to)
	d, de := ds.mantExp()
	s, se := sum.mantExp()
	q, qe := sq.mantExp()
	bn := new(big.Int).SetUint64(n)

	nd := new(big.Int).Mul(bn, d)
	ds2 := new(big.Int).Mul(d, s)
	ds2.Lsh(ds2, 1)
	nd2 := new(big.Int).Mul(nd, d)

	// sum + n d
	sum.setMantExp(addAligned(s, se, nd, de))

	// sq + 2 d sum + n d^2
	v, e := addAligned(q, qe, ds2, de+se)
	sq.setMantExp(addAligned(v, e, nd2, 2*de))
}

// addAligned returns a*2^ea + b*2^eb as v*2^e (a and b may be changed).
func addAligned(a *big.Int, ea int32, b *big.Int, eb int32) (*big.Int, int32) {
	if a.Sign() == 0 {
		return b, eb
	}
	if b.Sign() == 0 {
		return a, ea
	}
	if ea > eb {
		a, ea, b, eb = b, eb, a, ea
	}
	b.Lsh(b, uint(eb-ea))
	return a.Add(a, b), ea
}
