// Package levels interns the distinct values (levels) of a categorical
// column: a compact table that maps millions of distinct byte strings to
// dense ids 0, 1, 2, ... in the order they were first seen, and back.
//
// Layout: the bytes of the levels sit end to end in an arena of 1 MiB
// chunks (a level never spans two; a level of 1 MiB or more gets a chunk of
// its own), so the arena grows without copying what it holds; a level's id
// indexes a table, in blocks, of 64-bit locations (chunk, offset, length);
// lookups go through an open-addressing table of 8-byte
// slots, each holding a 32-bit tag taken from the level's hash and the
// level's id, probed linearly from the hash's top bits and kept at most 3/4
// full. As the home slot is drawn from the same top bits the tag keeps, the
// table doubles without rereading the arena or hashing again (up to 2^32
// slots), writing the new slots almost in order.
//
// Memory: about 19 to 30 bytes per level on top of the level's own bytes (8
// for the location, 8/load for the slots, plus the unused end of the last
// chunk and block), about half of what a map[string]uint32 holding the same
// levels takes, and never twice that while growing, as nothing but the slot
// table is ever reallocated. The arena may grow past 4 GiB of level bytes;
// the only limits are memory and the id space (MaxLevels). A large table's
// slots, chunks and blocks sit in huge pages where the system allows
// (internal/hugemem), as its lookups land at random.
package levels

import (
	"bytes"
	"math"
	"unsafe"

	"github.com/cespare/xxhash/v2"

	"manyfold/internal/hugemem"
)

// MaxLevels is the most levels a Table holds: ids are uint32 and NoID is
// kept back. Reaching it needs well over 100 GiB of memory.
const MaxLevels = math.MaxUint32

// NoID is the id Intern returns for a new level when the table already
// holds MaxLevels levels; the level is not added. It is never a valid id.
const NoID uint32 = math.MaxUint32

// levelLimit is MaxLevels; tests lower it to exercise the full-table path.
var levelLimit uint64 = MaxLevels

// tagShiftMin is the smallest shift at which rehash takes home slots from
// the tags (log2(slots) <= 32); tests raise it to exercise the other path.
var tagShiftMin uint = 32

// minSlots is the smallest slot table.
const minSlots = 8

// Hash returns the XXH64 hash (seed 0) of b, the hash InternHash expects.
func Hash(b []byte) uint64 { return xxhash.Sum64(b) }

// slot is one entry of the open-addressing table: tag is the high 32 bits
// of the level's hash, id1 its id plus one (0 marks an empty slot). A
// level's home slot is the top log2(len(slots)) bits of its hash, so levels
// sharing a home also share that many tag bits: the tag then tells them apart
// by its remaining bits (a false match costs one byte comparison, no error).
type slot struct{ tag, id1 uint32 }

// Table interns levels. The zero value is an empty table ready to use; New
// presizes one. A Table is not safe for concurrent use, but its methods that
// only read (Lookup, Level, Len, MemBytes) may run concurrently with each
// other.
type Table struct {
	chunks [][]byte   // the arena; chunks[cur] is the one being filled
	cur    int        // index of the chunk being filled, -1 before the first
	locs   [][]uint64 // locs[id>>blockBits][id&blockMask]: see loc
	n      int        // levels
	slots  []slot     // power-of-two length
	shift  uint       // 64 - log2(len(slots)): home slot of hash h is h >> shift
	grow   int        // level count above which slots doubles

	// Where the arena's chunks and the location blocks come from: huge
	// pages once the table is large (see hugemem).
	arena  hugemem.Slab[byte]
	blocks hugemem.Slab[uint64]
}

// Arena and location table geometry. A location packs a level's chunk (24
// bits), its offset in the chunk (20 bits) and its length (20 bits); a level
// of lenMask bytes or more fills a chunk of its own and records the length
// lenMask, its true length being the chunk's.
const (
	chunkSize = 1 << 20
	lenBits   = 20
	lenMask   = 1<<lenBits - 1
	offBits   = 20
	blockBits = 16
	blockMask = 1<<blockBits - 1
)

