package hugemem

import (
	"os"
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
