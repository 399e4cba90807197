// Package folds assigns rows to cross-validation folds deterministically, in
// one streaming pass with no extra pass over the data: a row's fold depends
// only on the seed, k and what the row carries (its number, its group key, or
// its rank within its class), never on the rows around it or on the
// platform. Out-of-fold statistics then fit on the other folds (Pargent,
// Pfisterer, Thomas, Bischl, "Regularized target encoding outperforms
// traditional methods in supervised machine learning with high cardinality
// features", Computational Statistics 37(5), 2022).
//
// Hashes are XXH64 as specified in the xxHash repository
// (doc/xxhash_spec.md). Every function maps k < 1 to a single fold 0 instead
// of panicking.
package folds

import (
	"encoding/binary"
	"math/bits"

	"github.com/cespare/xxhash/v2"
)

// XXH64 primes (xxHash specification, doc/xxhash_spec.md).
const (
	prime1 uint64 = 11400714785074694791
	prime2 uint64 = 14029467366897019727
	prime3 uint64 = 1609587929392839161
	prime4 uint64 = 9650029242287828579
	prime5 uint64 = 2870177450012600261
)

// hash8 is XXH64 of the 8 bytes of x in little-endian order with the given
// seed: the specification's short-input path (fewer than 32 bytes) with one
// 8-byte lane, then the avalanche. Tests check it against the full
// implementation.
func hash8(seed, x uint64) uint64 {
	h := seed + prime5 + 8
	k := bits.RotateLeft64(x*prime2, 31) * prime1
	h ^= k
	h = bits.RotateLeft64(h, 27)*prime1 + prime4
	h ^= h >> 33
	h *= prime2
	h ^= h >> 29
	h *= prime3
	h ^= h >> 32
	return h
}

// Row returns the fold in [0, k) of the row-th data row (0-based): the XXH64
// hash of the row number as 8 little-endian bytes, with the seed, mod k.
// Fold sizes are multinomial: near-uniform but not exactly equal (the
// modulo bias, below 2^-60 for any k that fits an int32, is negligible).
// k < 1 gives 0.
func Row(seed, row uint64, k int) int {
	if k <= 1 {
		return 0
	}
	return int(hash8(seed, row) % uint64(k))
}

// Key returns the fold in [0, k) of a group key (a sender account, a route):
// the XXH64 hash of the key bytes with the seed, mod k, so all rows of one
// group share a fold and no group straddles training and held-out rows. The
// empty key is a key like any other. k < 1 gives 0. Key does not allocate.
func Key(seed uint64, key []byte, k int) int {
	if k <= 1 {
		return 0
	}
	var h uint64
	if seed == 0 {
		h = xxhash.Sum64(key)
	} else {
		var d xxhash.Digest
		d.ResetWithSeed(seed)
		d.Write(key) // never fails
		h = d.Sum64()
	}
	return int(h % uint64(k))
}

// Block returns the fold of row when rows rows are cut into k contiguous
// blocks: fold = floor(row*k/rows), computed in 128 bits so it cannot
// overflow. Folds are in row order, which keeps time-ordered files in time
// order, and sizes differ by at most 1 (fold f holds the rows with
// f*rows/k <= row < (f+1)*rows/k). Edge cases: rows == 0 or k < 1 gives 0;
// row >= rows gives k-1.
func Block(row, rows uint64, k int) int {
	if k <= 1 || rows == 0 {
		return 0
	}
	if row >= rows {
		return k - 1
	}
	hi, lo := bits.Mul64(row, uint64(k))
	q, _ := bits.Div64(hi, lo, rows) // hi < rows since row < rows
	return int(q)
}

// denseClasses is the number of small non-negative class values kept in a
// slice; other class values go through a map.
const denseClasses = 64

// Stratifier assigns folds so that each class is spread evenly over the
// folds as the stream goes: the rows of one class are taken in blocks of k
// consecutive rows (of that class), and each block gets a permutation of
// 0..k-1 drawn from the seed, the class and the block number. At any point
// the fold counts of a class differ by at most 1, and a row's fold depends
// only on the seed, k, its class and its rank within the class.
//
// A class is named either by a small integer (Next) or by its label
// (Stratum): a label names its class whatever order the classes were met
// in, so two passes that number the classes differently (first seen, or
// sorted) still give every row the same fold.
//
// A Stratifier is not safe for concurrent use. Next allocates only the first
// time it sees a class.
type Stratifier struct {
	seed   uint64
	k      int
	dense  [denseClasses]*Stratum
	sparse map[int]*Stratum
}

