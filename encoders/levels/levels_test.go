package levels

import (
	"bytes"
	"math/rand/v2"
	"runtime"
	"strconv"
	"testing"
	"time"
)

// TestHashVectors checks Hash against the XXH64 vectors of the xxHash
// repository (doc/xxhash_spec.md, cli/xsum_sanity_check.c), seed 0.
func TestHashVectors(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want uint64
	}{
		{"", 0xEF46DB3751D8E999},
		{"a", 0xD24EC4F1A98C6E5B},
		{"abc", 0x44BC2CF5AD770999},
		{"The quick brown fox jumps over the lazy dog", 0x0B242D361FDA71BC},
	} {
		if got := Hash([]byte(tc.in)); got != tc.want {
			t.Errorf("Hash(%q) = %#016x, want %#016x", tc.in, got, tc.want)
		}
	}
}

// randomKeys returns n keys with many repeats: random bytes of length 0..24
// drawn from a small alphabet (so short keys repeat), plus keys that differ
// only in length (runs of zero bytes and of 'a').
func randomKeys(n int, seed uint64) [][]byte {
	r := rand.New(rand.NewPCG(seed, 1))
	var keys [][]byte
	for i := 0; i < 40; i++ {
		keys = append(keys, bytes.Repeat([]byte{0}, i), bytes.Repeat([]byte("a"), i))
	}
	keys = append(keys, nil, []byte{}, []byte("PC-40217"), []byte("PC-4021"), []byte("PC-402170"))
	for len(keys) < n {
		k := make([]byte, r.IntN(25))
		for j := range k {
			k[j] = "ab\x00\xff"[r.IntN(4)]
		}
		keys = append(keys, k)
	}
	r.Shuffle(len(keys), func(i, j int) { keys[i], keys[j] = keys[j], keys[i] })
	return keys
}

// check compares t with the reference map (level -> id) and order (id ->
// level).
func check(t *testing.T, tb *Table, ref map[string]uint32, order []string) {
	t.Helper()
	if tb.Len() != len(order) {
		t.Fatalf("Len = %d, want %d", tb.Len(), len(order))
	}
	for id, k := range order {
		if got := tb.Level(uint32(id)); string(got) != k || got == nil {
			t.Fatalf("Level(%d) = %q, want %q", id, got, k)
		}
		if got, ok := tb.Lookup([]byte(k)); !ok || got != ref[k] {
			t.Fatalf("Lookup(%q) = %d, %v, want %d, true", k, got, ok, ref[k])
		}
	}
}

func TestAgainstMap(t *testing.T) {
	for _, hint := range []int{0, 10, 100000} {
		t.Run("hint="+strconv.Itoa(hint), func(t *testing.T) {
			var tb *Table
			if hint == 0 {
				tb = new(Table) // the zero value works too
			} else {
				tb = New(hint)
			}
			ref := map[string]uint32{}
			var order []string
			for i, k := range randomKeys(60000, uint64(hint)) {
				want, ok := ref[string(k)]
				if !ok {
					want = uint32(len(order))
					ref[string(k)] = want
					order = append(order, string(k))
				}
				if got := tb.Intern(k); got != want {
					t.Fatalf("key %d: Intern(%q) = %d, want %d", i, k, got, want)
				}
			}
			if len(order) < 10000 {
				t.Fatalf("only %d distinct keys: test data too repetitive", len(order))
			}
			check(t, tb, ref, order)
			for _, k := range []string{"not-a-level", "\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00"} {
				if id, ok := tb.Lookup([]byte(k)); ok {
					t.Fatalf("Lookup(%q) = %d, true for a key never added", k, id)
				}
			}
		})
	}
}

func TestEmptyAndLength(t *testing.T) {
	tb := New(0)
	steps := []struct {
		key  []byte
		want uint32
	}{
		{[]byte{}, 0},
		{nil, 0}, // nil and empty are the same level
		{[]byte{0}, 1},
		{[]byte{0, 0}, 2},
		{[]byte{0}, 1},
		{[]byte("ab"), 3},
		{[]byte("a"), 4},
		{[]byte("abc"), 5},
		{[]byte(""), 0},
	}
	for _, s := range steps {
		if got := tb.Intern(s.key); got != s.want {
			t.Fatalf("Intern(%q) = %d, want %d", s.key, got, s.want)
		}
	}
	if got := tb.Level(0); got == nil || len(got) != 0 {
		t.Fatalf("Level(0) = %#v, want empty non-nil", got)
	}
	if tb.Level(6) != nil || tb.Level(NoID) != nil || new(Table).Level(0) != nil {
		t.Fatal("Level of a missing id is not nil")
	}
	if _, ok := new(Table).Lookup(nil); ok || new(Table).Len() != 0 {
		t.Fatal("zero Table is not empty")
	}
}

