package hugemem

import (
	"os"
	"strings"
	"syscall"
)

// madvHugepage is MADV_HUGEPAGE of linux/mman.h.
const madvHugepage = 14

func supported() bool {
	b, err := os.ReadFile("/sys/kernel/mm/transparent_hugepage/enabled")
	return err == nil && thpSetting(string(b))
}

// advise asks for huge pages over b, which starts and ends on huge-page
// boundaries. A refusal only leaves the pages small, so its error is
// dropped.
func advise(b []byte) { _ = syscall.Madvise(b, madvHugepage) }

// systemMemory returns the memory available to new allocations
// (MemAvailable of /proc/meminfo, in bytes; -1 when unknown) and whether
// the kernel accounts address space strictly (vm.overcommit_memory = 2).
func systemMemory() (avail int64, strict bool) {
	b, err := os.ReadFile("/proc/sys/vm/overcommit_memory")
	strict = err == nil && strings.TrimSpace(string(b)) == "2"
	b, err = os.ReadFile("/proc/meminfo")
	if err != nil {
		return -1, strict
	}
	return memAvailable(string(b)), strict
}
