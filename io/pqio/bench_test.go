package pqio

import (
	"bytes"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"syscall"
	"testing"
	"time"

	"github.com/cespare/xxhash/v2"

	"manyfold/io/table"
)

// benchDictFile writes a file of rows rows with one text column over
// levels postcodes (skewed: low codes are more frequent), nullEvery > 0
// making every nullEvery-th row null, and returns its path.
func benchDictFile(b *testing.B, rows, levels, nullEvery int) string {
	b.Helper()
	path := filepath.Join(b.TempDir(), "postcodes.parquet")
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	schema := &table.Schema{Fields: []table.Field{{Name: "postcode", Kind: table.String, Nullable: true}}}
	w, err := NewWriter(f, schema, WriterOptions{})
	if err != nil {
		b.Fatal(err)
	}
	const batch = 1 << 16
	c := table.Column{Form: table.FormText, Offsets: make([]int32, 0, batch+1)}
	var nulls []bool
	if nullEvery > 0 {
		nulls = make([]bool, batch)
	}
	x := uint64(88172645463325252)
	for start := 0; start < rows; start += batch {
		n := min(batch, rows-start)
		c.Data, c.Offsets = c.Data[:0], append(c.Offsets[:0], 0)
		for i := 0; i < n; i++ {
			x ^= x << 13
			x ^= x >> 7
			x ^= x << 17
			// The product of two uniforms is skewed towards 0.
			lv := (x % uint64(levels)) * ((x >> 32) % uint64(levels)) / uint64(levels)
			if nulls != nil {
				nulls[i] = (start+i)%nullEvery == 0
			}
			c.Data = append(c.Data, "PC-"...)
			c.Data = strconv.AppendUint(c.Data, lv, 10)
			c.Offsets = append(c.Offsets, int32(len(c.Data)))
		}
		col := c
		if nulls != nil {
			col.Nulls = nulls[:n]
		}
		if err := w.Write(&table.Batch{Rows: n, FirstRow: int64(start + 1), Cols: []table.Column{col}}); err != nil {
			b.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	if err := f.Close(); err != nil {
		b.Fatal(err)
	}
	return path
}

// BenchmarkDictColumn reads a dictionary-encoded text column of 4 million
// rows over about 40,000 levels and counts rows per level by dictionary
// index, mapping each dictionary entry to a level once per dictionary.
func BenchmarkDictColumn(b *testing.B) {
	const rows, levels = 4_000_000, 40_000
	for _, bc := range []struct {
		name      string
		nullEvery int
	}{{"nulls=none", 0}, {"nulls=1pct", 100}} {
		b.Run(bc.name, func(b *testing.B) {
			path := benchDictFile(b, rows, levels, bc.nullEvery)
			st, _ := os.Stat(path)
			b.SetBytes(st.Size())
			b.ResetTimer()
			cpu0 := cpuTime()
			var seen int
			for b.Loop() {
				seen = countLevels(b, path)
			}
			b.ReportMetric(float64(rows)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
			// Rows per second of CPU time, steadier than wall time when other
			// work shares the machine.
			b.ReportMetric(float64(rows)*float64(b.N)/(cpuTime()-cpu0).Seconds(), "rows/cpu-s")
			if seen < levels*9/10 || seen > levels {
				b.Fatalf("%d levels seen, want about %d", seen, levels)
			}
		})
	}
}

// countLevels counts the rows of each level of the file's first column and
// returns the number of levels. Rows are counted per dictionary entry;
// when a dictionary is done each of its entries is looked up once in a
// table of levels (open addressing on the entry's XXH64).
func countLevels(b *testing.B, path string) int {
	r, err := Open(path)
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	var levels levelTable
	var chunk []int64 // rows per entry of the current dictionary
	var dict *table.Dict
	fold := func() {
		if dict == nil {
			return
		}
		for e, n := range chunk {
			if n != 0 {
				levels.counts[levels.id(dict.Entry(e))] += n
			}
		}
	}
	var nulls int64
	for {
		bt, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			b.Fatal(err)
		}
		c := &bt.Cols[0]
		if c.Form != table.FormDict {
			b.Fatalf("form %d, want dictionary form", c.Form)
		}
		if dict == nil || c.Dict.ID != dict.ID {
			fold()
			dict = c.Dict
			chunk = make([]int64, dict.Len())
		}
		if c.Nulls == nil {
			for _, x := range c.Indices {
				chunk[x]++
			}
		} else {
			for i, x := range c.Indices {
				if c.Nulls[i] {
					nulls++
					continue
				}
				chunk[x]++
			}
		}
	}
	fold()
	return len(levels.counts)
}

// levelTable numbers distinct byte strings: an arena of key bytes and an
// open-addressing table of (hash, id).
type levelTable struct {
	keys   []byte
	ends   []int
	slots  []slot
	counts []int64
}

type slot struct {
	hash uint64
	id   int32 // id+1; 0 is empty
}

func (t *levelTable) key(id int) []byte {
	start := 0
	if id > 0 {
		start = t.ends[id-1]
	}
	return t.keys[start:t.ends[id]]
}

// id returns the number of key, adding it when new.
func (t *levelTable) id(key []byte) int {
	if len(t.ends)*2 >= len(t.slots) {
		t.grow()
	}
	h := xxhash.Sum64(key)
	mask := uint64(len(t.slots) - 1)
	for i := h & mask; ; i = (i + 1) & mask {
		s := &t.slots[i]
		if s.id == 0 {
			id := len(t.ends)
			t.keys = append(t.keys, key...)
			t.ends = append(t.ends, len(t.keys))
			t.counts = append(t.counts, 0)
			*s = slot{hash: h, id: int32(id + 1)}
			return id
		}
		if s.hash == h && bytes.Equal(t.key(int(s.id-1)), key) {
			return int(s.id - 1)
		}
	}
}

func (t *levelTable) grow() {
	old := t.slots
	t.slots = make([]slot, max(1<<10, 2*len(old)))
	mask := uint64(len(t.slots) - 1)
	for _, s := range old {
		if s.id == 0 {
			continue
		}
		i := s.hash & mask
		for t.slots[i].id != 0 {
			i = (i + 1) & mask
		}
		t.slots[i] = s
	}
}

// BenchmarkWrite writes 1 million rows of a delivery table (text route,
// integer weight with nulls, float cost, bool late) to io.Discard.
func BenchmarkWrite(b *testing.B) {
	schema, batches, rows := benchBatches()
	for _, comp := range []string{"snappy", "zstd"} {
		b.Run(comp, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				writeAll(b, io.Discard, schema, WriterOptions{Compression: comp}, batches)
			}
			b.ReportMetric(float64(rows)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
		})
	}
}

// BenchmarkCopy writes the table of BenchmarkWrite once (row groups of
// 1<<18 rows), then writes it again with its four columns copied chunk by
// chunk and one int column encoded: as the codec (snappy bytes copied as
// they are) and recompressed to zstd.
func BenchmarkCopy(b *testing.B) {
	schema, batches, rows := benchBatches()
	path := filepath.Join(b.TempDir(), "copy-source.parquet")
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	writeAll(b, f, schema, WriterOptions{RowGroupRows: 1 << 18}, batches)
	f.Close()
	out := &table.Schema{Fields: append(append([]table.Field(nil), schema.Fields...), table.Field{Name: "fold", Kind: table.Int64})}
	copied := []bool{true, true, true, true, false}
	folds := make([]int64, len(batches[0].Cols[0].Offsets)-1)
	for i := range folds {
		folds[i] = int64(i % 5)
	}
	for _, comp := range []string{"snappy", "zstd"} {
		b.Run(comp, func(b *testing.B) {
			src, err := OpenSource(path)
			if err != nil {
				b.Fatal(err)
			}
			defer src.Close()
			for b.Loop() {
				w, err := NewWriter(io.Discard, out, WriterOptions{Compression: comp, Source: src, Copy: copied})
				if err != nil {
					b.Fatal(err)
				}
				for _, bt := range batches {
					ob := &table.Batch{Rows: bt.Rows, Cols: make([]table.Column, 5)}
					ob.Cols[4] = table.Column{Form: table.FormInt64, Ints: folds[:bt.Rows]}
					if err := w.Write(ob); err != nil {
						b.Fatal(err)
					}
				}
				if err := w.Close(); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(rows)*float64(b.N)/b.Elapsed().Seconds(), "rows/s")
		})
	}
}

// writeAll writes the batches as a Parquet table to out.
func writeAll(b *testing.B, out io.Writer, schema *table.Schema, opts WriterOptions, batches []*table.Batch) {
	w, err := NewWriter(out, schema, opts)
	if err != nil {
		b.Fatal(err)
	}
	for _, bt := range batches {
		if err := w.Write(bt); err != nil {
			b.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
}

// benchBatches builds 1<<20 rows of a route, a weight with nulls, a cost
// and a flag, in batches of 1<<16.
func benchBatches() (*table.Schema, []*table.Batch, int) {
	const rows, batch = 1 << 20, 1 << 16
	mk := func(start int) *table.Batch {
		bt := &table.Batch{Rows: batch, FirstRow: int64(start + 1), Cols: make([]table.Column, 4)}
		route := table.Column{Form: table.FormText, Offsets: []int32{0}}
		weight := table.Column{Form: table.FormInt64, Ints: make([]int64, batch), Nulls: make([]bool, batch)}
		cost := table.Column{Form: table.FormFloat64, Floats: make([]float64, batch)}
		late := table.Column{Form: table.FormBool, Bools: make([]bool, batch)}
		for i := 0; i < batch; i++ {
			r := start + i
			route.Data = append(route.Data, "route-"...)
			route.Data = strconv.AppendInt(route.Data, int64(r*7919%5000), 10)
			route.Offsets = append(route.Offsets, int32(len(route.Data)))
			weight.Ints[i] = int64(r * 31 % 20000)
			weight.Nulls[i] = r%50 == 0
			cost.Floats[i] = float64(r%997) * 0.25
			late.Bools[i] = r%7 == 0
		}
		bt.Cols[0], bt.Cols[1], bt.Cols[2], bt.Cols[3] = route, weight, cost, late
		return bt
	}
	var batches []*table.Batch
	for s := 0; s < rows; s += batch {
		batches = append(batches, mk(s))
	}
	schema := &table.Schema{Fields: []table.Field{
		{Name: "route", Kind: table.String},
		{Name: "weight_g", Kind: table.Int64, Nullable: true},
		{Name: "cost", Kind: table.Float64},
		{Name: "late", Kind: table.Bool},
	}}
	return schema, batches, rows
}

// cpuTime returns the process's user and system CPU time so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