// TestLevelAliasing: appending to a Level must not overwrite the next level,
// and interning a part of the arena itself must copy correctly across growth.
func TestLevelAliasing(t *testing.T) {
	tb := New(0)
	tb.Intern([]byte("PC-40217"))
	tb.Intern([]byte("PC-51000"))
	l := tb.Level(0)
	_ = append(l, "XXXX"...)
	if got := string(tb.Level(1)); got != "PC-51000" {
		t.Fatalf("append to Level(0) changed Level(1) to %q", got)
	}
	// Parent postcode groups (the code without its last digit) interned from
	// the arena itself: many are new, so the arena reallocates while the
	// source slice points into it.
	for i := 0; i < 5000; i++ {
		tb.Intern([]byte("PC-" + strconv.Itoa(10000+i)))
	}
	n := tb.Len()
	distinct := map[string]bool{}
	for id := 0; id < n; id++ {
		lvl := tb.Level(uint32(id))
		want := string(lvl[:len(lvl)-1])
		distinct[want] = true
		if got := tb.Level(tb.Intern(lvl[:len(lvl)-1])); string(got) != want {
			t.Fatalf("Intern of arena prefix %q gave level %q", want, got)
		}
	}
	if tb.Len() != n+len(distinct) || len(distinct) != 502 {
		t.Fatalf("Len after interning %d distinct prefixes = %d, want %d", len(distinct), tb.Len(), n+len(distinct))
	}
}

// TestRehashFromArena runs the growth path that tables past 2^32 slots take
// (hashing every level again from the arena) on a small table.
func TestRehashFromArena(t *testing.T) {
	defer func(old uint) { tagShiftMin = old }(tagShiftMin)
	tagShiftMin = 64
	tb := New(0)
	ref := map[string]uint32{}
	var order []string
	for _, k := range randomKeys(20000, 9) {
		if _, ok := ref[string(k)]; !ok {
			ref[string(k)] = uint32(len(order))
			order = append(order, string(k))
		}
		if got := tb.Intern(k); got != ref[string(k)] {
			t.Fatalf("Intern(%q) = %d, want %d", k, got, ref[string(k)])
		}
	}
	check(t, tb, ref, order)
}

func TestInternHash(t *testing.T) {
	a, b := New(0), New(0)
	for _, k := range randomKeys(5000, 3) {
		if x, y := a.Intern(k), b.InternHash(k, Hash(k)); x != y {
			t.Fatalf("Intern(%q) = %d, InternHash = %d", k, x, y)
		}
	}
}

func TestFull(t *testing.T) {
	defer func(old uint64) { levelLimit = old }(levelLimit)
	levelLimit = 3
	tb := New(0)
	for i, k := range []string{"a", "b", "c"} {
		if got := tb.Intern([]byte(k)); got != uint32(i) {
			t.Fatalf("Intern(%q) = %d, want %d", k, got, i)
		}
	}
	if got := tb.Intern([]byte("d")); got != NoID {
		t.Fatalf("Intern of a new level in a full table = %d, want NoID", got)
	}
	if got := tb.Intern([]byte("b")); got != 1 {
		t.Fatalf("Intern of a known level in a full table = %d, want 1", got)
	}
	if _, ok := tb.Lookup([]byte("d")); ok || tb.Len() != 3 {
		t.Fatal("full table added a level")
	}
}

func TestAllocs(t *testing.T) {
	const n = 100000
	keys := make([][]byte, n)
	for i := range keys {
		keys[i] = []byte("sender-" + strconv.Itoa(i))
	}
	tb := New(n)
	slots := len(tb.slots)
	i := 0
	avg := testing.AllocsPerRun(n-1, func() { tb.Intern(keys[i]); i++ })
	if avg > 0.001 { // only the arena's amortised growth allocates
		t.Fatalf("Intern of new levels: %v allocations per call", avg)
	}
	if len(tb.slots) != slots {
		t.Fatalf("slot table grew from %d to %d within sizeHint", slots, len(tb.slots))
	}
	i = 0
	if avg := testing.AllocsPerRun(1000, func() { tb.Intern(keys[i]); tb.Lookup(keys[i]); i++ }); avg != 0 {
		t.Fatalf("Intern/Lookup of known levels: %v allocations per call", avg)
	}
}

