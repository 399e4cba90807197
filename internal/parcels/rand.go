package parcels

import (
	"math"
	"math/bits"
)

// gamma is the increment of the splitmix64 sequence (the odd integer
// closest to 2^64 divided by the golden ratio).
const gamma = 0x9E3779B97F4A7C15

// mix64 is the splitmix64 output function: a bijective finaliser of 64-bit
// words with good avalanche.
func mix64(z uint64) uint64 {
	z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9
	z = (z ^ (z >> 27)) * 0x94D049BB133111EB
	return z ^ (z >> 31)
}

// keyFor derives the key of one hash function from the seed and a salt.
func keyFor(seed, salt uint64) uint64 { return mix64(mix64(seed+gamma) + salt*gamma) }

// hashWith hashes x with the function of the given key.
func hashWith(key, x uint64) uint64 { return mix64(key + x*gamma) }

// stream is a splitmix64 generator. Its zero value is a valid (fixed)
// sequence; it is a value type so a row's generator lives in registers.
type stream struct{ s uint64 }

// next returns the next 64-bit word.
func (r *stream) next() uint64 {
	r.s += gamma
	return mix64(r.s)
}

// intn returns a value in [0, n) for n > 0 (multiply-shift; the bias is
// below n/2^64 and irrelevant here).
func (r *stream) intn(n int) int {
	hi, _ := bits.Mul64(r.next(), uint64(n))
	return int(hi)
}

// sqrt3 scales a sum of four uniforms to unit variance.
var sqrt3 = math.Sqrt(3)

// gauss4 turns a 64-bit word into an approximately standard normal value:
// the sum of its four 16-bit fields as uniforms (Irwin-Hall, n=4), centred
// and scaled to variance 1. It is bounded by ±2·sqrt(3) and uses integer
// arithmetic up to one multiply, so it is identical on every platform.
func gauss4(h uint64) float64 {
	s := h&0xFFFF + h>>16&0xFFFF + h>>32&0xFFFF + h>>48
	// Each field is uniform on {0..65535}: mean 32767.5, so the sum has
	// mean 131070.
	return (float64(s) - 131070) / 65536 * sqrt3
}

// unit53 turns a 64-bit word into a float64 uniform on [0, 1).
func unit53(h uint64) float64 { return float64(h>>11) * (1.0 / (1 << 53)) }
