package exactsum

import (
	"errors"
	"math/big"
	"math/bits"
	"strconv"
	"strings"
)

// The text form of a Sum, canonical and readable as a hexadecimal
// floating-point literal of Go or C (an exact value, which a float64 may
// not hold): "0" for 0, otherwise an optional "-", "0x", the odd magnitude
// in lower-case hexadecimal without leading zeros, "p" and the power of
// two in decimal: 12.375 is "0x63p-3". Mapping tables carry a regression
// target's exact sums in it, so that merged tables equal the tables of the
// whole file bit for bit.

// MaxTextLen bounds the length of a Sum's text form (MaxEncodedLen bytes
// of magnitude in hexadecimal, with room for the sign and exponent).
const MaxTextLen = 2*MaxEncodedLen + 16

// ErrText is the error of text that is not a Sum's canonical form.
var ErrText = errors.New("not an exact sum's text (want 0 or [-]0xODDHEXpEXP)")

// AppendText appends the canonical text form of s to b.
func (s *Sum) AppendText(b []byte) []byte {
	if s.big != nil {
		v, e := s.mantExp()
		return appendBigText(b, v, e)
	}
	if isZero(s.w) {
		return append(b, '0')
	}
	if int64(s.w[2]) < 0 {
		b = append(b, '-')
	}
	mag := abs(s.w)
	tz := trailingZeros(mag)
	mag = shr(mag, uint(tz))
	b = append(b, "0x"...)
	started := false
	for i := 2; i >= 0; i-- {
		switch {
		case started:
			for k := 60; k >= 0; k -= 4 {
				b = append(b, "0123456789abcdef"[mag[i]>>uint(k)&15])
			}
		case mag[i] != 0:
			b = strconv.AppendUint(b, mag[i], 16)
			started = true
		}
	}
	b = append(b, 'p')
	return strconv.AppendInt(b, int64(s.exp)+int64(tz), 10)
}

func trailingZeros(w [3]uint64) int {
	for i, x := range w {
		if x != 0 {
			return 64*i + bits.TrailingZeros64(x)
		}
	}
	return 0
}

func appendBigText(b []byte, v *big.Int, e int32) []byte {
	tz := v.TrailingZeroBits()
	v.Rsh(v, tz)
	if v.Sign() < 0 {
		b = append(b, '-')
		v.Neg(v)
	}
	b = append(b, "0x"...)
	b = v.Append(b, 16)
	b = append(b, 'p')
	return strconv.AppendInt(b, int64(e)+int64(tz), 10)
}

// ParseText sets s from its canonical text form, refusing any other text
// and anything longer than MaxTextLen or with an exponent beyond the
// bound of the binary form.
func (s *Sum) ParseText(t string) error {
	*s = Sum{}
	if t == "0" {
		return nil
	}
	if len(t) > MaxTextLen {
		return ErrText
	}
	neg := strings.HasPrefix(t, "-")
	if neg {
		t = t[1:]
	}
	hex, exp, ok := strings.Cut(strings.TrimPrefix(t, "0x"), "p")
	if !ok || !strings.HasPrefix(t, "0x") || hex == "" || hex[0] == '0' || strings.IndexFunc(hex, func(r rune) bool {
		return !('0' <= r && r <= '9' || 'a' <= r && r <= 'f')
	}) >= 0 || strings.IndexByte("13579bdf", hex[len(hex)-1]) < 0 {
		return ErrText
	}
	e, err := strconv.ParseInt(exp, 10, 32)
	if err != nil || e < -maxExp || e > maxExp || strconv.FormatInt(e, 10) != exp {
		return ErrText
	}
	v, _ := new(big.Int).SetString(hex, 16)
	if neg {
		v.Neg(v)
	}
	s.setMantExp(v, int32(e))
	return nil
}
