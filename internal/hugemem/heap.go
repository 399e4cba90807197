package hugemem

import (
	"runtime"
	"runtime/metrics"
	"strconv"
	"strings"
	"sync"
	"unsafe"
)

// ReserveHeap has the Go heap take up to n bytes of fresh address space
// from the system now, advises it for huge pages, and returns it to the
// heap as free memory, so that the heap's growth into it later is backed
// by 2 MiB pages. It returns the bytes advised: 0 when huge pages are off
// (see Enabled), when n is below MinBytes, when the system could not
// spare the address space (see reserveSize), when an earlier call has
// reserved already (it acts once in a process), or when the heap already
// holds free memory (see How).
//
// Why: Go's runtime maps new heap memory with mmap(MAP_FIXED) as the heap
// grows, which an earlier madvise does not survive, and it never asks for
// huge pages itself. Every 4 KiB the heap touches for the first time is
// then a page fault, and on a virtual machine a fault is dear: about 8 to
// 13 us on the benchmark machine, where the 1M-row benchmark job took
// 41,000 to 44,000 of them, 0.33 to 0.44 s of system time in a run of 0.8
// s. With 1 GiB reserved the same job took about 2,000.
//
// How: one allocation of n bytes, which the runtime maps fresh and so does
// not zero, advised whole, then dropped and collected. Later allocations
// take free memory from the lowest address up, as they would have taken
// new memory, and reuse this range before the heap grows past it. Call it
// early, while the heap is small: an allocation served from memory the
// heap already holds would be zeroed, and so touched, by the runtime, so
// it reserves nothing once the heap holds more than maxSpare free bytes
// (after a job, as in the demo's later steps) or has reserved before.
//
// Memory: none of the range is resident until touched, but a huge page is
// resident whole once one byte of it is, which rounds the peak resident
// memory up by at most a few huge pages per region in use.
func ReserveHeap(n int) int {
	if !Enabled() {
		return 0
	}
	avail, strict := systemMemory()
	n = reserveSize(n, avail, strict)
	if n < MinBytes {
		return 0
	}
	reserveMu.Lock()
	defer reserveMu.Unlock()
	if reserved != [2]uintptr{} || heapSpare() > maxSpare {
		// The allocation could be served in part from memory the heap
		// holds already (a second call's from the first's), which the
		// runtime would zero, touching every page of it.
		return 0
	}
	b := make([]byte, n)
	base := unsafe.Pointer(unsafe.SliceData(b))
	start := uintptr(base)
	from, to := alignUp(start), alignDown(start+uintptr(n))
	if to <= from {
		return 0
	}
	advise(unsafe.Slice((*byte)(unsafe.Add(base, from-start)), to-from))
	reserved = [2]uintptr{from, to}
	b = nil
	runtime.GC()
	return int(to - from)
}

var (
	reserveMu sync.Mutex
	reserved  [2]uintptr // the range ReserveHeap advised, once it has
)

// maxSpare is the most free heap memory, in use before or given back to
// the system, that ReserveHeap accepts: what the runtime may zero when it
// serves the reservation from it. A command starts with a few hundred
// KiB; one that has already run a job (the demo's steps) holds tens or
// hundreds of MiB.
const maxSpare = 8 << 20

// heapSpare returns the heap's free bytes, resident or released.
func heapSpare() uint64 {
	sample := []metrics.Sample{{Name: "/memory/classes/heap/free:bytes"}, {Name: "/memory/classes/heap/released:bytes"}}
	metrics.Read(sample)
	var n uint64
	for _, s := range sample {
		if s.Value.Kind() == metrics.KindUint64 {
			n += s.Value.Uint64()
		}
	}
	return n
}

// reserveSize returns the bytes ReserveHeap takes when asked for n, with
// avail bytes of memory available on the system: at most half of avail,
// so that the mapping cannot be refused under the kernel's default
// overcommit heuristic (a refusal would end the program: the runtime
// treats it as out of memory), and none under strict overcommit
// accounting (vm.overcommit_memory = 2), where address space counts
// against a limit whether touched or not. avail < 0 means unknown:
// nothing is reserved.
func reserveSize(n int, avail int64, strict bool) int {
	if strict || avail < 0 || n <= 0 {
		return 0
	}
	return int(min(int64(n), avail/2))
}

// memAvailable returns the MemAvailable figure of a /proc/meminfo text in
// bytes, or -1 when the line is missing or malformed. The line reads
// "MemAvailable:   23874328 kB" (the kernel's proc(5) page; the unit is
// always kB, meaning KiB).
func memAvailable(meminfo string) int64 {
	for line := range strings.Lines(meminfo) {
		rest, ok := strings.CutPrefix(line, "MemAvailable:")
		if !ok {
			continue
		}
		f := strings.Fields(rest)
		if len(f) != 2 || f[1] != "kB" {
			return -1
		}
		kb, err := strconv.ParseInt(f[0], 10, 64)
		if err != nil || kb < 0 {
			return -1
		}
		return kb << 10
	}
	return -1
}