func (t *Table) loc(id uint32) uint64 { return t.locs[id>>blockBits][id&blockMask] }

// New returns an empty Table sized for sizeHint levels without growing its
// slot or offset tables (the arena still grows as level bytes arrive).
// sizeHint <= 0 gives a small table.
func New(sizeHint int) *Table {
	t := &Table{}
	t.init(sizeHint)
	return t
}

// init allocates the slot and offset tables for sizeHint levels.
func (t *Table) init(sizeHint int) {
	if sizeHint < 0 {
		sizeHint = 0
	}
	n, shift := minSlots, uint(64-3)
	for n/4*3 < sizeHint {
		n *= 2
		shift--
	}
	t.slots = hugemem.Make[slot](n)
	t.shift = shift
	t.grow = n / 4 * 3
	t.cur = -1
}

// Len returns the number of levels.
func (t *Table) Len() int { return t.n }

// Level returns the bytes of level id, aliasing the arena: the caller must
// not modify them; appending to the result copies (its capacity ends with
// the level). An id that is not in the table gives nil.
func (t *Table) Level(id uint32) []byte {
	if uint64(id) >= uint64(t.n) {
		return nil
	}
	return t.at(t.loc(id))
}

// AppendLevels appends the bytes of the levels ids[i] to data and, after
// each, the length of data to ends, and returns both: the levels of a
// column of text (table.Column's Data and Offsets, when ends starts with
// the offset 0). An id not in the table appends no bytes. It gives the
// same bytes as appending Level(id) for each id in turn, faster when the
// ids are scattered over a table larger than the cache: the locations
// are loaded first by a loop that does nothing else, so their cache
// misses overlap, and only then are the bytes copied.
func (t *Table) AppendLevels(data []byte, ends []int32, ids []uint32) ([]byte, []int32) {
	const batch = 256
	var locs [batch]uint64
	for len(ids) > 0 {
		n := min(len(ids), batch)
		for i, id := range ids[:n] {
			if uint64(id) < uint64(t.n) {
				locs[i] = t.locs[id>>blockBits][id&blockMask]
			} else {
				locs[i] = noLoc
			}
		}
		for _, l := range locs[:n] {
			if l != noLoc {
				data = append(data, t.at(l)...)
			}
			ends = append(ends, int32(len(data)))
		}
		ids = ids[n:]
	}
	return data, ends
}

// noLoc marks the location of an id not in the table in AppendLevels. No
// level has it: its offset (2^20-1) and length (2^20-2) would pass the end
// of the level's chunk.
const noLoc = math.MaxUint64 - 1

// at returns the bytes at location l (see Level).
func (t *Table) at(l uint64) []byte {
	c := t.chunks[l>>(offBits+lenBits)]
	n := l & lenMask
	if n == lenMask {
		return c[:len(c):len(c)]
	}
	lo := (l >> lenBits) & (1<<offBits - 1)
	return c[lo : lo+n : lo+n]
}

// add copies b into the arena as level id t.n and records its location.
func (t *Table) add(b []byte) {
	var l uint64
	if len(b) >= lenMask {
		t.chunks = append(t.chunks, append([]byte(nil), b...))
		l = uint64(len(t.chunks)-1)<<(offBits+lenBits) | lenMask
	} else {
		if t.cur < 0 || len(t.chunks[t.cur])+len(b) >= chunkSize {
			t.chunks = append(t.chunks, t.arena.Take(chunkSize)[:0])
			t.cur = len(t.chunks) - 1
		}
		c := t.chunks[t.cur]
		l = uint64(t.cur)<<(offBits+lenBits) | uint64(len(c))<<lenBits | uint64(len(b))
		// b may alias an earlier level of this chunk; append copies it to
		// bytes past len(c), which it cannot overlap.
		t.chunks[t.cur] = append(c, b...)
	}
	if t.n>>blockBits == len(t.locs) {
		t.locs = append(t.locs, t.blocks.Take(1<<blockBits))
	}
	t.locs[t.n>>blockBits][t.n&blockMask] = l
	t.n++
}