// TestMemBytes checks the documented footprint: at most 32 bytes per level
// beyond 1.25 times the level bytes (Go's slice growth slack), and that
// MemBytes matches the heap the table really holds.
func TestMemBytes(t *testing.T) {
	const n = 300000
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	tb := New(0)
	keyBytes := 0
	buf := []byte("PC-")
	for i := 0; i < n; i++ {
		k := strconv.AppendInt(buf[:3], int64(i), 10)
		keyBytes += len(k)
		tb.Intern(k)
	}
	runtime.GC()
	runtime.ReadMemStats(&after)
	mem := tb.MemBytes()
	if limit := 32*n + keyBytes*5/4; mem > limit {
		t.Fatalf("MemBytes = %d for %d levels of %d bytes, want <= %d", mem, n, keyBytes, limit)
	}
	heap := int(after.HeapAlloc) - int(before.HeapAlloc)
	if heap < mem*9/10 || heap > mem*11/10+1<<16 {
		t.Fatalf("heap grew by %d bytes, MemBytes says %d", heap, mem)
	}
	runtime.KeepAlive(tb)
}

// key writes the i-th benchmark level (a sender account code) into buf.
func key(buf []byte, i int) []byte {
	return strconv.AppendUint(append(buf[:0], "acct-"...), uint64(i)*2654435761%1_000_000_007, 36)
}

// heapInUse returns the live heap after a collection.
func heapInUse() int {
	runtime.GC()
	var m runtime.MemStats
	runtime.ReadMemStats(&m)
	return int(m.HeapAlloc)
}

// BenchmarkIntern builds a table of n distinct levels from empty (growth
// included), then interns every level again in a scattered order (all hits),
// against a map[string]uint32 doing the same. Metrics: build-ns/level,
// hit-ns/level, bytes/level (live heap of the finished structure, level
// bytes included). Run: go test -run '^$' -bench Intern -benchtime 1x.
func BenchmarkIntern(b *testing.B) {
	for _, n := range []int{1_000_000, 10_000_000} {
		name := strconv.Itoa(n/1_000_000) + "M"
		b.Run("levels="+name+"/table", func(b *testing.B) {
			buf := make([]byte, 0, 32)
			var build, hit time.Duration
			bytesPer := 0.0
			for it := 0; it < b.N; it++ {
				base := heapInUse()
				start := time.Now()
				tb := New(0)
				for i := 0; i < n; i++ {
					tb.Intern(key(buf, i))
				}
				build += time.Since(start)
				bytesPer = float64(heapInUse()-base) / float64(n)
				start = time.Now()
				for i := 0; i < n; i++ {
					tb.Intern(key(buf, i*1_000_003%n))
				}
				hit += time.Since(start)
				if tb.Len() != n {
					b.Fatalf("Len = %d, want %d", tb.Len(), n)
				}
			}
			b.ReportMetric(float64(build.Nanoseconds())/float64(b.N*n), "build-ns/level")
			b.ReportMetric(float64(hit.Nanoseconds())/float64(b.N*n), "hit-ns/level")
			b.ReportMetric(bytesPer, "bytes/level")
		})
		b.Run("levels="+name+"/map", func(b *testing.B) {
			buf := make([]byte, 0, 32)
			var build, hit time.Duration
			bytesPer := 0.0
			for it := 0; it < b.N; it++ {
				base := heapInUse()
				start := time.Now()
				m := make(map[string]uint32)
				for i := 0; i < n; i++ {
					k := key(buf, i)
					if _, ok := m[string(k)]; !ok {
						m[string(k)] = uint32(len(m))
					}
				}
				build += time.Since(start)
				bytesPer = float64(heapInUse()-base) / float64(n)
				start = time.Now()
				sum := uint32(0)
				for i := 0; i < n; i++ {
					sum += m[string(key(buf, i*1_000_003%n))]
				}
				hit += time.Since(start)
				if len(m) != n {
					b.Fatalf("len = %d, want %d", len(m), n)
				}
				runtime.KeepAlive(sum)
			}
			b.ReportMetric(float64(build.Nanoseconds())/float64(b.N*n), "build-ns/level")
			b.ReportMetric(float64(hit.Nanoseconds())/float64(b.N*n), "hit-ns/level")
			b.ReportMetric(bytesPer, "bytes/level")
		})
	}
}

