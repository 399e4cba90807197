package hugemem

import (
	"bufio"
	"fmt"
	"os"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"unsafe"
)

func TestThpSetting(t *testing.T) {
	// The three forms of /sys/kernel/mm/transparent_hugepage/enabled
	// (the kernel's admin guide, transhuge.rst): the bracket marks the
	// setting in force.
	for _, tc := range []struct {
		in   string
		want bool
	}{
		{"always [madvise] never\n", true},
		{"[always] madvise never\n", true},
		{"always madvise [never]\n", false},
		{"", false},
	} {
		if got := thpSetting(tc.in); got != tc.want {
			t.Errorf("thpSetting(%q) = %v, want %v", tc.in, got, tc.want)
		}
	}
}

// eligible returns whether the mapping holding address p may get huge
// pages, from the THPeligible line of /proc/self/smaps, and whether the
// line was found.
func eligible(t *testing.T, p uintptr) (bool, bool) {
	f, err := os.Open("/proc/self/smaps")
	if err != nil {
		t.Skipf("no smaps: %v", err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	in := false
	for sc.Scan() {
		line := sc.Text()
		if lo, hi, ok := strings.Cut(strings.Fields(line)[0], "-"); ok && strings.Count(line, " ") > 3 {
			a, err1 := strconv.ParseUint(lo, 16, 64)
			b, err2 := strconv.ParseUint(hi, 16, 64)
			if err1 == nil && err2 == nil {
				in = uint64(p) >= a && uint64(p) < b
				continue
			}
		}
		if in && strings.HasPrefix(line, "THPeligible:") {
			return strings.TrimSpace(strings.TrimPrefix(line, "THPeligible:")) == "1", true
		}
	}
	return false, false
}

func testMake[T any](t *testing.T, n int, set func(*T, int), get func(T) int) {
	s := Make[T](n)
	if len(s) != n || cap(s) != n {
		t.Fatalf("Make(%d): len %d cap %d", n, len(s), cap(s))
	}
	var zero T
	for i := range s {
		if get(s[i]) != get(zero) {
			t.Fatalf("Make(%d)[%d] is not zero", n, i)
		}
		set(&s[i], i)
	}
	for i := range s {
		if get(s[i]) != i%251 {
			t.Fatalf("Make(%d)[%d] = %d after writing %d", n, i, get(s[i]), i%251)
		}
	}
	es := int(unsafe.Sizeof(zero))
	if !Enabled() || n*es < MinBytes {
		return
	}
	p := uintptr(unsafe.Pointer(&s[0]))
	if PageSize%es == 0 && p%PageSize != 0 {
		t.Errorf("Make(%d) of %d-byte values starts at %#x, not on a huge page", n, es, p)
	}
	if runtime.GOOS == "linux" {
		mid := p + uintptr(n*es/2)
		switch ok, found := eligible(t, mid); {
		case !found:
			t.Errorf("Make(%d): no THPeligible line in /proc/self/smaps for the mapping at %#x", n, mid)
		case !ok:
			t.Errorf("Make(%d): the mapping at %#x is not eligible for huge pages after the advice", n, mid)
		}
	}
}

func TestMake(t *testing.T) {
	for _, n := range []int{0, 1, 1000, MinBytes/8 - 1, MinBytes / 8, 3 << 20} {
		t.Run(fmt.Sprint("u64/", n), func(t *testing.T) {
			testMake(t, n, func(p *uint64, i int) { *p = uint64(i % 251) }, func(v uint64) int { return int(v) })
		})
		t.Run(fmt.Sprint("byte/", n), func(t *testing.T) {
			testMake(t, n, func(p *byte, i int) { *p = byte(i % 251) }, func(v byte) int { return int(v) })
		})
		type pair struct{ a, b uint32 }
		t.Run(fmt.Sprint("pair/", n), func(t *testing.T) {
			testMake(t, n, func(p *pair, i int) { p.a, p.b = uint32(i%251), 7 }, func(v pair) int { return int(v.a) })
		})
	}
}

func TestSlab(t *testing.T) {
	var s Slab[uint32]
	const piece = 1 << 16 // 256 KiB
	var pieces [][]uint32
	for taken := 0; taken < SlabStart+3*slabBytes; taken += 4 * piece {
		p := s.Take(piece)
		if len(p) != piece || cap(p) != piece {
			t.Fatalf("piece %d: len %d cap %d", len(pieces), len(p), cap(p))
		}
		for i := range p {
			if p[i] != 0 {
				t.Fatalf("piece %d is not zero at %d", len(pieces), i)
			}
			p[i] = uint32(len(pieces))
		}
		pieces = append(pieces, p)
	}
	for k, p := range pieces {
		for i := range p {
			if p[i] != uint32(k) {
				t.Fatalf("piece %d was overwritten at %d: %d", k, i, p[i])
			}
		}
	}
	if !Enabled() {
		if s.Spare() != 0 {
			t.Errorf("Spare() = %d without slabs", s.Spare())
		}
		return
	}
	// The slabs made so far, less what was handed out of them: each slab
	// is slabBytes plus a huge page of slack.
	fromSlabs := (len(pieces) - SlabStart/(4*piece)) * 4 * piece
	slabs := (fromSlabs + slabBytes - 1) / slabBytes
	if want := slabs*(slabBytes+PageSize) - fromSlabs; s.Spare() != want {
		t.Errorf("Spare() = %d, want %d (%d slabs, %d bytes handed out of them)", s.Spare(), want, slabs, fromSlabs)
	}
	// Past SlabStart, the pieces come from slabs of slabBytes: nearly
	// every piece follows the one before it in memory.
	first := SlabStart / (4 * piece)
	adjacent := 0
	for k := first + 1; k < len(pieces); k++ {
		if uintptr(unsafe.Pointer(&pieces[k][0]))-uintptr(unsafe.Pointer(&pieces[k-1][0])) == 4*piece {
			adjacent++
		}
	}
	if want := (len(pieces) - first - 1) * 3 / 4; adjacent < want {
		t.Errorf("%d of %d pieces past SlabStart follow the one before; want at least %d", adjacent, len(pieces)-first-1, want)
	}
}