// Stratum is the fold stream of one class: its position in the stream and
// the permutation of its current block.
type Stratum struct {
	s    *Stratifier
	id   uint64 // what the permutations are drawn from, beside the seed
	rows uint64 // rows of the class seen so far
	perm []int32
}

// NewStratifier returns a Stratifier for k folds (k < 1 is taken as 1).
func NewStratifier(seed uint64, k int) *Stratifier {
	if k < 1 {
		k = 1
	}
	return &Stratifier{seed: seed, k: k}
}

// Next returns the fold in [0, k) of the next row, whose class is class (any
// int: a class code, 0/1 for a binary target).
func (s *Stratifier) Next(class int) int { return s.state(class).Next() }

// Stratum returns the fold stream of the class whose label is label: its
// permutations are drawn from the seed and the XXH64 hash of the label's
// bytes, so the folds of its rows do not depend on how the caller numbers
// the classes. Each call returns a new stream; the caller keeps one per
// class.
func (s *Stratifier) Stratum(label string) *Stratum {
	return s.StratumFrom(label, 0)
}

// StratumFrom returns the fold stream of the class whose label is label,
// positioned after its first rows rows: the stream of a table's part whose
// earlier parts hold rows rows of the class (a shard of a sharded fit).
// Its rows get the folds they get in the stream of the whole table.
func (s *Stratifier) StratumFrom(label string, rows uint64) *Stratum {
	st := &Stratum{s: s, id: xxhash.Sum64String(label), rows: rows, perm: make([]int32, s.k)}
	if k := uint64(s.k); rows%k != 0 {
		s.shuffle(st.perm, st.id, rows/k) // the block it stops within
	}
	return st
}

// Next returns the fold in [0, k) of the class's next row.
func (st *Stratum) Next() int {
	k := uint64(st.s.k)
	pos := int(st.rows % k)
	if pos == 0 {
		st.s.shuffle(st.perm, st.id, st.rows/k)
	}
	st.rows++
	return int(st.perm[pos])
}

// state returns the stream of class, creating it on first sight.
func (s *Stratifier) state(class int) *Stratum {
	if class >= 0 && class < denseClasses {
		if st := s.dense[class]; st != nil {
			return st
		}
		st := &Stratum{s: s, id: uint64(class), perm: make([]int32, s.k)}
		s.dense[class] = st
		return st
	}
	if st := s.sparse[class]; st != nil {
		return st
	}
	if s.sparse == nil {
		s.sparse = make(map[int]*Stratum)
	}
	st := &Stratum{s: s, id: uint64(class), perm: make([]int32, s.k)}
	s.sparse[class] = st
	return st
}

// shuffle fills perm with the permutation of block of the class whose id
// is id: Fisher-Yates driven by a splitmix64 stream whose start is the
// XXH64 hash, with the seed, of the id and block number as two
// little-endian 8-byte words. Indices are drawn without bias by Lemire's
// multiply-and-reject method.
func (s *Stratifier) shuffle(perm []int32, id uint64, block uint64) {
	var buf [16]byte
	binary.LittleEndian.PutUint64(buf[:8], id)
	binary.LittleEndian.PutUint64(buf[8:], block)
	var d xxhash.Digest
	d.ResetWithSeed(s.seed)
	d.Write(buf[:])
	state := d.Sum64()
	next := func() uint64 { // splitmix64
		state += 0x9E3779B97F4A7C15
		z := state
		z = (z ^ z>>30) * 0xBF58476D1CE4E5B9
		z = (z ^ z>>27) * 0x94D049BB133111EB
		return z ^ z>>31
	}
	for i := range perm {
		perm[i] = int32(i)
	}
	for i := len(perm) - 1; i > 0; i-- {
		n := uint64(i + 1)
		hi, lo := bits.Mul64(next(), n)
		if lo < n {
			for thresh := -n % n; lo < thresh; {
				hi, lo = bits.Mul64(next(), n)
			}
		}
		perm[i], perm[hi] = perm[hi], perm[i]
	}
}
