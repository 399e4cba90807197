package exactsum

import (
	"encoding/binary"
	"errors"
	"math/big"
)

// The binary form of a Sum, canonical (one form per value, so equal sums
// give equal bytes): empty for 0; otherwise a sign byte (0 positive, 1
// negative), the exponent e as a zigzag varint, and the odd magnitude m,
// big-endian without leading zero bytes, for the value ±m * 2^e.

// MaxEncodedLen bounds the bytes of an encoded Sum: any sum of squares of
// 2^64 float64 values fits in about 4,300 bits of magnitude.
const MaxEncodedLen = 1024

// maxExp bounds the exponent of a decoded Sum: a square's last bit is at
// least 2^-2148, and a sum's magnitude below 2^2112.
const maxExp = 4400

// ErrEncoding is the error of bytes that are not a Sum's canonical form.
var ErrEncoding = errors.New("not an exact sum's encoding")

// AppendBinary appends the canonical binary form of s to b.
func (s *Sum) AppendBinary(b []byte) []byte {
	if s.IsZero() {
		return b
	}
	v, e := s.mantExp()
	tz := v.TrailingZeroBits()
	v.Rsh(v, tz)
	e += int32(tz)
	if v.Sign() < 0 {
		b = append(b, 1)
		v.Neg(v)
	} else {
		b = append(b, 0)
	}
	b = binary.AppendVarint(b, int64(e))
	return append(b, v.Bytes()...)
}

// Decode sets s from its binary form, refusing anything but the canonical
// form of a value within MaxEncodedLen and the exponent bound, so that
// untrusted bytes allocate no more than they hold.
func (s *Sum) Decode(b []byte) error {
	*s = Sum{}
	if len(b) == 0 {
		return nil
	}
	if len(b) > MaxEncodedLen || b[0] > 1 {
		return ErrEncoding
	}
	e, n := binary.Varint(b[1:])
	if n <= 0 || e < -maxExp || e > maxExp || n != len(binary.AppendVarint(nil, e)) {
		return ErrEncoding
	}
	m := b[1+n:]
	if len(m) == 0 || m[0] == 0 || m[len(m)-1]&1 == 0 {
		return ErrEncoding
	}
	v := new(big.Int).SetBytes(m)
	if b[0] == 1 {
		v.Neg(v)
	}
	s.setMantExp(v, int32(e))
	return nil
}

// MultipleOf reports whether s is an integer multiple of 2^exp: a sum of
// float64 values is a multiple of 2^-1074 (the least subnormal), a sum of
// their squares of 2^-2148, which a sum read from untrusted bytes can be
// checked against.
func (s *Sum) MultipleOf(exp int) bool {
	v, e := s.mantExp()
	if v.Sign() == 0 {
		return true
	}
	return int(e)+int(v.TrailingZeroBits()) >= exp
}

// Equal reports whether s and o hold the same value.
func (s *Sum) Equal(o *Sum) bool {
	a, ea := s.mantExp()
	b, eb := o.mantExp()
	if a.Sign() == 0 || b.Sign() == 0 {
		return a.Sign() == b.Sign()
	}
	v, _ := addAligned(a, ea, b.Neg(b), eb)
	return v.Sign() == 0
}