// TestChunkBoundaries fills arena chunks to their edges: empty levels at a
// full chunk, levels that just fit or just miss, and levels long enough to
// take a chunk of their own; every level must read back as interned.
func TestChunkBoundaries(t *testing.T) {
	tb := New(0)
	var want [][]byte
	add := func(b []byte) {
		id := tb.Intern(b)
		if int(id) != len(want) {
			t.Fatalf("level %d got id %d", len(want), id)
		}
		want = append(want, append([]byte(nil), b...))
	}
	for i, n := range []int{chunkSize - 10, 9, 0, 0, 1, lenMask, 5, lenMask + 3, chunkSize - 1, 0, 2 * chunkSize} {
		b := bytes.Repeat([]byte{byte('a' + i)}, n)
		if n > 0 {
			b[n-1] = byte(i) // distinct levels of equal length
		}
		if n == 0 && i > 2 {
			continue // the empty level once is enough
		}
		add(b)
	}
	for id, w := range want {
		if got := tb.Level(uint32(id)); !bytes.Equal(got, w) {
			t.Errorf("level %d: %d bytes, want %d", id, len(got), len(w))
		}
		if got, ok := tb.Lookup(w); !ok || int(got) != id {
			t.Errorf("Lookup of level %d = %d, %v", id, got, ok)
		}
	}
}

// shipmentKeys returns n random shipment-id-like keys (an S and 10 base-36
// characters, as the benchmark tables hold), aliasing one buffer.
func shipmentKeys(n int) [][]byte {
	const digits = "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ"
	buf := make([]byte, 0, 11*n)
	keys := make([][]byte, n)
	x := uint64(88172645463325252)
	for i := range keys {
		at := len(buf)
		buf = append(buf, 'S')
		for j := 0; j < 10; j++ {
			x ^= x << 13
			x ^= x >> 7
			x ^= x << 17
			buf = append(buf, digits[x%36])
		}
		keys[i] = buf[at:len(buf):len(buf)]
	}
	return keys
}

// BenchmarkBatch interns n nearly unique keys into an empty table, one by
// one (Intern) or a batch of 4096 at a time (InternBatch), then looks every
// key up again in the same order, one by one (Lookup) or by batch
// (LookupBatch): the two passes over a column of shipment ids. Metrics in
// ns per key. Run: go test -run '^$' -bench Batch -benchtime 1x ./encoders/levels
func BenchmarkBatch(b *testing.B) {
	const n = 10_000_000
	keys := shipmentKeys(n)
	ids := make([]uint32, 4096)
	for _, batch := range []bool{false, true} {
		name := "one"
		if batch {
			name = "batch"
		}
		b.Run(name, func(b *testing.B) {
			var build, look time.Duration
			for it := 0; it < b.N; it++ {
				tb := New(0)
				start := time.Now()
				for i := 0; i < n; i += len(ids) {
					ks := keys[i:min(i+len(ids), n)]
					if batch {
						tb.InternBatch(ks, ids)
					} else {
						for j, k := range ks {
							ids[j] = tb.Intern(k)
						}
					}
				}
				build += time.Since(start)
				start = time.Now()
				miss := 0
				for i := 0; i < n; i += len(ids) {
					ks := keys[i:min(i+len(ids), n)]
					if batch {
						tb.LookupBatch(ks, ids)
					} else {
						for j, k := range ks {
							id, _ := tb.Lookup(k)
							ids[j] = id
						}
					}
					for j := range ks {
						if ids[j] == NoID {
							miss++
						}
					}
				}
				look += time.Since(start)
				if miss != 0 {
					b.Fatalf("%d keys not found", miss)
				}
			}
			b.ReportMetric(float64(build.Nanoseconds())/float64(b.N*n), "intern-ns/key")
			b.ReportMetric(float64(look.Nanoseconds())/float64(b.N*n), "lookup-ns/key")
		})
	}
}