// Intern returns the id of b, adding b (copied into the arena) with the next
// id if it is new. b may alias the table's own arena (a Level or part of
// one). It allocates only when a table grows. If b is new and the table
// holds MaxLevels levels, Intern returns NoID and adds nothing.
func (t *Table) Intern(b []byte) uint32 { return t.InternHash(b, Hash(b)) }

// InternHash is Intern with h = Hash(b) computed by the caller, for callers
// that hash once and reuse the hash. An h that is not Hash(b) does not break
// the table, but b may then get a second id or be missed.
func (t *Table) InternHash(b []byte, h uint64) uint32 {
	if t.slots == nil {
		t.init(0)
	}
	mask := uint64(len(t.slots) - 1)
	tag := uint32(h >> 32)
	for i := h >> t.shift; ; i = (i + 1) & mask {
		s := t.slots[i]
		if s.id1 == 0 {
			n := uint64(t.n)
			if n >= levelLimit {
				return NoID
			}
			t.add(b)
			t.slots[i] = slot{tag: tag, id1: uint32(n + 1)}
			if int(n+1) > t.grow {
				t.rehash()
			}
			return uint32(n)
		}
		if s.tag == tag && bytes.Equal(t.Level(s.id1-1), b) {
			return s.id1 - 1
		}
	}
}

// Lookup returns the id of b and whether b is in the table. It does not
// allocate.
func (t *Table) Lookup(b []byte) (uint32, bool) {
	if len(t.slots) == 0 {
		return 0, false
	}
	h := Hash(b)
	mask := uint64(len(t.slots) - 1)
	tag := uint32(h >> 32)
	for i := h >> t.shift; ; i = (i + 1) & mask {
		s := t.slots[i]
		if s.id1 == 0 {
			return 0, false
		}
		if s.tag == tag && bytes.Equal(t.Level(s.id1-1), b) {
			return s.id1 - 1, true
		}
	}
}

// batchGroup is the number of keys InternBatch and LookupBatch hash and
// fetch the home slots of before probing any of them.
const batchGroup = 32

// InternBatch sets ids[i] to Intern(keys[i]) for every i, in order, so that
// new levels get the same ids as interning them one by one would give
// (len(ids) >= len(keys)). Like LookupBatch it loads a group of keys' home
// slots and their levels' locations before comparing any bytes (group). A
// key found in its home slot takes that level's id (a level found stays
// found, whatever the keys before it in the group added); every other key
// is interned by InternHash, in order.
func (t *Table) InternBatch(keys [][]byte, ids []uint32) {
	if t.slots == nil {
		t.init(0)
	}
	ids = ids[:len(keys)]
	var g group
	for start := 0; start < len(keys); start += batchGroup {
		keys := keys[start:min(start+batchGroup, len(keys))]
		g.load(t, keys)
		for j, k := range keys {
			if id, ok := g.home(t, j, k); ok {
				ids[start+j] = id
				continue
			}
			ids[start+j] = t.InternHash(k, g.hs[j])
		}
	}
}

// LookupBatch sets ids[i] to the id of keys[i], or NoID when keys[i] is not
// in the table (len(ids) >= len(keys)). Like InternBatch it loads a group
// of keys' home slots and their levels' locations before comparing any
// bytes (group). It does not allocate.
func (t *Table) LookupBatch(keys [][]byte, ids []uint32) {
	ids = ids[:len(keys)]
	if len(t.slots) == 0 {
		for i := range ids {
			ids[i] = NoID
		}
		return
	}
	var g group
	mask := uint64(len(t.slots) - 1)
	for start := 0; start < len(keys); start += batchGroup {
		keys := keys[start:min(start+batchGroup, len(keys))]
		g.load(t, keys)
		for j, k := range keys {
			if id, ok := g.home(t, j, k); ok {
				ids[start+j] = id
				continue
			}
			h := g.hs[j]
			tag := uint32(h >> 32)
			id := NoID
			for i, s := h>>t.shift, g.slot[j]; s.id1 != 0; {
				i = (i + 1) & mask
				s = t.slots[i]
				if s.id1 != 0 && s.tag == tag && bytes.Equal(t.Level(s.id1-1), k) {
					id = s.id1 - 1
					break
				}
			}
			ids[start+j] = id
		}
	}
}

