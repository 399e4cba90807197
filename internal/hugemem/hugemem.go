// Package hugemem allocates the large arrays that level tables and their
// statistics reach at random (hash slots, level bytes, per-level counts,
// sort keys) so that Linux may back them with transparent huge pages of
// 2 MiB instead of pages of 4 KiB.
//
// Why: a table of millions of levels spans hundreds of megabytes, and a
// random access into it then misses not only the caches but also the TLB;
// on a virtual machine each such miss walks two page tables. With 2 MiB
// pages one TLB entry covers 512 times the memory, and the first touch of
// the memory takes one page fault per 2 MiB instead of one per 4 KiB.
// Measured with a probe on the 2-core benchmark machine (filling a 400 MB
// array, then a random gather of 20M values from it): the first touch 2 to
// 5 times faster and the gather about 2.8 times faster with the advice
// than without; on the whole benchmark job the gain is a few per cent (see
// DEVELOPERS.md).
//
// How: where the kernel's transparent_hugepage setting is "madvise" (a
// common default), memory gets huge pages only where the program asks for
// them with madvise(MADV_HUGEPAGE); Go's runtime does not ask. Make
// allocates a slice on the Go heap with up to one huge page of slack,
// starts it on a 2 MiB boundary when it can, and advises the whole huge
// pages inside it before they are touched. The memory stays the Go heap's:
// the garbage collector frees it as usual. Where huge pages are off
// ("never"), on other systems, or with MANYFOLD_HUGEPAGES=off in the
// environment, Make is make.
//
// Memory: a huge page is resident as soon as one byte of it is touched, so
// small arrays are never advised (below MinBytes), and Slab hands out plain
// pieces until its owner has taken SlabStart bytes: a small table costs
// what it did.
//
// The rest of the heap: ReserveHeap, called once at the start of a
// command, advises the address range the heap will grow into, so that its
// first touches fault once per 2 MiB (see heap.go).
package hugemem

import (
	"os"
	"strings"
	"sync"
	"unsafe"
)

// PageSize is the size of a transparent huge page on x86-64 and on arm64
// with 4 KiB base pages.
const PageSize = 2 << 20

// MinBytes is the smallest array Make advises.
const MinBytes = 2 * PageSize

var (
	once    sync.Once
	enabled bool
)

// Enabled reports whether Make asks for huge pages: the system offers them
// on request and MANYFOLD_HUGEPAGES is not "off".
func Enabled() bool {
	once.Do(func() {
		if os.Getenv("MANYFOLD_HUGEPAGES") == "off" {
			return
		}
		enabled = supported()
	})
	return enabled
}

// thpSetting reads the kernel's setting line, such as
// "always [madvise] never", and reports whether huge pages may be had.
func thpSetting(s string) bool {
	return strings.Contains(s, "[madvise]") || strings.Contains(s, "[always]")
}

// Make returns a slice of n zero values of T. When the slice spans at
// least MinBytes and Enabled, its memory starts on a huge-page boundary
// where the element size allows, and the whole huge pages within it are
// advised (see the package comment). Its capacity is n.
func Make[T any](n int) []T {
	var zero T
	es := int(unsafe.Sizeof(zero))
	if !advised(n, es) {
		return make([]T, n)
	}
	extra := PageSize / es
	s := make([]T, n+extra)
	p := uintptr(unsafe.Pointer(unsafe.SliceData(s)))
	skip := (alignUp(p) - p)
	lo := 0
	if skip%uintptr(es) == 0 {
		lo = int(skip) / es
	}
	s = s[lo : lo+n : lo+n]
	base := unsafe.Pointer(unsafe.SliceData(s))
	start := uintptr(base)
	from, to := alignUp(start)-start, alignDown(start+uintptr(n*es))-start
	if to > from {
		advise(unsafe.Slice((*byte)(unsafe.Add(base, from)), to-from))
	}
	return s
}

// Footprint returns the heap bytes Make(n) holds for a T of size es
// bytes: n*es, plus the huge page of slack of an advised slice.
func Footprint(n, es int) int {
	if !advised(n, es) {
		return n * es
	}
	return n*es + PageSize
}

// advised reports whether Make advises an array of n values of es bytes.
func advised(n, es int) bool { return es > 0 && n*es >= MinBytes && Enabled() }

func alignUp(p uintptr) uintptr   { return (p + PageSize - 1) &^ (PageSize - 1) }
func alignDown(p uintptr) uintptr { return p &^ (PageSize - 1) }

// SlabStart is the number of bytes a Slab hands out as plain allocations
// before it takes its pieces from advised slabs.
const SlabStart = 4 << 20

// slabBytes is the size of an advised slab.
const slabBytes = 16 << 20

// Slab hands out pieces of a growing structure (the chunks of an arena,
// the blocks of a table), carved from advised slabs of 16 MiB once the
// structure has taken SlabStart bytes, so that even pieces smaller than a
// huge page sit in huge pages. The zero value is ready to use. A Slab is
// not safe for concurrent use.
type Slab[T any] struct {
	rest  []T
	taken int // bytes handed out
	spare int // heap bytes of the slabs not handed out: unused ends and slack
}

// Spare returns the heap bytes the Slab holds that Take has not handed
// out: the unused ends of its slabs and their slack.
func (s *Slab[T]) Spare() int { return s.spare }

// Take returns a piece of n zero values with capacity n. Pieces never
// overlap; each keeps its slab alive.
func (s *Slab[T]) Take(n int) []T {
	var zero T
	es := int(unsafe.Sizeof(zero))
	start := s.taken
	s.taken += n * es
	if start < SlabStart || n*es > slabBytes/4 || !Enabled() {
		return make([]T, n)
	}
	if n > len(s.rest) {
		s.rest = Make[T](slabBytes / es)
		s.spare += Footprint(slabBytes/es, es)
	}
	p := s.rest[:n:n]
	s.rest = s.rest[n:]
	s.spare -= n * es
	return p
}