// TestBatchMatchesOneByOne interns and looks up batches holding repeats,
// keys seen in earlier batches and (for lookups) keys never added, across
// slot table growth, and checks every id against Intern and Lookup called
// one key at a time on a second table.
func TestBatchMatchesOneByOne(t *testing.T) {
	keys := randomKeys(20000, 9)
	for _, size := range []int{1, 7, batchGroup, batchGroup + 1, 1000} {
		bt, ref := New(0), New(0)
		ids := make([]uint32, size)
		for start := 0; start < 3*len(keys)/2; start += size {
			batch := make([][]byte, 0, size)
			for i := start; i < start+size; i++ {
				batch = append(batch, keys[(i*7)%len(keys)%(i/3+1)])
			}
			bt.InternBatch(batch, ids)
			for j, k := range batch {
				if want := ref.Intern(k); ids[j] != want {
					t.Fatalf("size %d: InternBatch id %d, Intern gives %d", size, ids[j], want)
				}
			}
		}
		if bt.Len() != ref.Len() {
			t.Fatalf("size %d: %d levels, want %d", size, bt.Len(), ref.Len())
		}
		probe := append(randomKeys(500, 10), keys[:500]...)
		for start := 0; start < len(probe); start += size {
			batch := probe[start:min(start+size, len(probe))]
			bt.LookupBatch(batch, ids)
			for j, k := range batch {
				want, ok := ref.Lookup(k)
				if !ok {
					want = NoID
				}
				if ids[j] != want {
					t.Fatalf("size %d: LookupBatch(%q) = %d, Lookup gives %d", size, k, ids[j], want)
				}
			}
		}
	}
	var empty Table
	ids := []uint32{7}
	empty.LookupBatch([][]byte{[]byte("x")}, ids)
	if ids[0] != NoID {
		t.Errorf("LookupBatch on an empty table = %d, want NoID", ids[0])
	}
}

// TestReserve: reserving room part way through (by the tags, and from the
// arena) keeps every id, and the slot table then holds the reserved levels
// without growing again.
func TestReserve(t *testing.T) {
	for _, fromArena := range []bool{false, true} {
		func() {
			if fromArena {
				defer func(old uint) { tagShiftMin = old }(tagShiftMin)
				tagShiftMin = 64
			}
			tb := New(0)
			ref := map[string]uint32{}
			var order []string
			keys := randomKeys(30000, 4)
			for i, k := range keys {
				if i == 1000 {
					tb.Reserve(40000)
					if len(tb.slots)/4*3 < 40000 {
						t.Fatalf("Reserve(40000): %d slots", len(tb.slots))
					}
				}
				if _, ok := ref[string(k)]; !ok {
					ref[string(k)] = uint32(len(order))
					order = append(order, string(k))
				}
				before := len(tb.slots)
				if got := tb.Intern(k); got != ref[string(k)] {
					t.Fatalf("arena %v: Intern(%q) = %d, want %d", fromArena, k, got, ref[string(k)])
				}
				if i > 1000 && len(tb.slots) != before {
					t.Fatalf("arena %v: the slot table grew after Reserve", fromArena)
				}
			}
			check(t, tb, ref, order)
			n := len(tb.slots)
			tb.Reserve(10) // never shrinks
			if len(tb.slots) != n {
				t.Fatal("Reserve shrank the table")
			}
		}()
	}
	empty := &Table{}
	empty.Reserve(100)
	if empty.Intern([]byte("PC-1")) != 0 || len(empty.slots)/4*3 < 100 {
		t.Fatal("Reserve on the zero Table")
	}
}

// BenchmarkBatchRepeats interns 10M keys drawn with a Zipf-like skew from
// 700,000 account-like levels, most of them already in the table: the
// account column of the benchmark job, whose values arrive PLAIN.
func BenchmarkBatchRepeats(b *testing.B) {
	const n, levels = 10_000_000, 700_000
	rng := rand.New(rand.NewPCG(7, 11))
	z := rand.NewZipf(rng, 1.1, 8, levels-1)
	keys := make([][]byte, n)
	for i := range keys {
		keys[i] = []byte("A" + strconv.Itoa(1_000_000+int(z.Uint64())))
	}
	ids := make([]uint32, 4096)
	var took time.Duration
	for it := 0; it < b.N; it++ {
		tb := New(0)
		start := time.Now()
		for i := 0; i < n; i += len(ids) {
			tb.InternBatch(keys[i:min(i+len(ids), n)], ids)
		}
		took += time.Since(start)
	}
	b.ReportMetric(float64(took.Nanoseconds())/float64(b.N*n), "intern-ns/key")
}
