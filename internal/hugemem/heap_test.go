package hugemem

import (
	"os"
	"os/exec"
	"runtime"
	"strings"
	"testing"
)

func TestMemAvailable(t *testing.T) {
	// The line format is proc(5)'s ("MemAvailable %lu (since Linux
	// 3.14)", in kB like every size line of /proc/meminfo).
	for _, tc := range []struct {
		in   string
		want int64
	}{
		{"MemTotal:       24567212 kB\nMemFree:        22235148 kB\nMemAvailable:   23874328 kB\nBuffers: 1 kB\n", 23874328 << 10},
		{"MemAvailable: 0 kB", 0},
		{"MemTotal:       24567212 kB\n", -1},
		{"MemAvailable:   12 MB\n", -1},
		{"MemAvailable:   x kB\n", -1},
		{"MemAvailable:\n", -1},
		{"", -1},
	} {
		if got := memAvailable(tc.in); got != tc.want {
			t.Errorf("memAvailable(%q) = %d, want %d", tc.in, got, tc.want)
		}
	}
}

func TestReserveSize(t *testing.T) {
	for _, tc := range []struct {
		n      int
		avail  int64
		strict bool
		want   int
	}{
		{1 << 30, 24 << 30, false, 1 << 30},
		{1 << 30, 1 << 30, false, 1 << 29}, // half of what is available
		{1 << 30, 24 << 30, true, 0},       // strict accounting: nothing
		{1 << 30, -1, false, 0},            // unknown: nothing
		{0, 24 << 30, false, 0},
		{-5, 24 << 30, false, 0},
	} {
		if got := reserveSize(tc.n, tc.avail, tc.strict); got != tc.want {
			t.Errorf("reserveSize(%d, %d, %v) = %d, want %d", tc.n, tc.avail, tc.strict, got, tc.want)
		}
	}
}

// inFreshProcess reports whether test name runs in a child process of its
// own (the test binary again, with a heap of its own); when it does not,
// it starts that child, waits, and passes on its failure or skip.
// A process reserves its heap once, and only while the heap holds no free
// memory, so these tests cannot share the test binary's heap with others
// (nor with themselves under -count or -shuffle).
func inFreshProcess(t *testing.T, name string) bool {
	t.Helper()
	if os.Getenv("HUGEMEM_FRESH") == name {
		return true
	}
	cmd := exec.Command(os.Args[0], "-test.run", "^"+name+"$", "-test.v", "-test.count=1")
	cmd.Env = append(os.Environ(), "HUGEMEM_FRESH="+name)
	out, err := cmd.CombinedOutput()
	switch {
	case err != nil:
		t.Fatalf("%s in a process of its own: %v\n%s", name, err, out)
	case strings.Contains(string(out), "--- SKIP: "+name):
		t.Skipf("%s in a process of its own skipped:\n%s", name, out)
	case !strings.Contains(string(out), "--- PASS: "+name):
		t.Fatalf("%s in a process of its own did not pass:\n%s", name, out)
	}
	return false
}

func TestReserveHeap(t *testing.T) {
	if !Enabled() || runtime.GOOS != "linux" {
		if got := ReserveHeap(64 << 20); got != 0 {
			t.Fatalf("ReserveHeap without huge pages = %d, want 0", got)
		}
		t.Skip("huge pages are off here")
	}
	if !inFreshProcess(t, "TestReserveHeap") {
		return
	}
	if got := ReserveHeap(MinBytes - 1); got != 0 {
		t.Errorf("ReserveHeap(MinBytes-1) = %d, want 0", got)
	}
	const n = 64 << 20
	got := ReserveHeap(n)
	avail, strict := systemMemory()
	if reserveSize(n, avail, strict) < n {
		if got != 0 && got > reserveSize(n, avail, strict) {
			t.Fatalf("ReserveHeap(%d) = %d, more than the system allows", n, got)
		}
		t.Skip("the system cannot spare the address space")
	}
	// The advised range is whole huge pages of the allocation: at most
	// one page shorter than it at each end.
	if got%PageSize != 0 || got < n-2*PageSize || got > n {
		t.Fatalf("ReserveHeap(%d) = %d", n, got)
	}
	lo, hi := reserved[0], reserved[1]
	if hi-lo != uintptr(got) || lo%PageSize != 0 {
		t.Fatalf("reserved %#x-%#x for %d bytes", lo, hi, got)
	}
	// The advice holds over the whole range, which went back to the
	// heap as free memory.
	for _, p := range []uintptr{lo, lo + (hi-lo)/2, hi - 1} {
		switch ok, found := eligible(t, p); {
		case !found:
			t.Errorf("no THPeligible line in /proc/self/smaps for the mapping at %#x", p)
		case !ok:
			t.Errorf("the mapping at %#x is not eligible for huge pages after ReserveHeap", p)
		}
	}
	// Once in a process: a second call reserves nothing.
	if again := ReserveHeap(n); again != 0 || reserved != [2]uintptr{lo, hi} {
		t.Errorf("a second ReserveHeap(%d) = %d, reserved %#x-%#x; want 0 and the first range", n, again, reserved[0], reserved[1])
	}
	if free := heapSpare(); free < uint64(got) {
		t.Errorf("the heap holds %d free bytes after ReserveHeap(%d) = %d", free, n, got)
	}
}

// TestReserveHeapAfterUse: a heap that already holds free memory, as
// after a job, gets no reservation, since the runtime could serve it from
// that memory and zero it, touching every page.
func TestReserveHeapAfterUse(t *testing.T) {
	if !Enabled() || runtime.GOOS != "linux" {
		t.Skip("huge pages are off here")
	}
	if !inFreshProcess(t, "TestReserveHeapAfterUse") {
		return
	}
	b := make([]byte, 64<<20)
	for i := range b {
		b[i] = 1
	}
	b = nil
	runtime.GC()
	if spare := heapSpare(); spare <= maxSpare {
		t.Fatalf("after a 64 MiB allocation is dropped the heap holds %d free bytes, want more than %d", spare, maxSpare)
	}
	if got := ReserveHeap(64 << 20); got != 0 {
		t.Fatalf("ReserveHeap after use = %d, want 0", got)
	}
}