// group holds, for a group of at most batchGroup keys, their hashes, their
// home slots and the locations of the levels those slots point to. load
// fetches them by loops that do nothing else: the slot table of a table of
// millions of levels is far larger than the caches, and between two hashes
// the processor's window holds only a few loads, in a loop this small the
// whole group's, whose waits for memory then overlap.
type group struct {
	hs   [batchGroup]uint64
	slot [batchGroup]slot
	locs [batchGroup]uint64
}

// load hashes keys and loads their home slots and those slots' locations.
func (g *group) load(t *Table, keys [][]byte) {
	for j, k := range keys {
		g.hs[j] = Hash(k)
	}
	slots, shift := t.slots, t.shift
	for j, h := range g.hs[:len(keys)] {
		g.slot[j] = slots[h>>shift]
	}
	for j := range keys {
		if s := g.slot[j]; s.id1 != 0 && s.tag == uint32(g.hs[j]>>32) {
			g.locs[j] = t.loc(s.id1 - 1)
		}
	}
}

// home returns the id of key j of the group, k, when its home slot (as
// loaded) holds it.
func (g *group) home(t *Table, j int, k []byte) (uint32, bool) {
	s := g.slot[j]
	if s.id1 != 0 && s.tag == uint32(g.hs[j]>>32) && bytes.Equal(t.at(g.locs[j]), k) {
		return s.id1 - 1, true
	}
	return 0, false
}

// rehash doubles the slot table and places every level again.
func (t *Table) rehash() { t.resize(1) }

// Reserve makes room for n levels in all, so that the slot table does not
// grow again before the table holds n: one rehash now instead of several
// doublings later. A caller that knows a column is nearly unique reserves
// its row count. Reserve never shrinks the table.
func (t *Table) Reserve(n int) {
	if t.slots == nil {
		t.init(n)
		return
	}
	k := uint(0)
	for (len(t.slots)<<k)/4*3 < n {
		k++
	}
	if k > 0 {
		t.resize(k)
	}
}

// resize makes the slot table 2^k times larger and places every level
// again. Up to 2^32 slots a level's new home is the top bits of its tag, so
// the old slots are moved in order without touching the arena; past that
// the bits below the tag are needed and each level is hashed again from
// the arena.
func (t *Table) resize(k uint) {
	slots := hugemem.Make[slot](len(t.slots) << k)
	shift := t.shift - k
	mask := uint64(len(slots) - 1)
	if shift >= tagShiftMin {
		for _, s := range t.slots {
			if s.id1 == 0 {
				continue
			}
			i := uint64(s.tag) >> (shift - 32)
			for slots[i].id1 != 0 {
				i = (i + 1) & mask
			}
			slots[i] = s
		}
	} else {
		for id := 0; id < t.n; id++ {
			h := Hash(t.Level(uint32(id)))
			i := h >> shift
			for slots[i].id1 != 0 {
				i = (i + 1) & mask
			}
			slots[i] = slot{tag: uint32(h >> 32), id1: uint32(id + 1)}
		}
	}
	t.slots, t.shift = slots, shift
	t.grow = len(slots) / 4 * 3
}

// MemBytes returns the heap bytes the table holds: the arena's, offset
// table's and slot table's capacity, the slack and unused slab ends of its
// huge-page allocations (heap the garbage collector counts, though never
// touched and so not resident), plus the Table itself.
func (t *Table) MemBytes() int {
	n := int(unsafe.Sizeof(*t)) + hugemem.Footprint(len(t.slots), int(unsafe.Sizeof(slot{}))) + 8<<blockBits*len(t.locs)
	n += t.arena.Spare() + t.blocks.Spare()
	for _, c := range t.chunks {
		n += cap(c)
	}
	return n
}
