package pipeline

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

	"manyfold/encoders/colstats"
	"manyfold/encoders/exactsum"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// assembleJob is a small sharded job whose partials FuzzAssemble damages:
// its plan, the table's schema and the partials of every shard and
// partition.
type assembleJob struct {
	plan     *ShardPlan
	schema   *table.Schema
	partials [][]byte
}

// assembleJobs runs stage 0 and stage 1 of two small jobs over loadCSV cut
// into three shards, in two partitions: a binary target with a column
// prior (each level's parent in its partial), and a regression target with
// a prefix prior (exact sums).
func assembleJobs(tb testing.TB) []assembleJob {
	tb.Helper()
	dir := tb.TempDir()
	lines := strings.SplitAfter(strings.TrimSuffix(loadCSV(), "\n"), "\n")
	var shards []string
	for i, at := range []int{1, 21, 41} {
		p := filepath.Join(dir, fmt.Sprintf("part-%d.csv", i))
		if err := os.WriteFile(p, []byte(lines[0]+strings.Join(lines[at:at+20], "")), 0o644); err != nil {
			tb.Fatal(err)
		}
		shards = append(shards, p)
	}
	binary := planSpec(tb, "pc=target:eb:prior=column:sender+freq+topk:3+hash:16,sender=target:m=2+woe")
	binary.Target = "late"
	regression := planSpec(tb, "target:eb:prior=prefix2+freq")
	regression.Target, regression.Task, regression.Columns = "weight", "regression", []string{"pc", "sender"}
	var jobs []assembleJob
	for _, sp := range []Spec{binary, regression} {
		jobs = append(jobs, shardPartials(tb, sp, shards, 2))
	}
	return jobs
}

// shardPartials runs stages 0 and 1 of sp over the shards, cut into parts
// partitions.
func shardPartials(tb testing.TB, sp Spec, shards []string, parts int) assembleJob {
	tb.Helper()
	open := func(p string) table.Reader {
		r, err := tableio.Open(p, tableio.ReadOptions{})
		if err != nil {
			tb.Fatal(err)
		}
		return r
	}
	var job assembleJob
	facts := make([]ShardFacts, len(shards))
	for i, p := range shards {
		r := open(p)
		if i == 0 { // before Survey selects the target
			job.schema = &table.Schema{Fields: append([]table.Field(nil), r.Schema().Fields...)}
		}
		var err error
		facts[i], err = Survey(r, sp, p)
		r.Close()
		if err != nil {
			tb.Fatal(err)
		}
	}
	var err error
	if job.plan, err = PlanShards(sp, job.schema, facts, "the shards"); err != nil {
		tb.Fatal(err)
	}
	for i, p := range shards {
		r := open(p)
		ss, err := FitShard(r, job.plan, i, FitOptions{File: p})
		r.Close()
		if err != nil {
			tb.Fatal(err)
		}
		for part := 0; part < parts; part++ {
			b, err := ss.Partial(part, parts)
			if err != nil {
				tb.Fatal(err)
			}
			job.partials = append(job.partials, b)
		}
	}
	if _, err := Assemble(job.plan, job.schema, job.partials, FitOptions{File: "the shards"}); err != nil {
		tb.Fatalf("the partials as made do not assemble: %v", err)
	}
	return job
}

// assembleHang is the longest one input may take to assemble.
const assembleHang = 10 * time.Second

// FuzzAssemble assembles the partials of a small job (binary with a column
// prior, kind 0; regression, kind 1) with partial which replaced by the
// fuzzed bytes, and merges them (MergePartials): each must give a model (a
// partial) or an error wrapping ErrShardPartial, never panic or hang, and
// allocate no more than the statistics of every level the bytes can hold.
// The seeds are the job's own partials.
func FuzzAssemble(f *testing.F) {
	jobs := assembleJobs(f)
	for k, job := range jobs {
		for i, b := range job.partials {
			f.Add(b, uint8(k), uint8(i))
		}
	}
	kinds, which, data := hostilePartials(f, jobs)
	for i := range data {
		f.Add(data[i], kinds[i], which[i])
	}
	f.Fuzz(func(t *testing.T, data []byte, kind, which uint8) {
		job := jobs[int(kind)%len(jobs)]
		partials := append([][]byte(nil), job.partials...)
		partials[int(which)%len(partials)] = data
		wd := time.AfterFunc(assembleHang, func() { panic(fmt.Sprintf("assembling %d bytes took more than %v", len(data), assembleHang)) })
		defer wd.Stop()
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		_, err := Assemble(job.plan, job.schema, partials, FitOptions{File: "the shards"})
		_, merr := MergePartials(job.plan, job.schema, partials, FitOptions{})
		runtime.ReadMemStats(&after)
		for _, err := range []error{err, merr} {
			if err != nil && !errors.Is(err, ErrShardPartial) {
				t.Errorf("%T does not wrap ErrShardPartial: %v", err, err)
			}
			if err != nil && strings.Contains(err.Error(), "\n") {
				t.Errorf("error of several lines: %q", err)
			}
		}
		// The job's own statistics, and per byte of input at most a level
		// of 4 bytes with its counts in every fold (twice: the assembly
		// and the merge).
		if alloc, bound := after.TotalAlloc-before.TotalAlloc, uint64(64<<20+assemblePerByte*len(data)); alloc > bound {
			t.Errorf("%d bytes of input allocated %d MB", len(data), alloc>>20)
		}
	})
}

// assemblePerByte bounds what a byte of a partial may allocate when merged.
const assemblePerByte = 1024

// rewritePartial reads a shard's partial (Partial's layout: its columns'
// colstats partials) and writes it again with each field passed through
// edit, which is given the field's name (rows, count, n, sum, sq), its
// column, level and cell, and its bytes (a varint, or an exact sum's binary
// form), and returns the bytes to write; lengths are written anew. The
// random mutations of a fuzzing engine rarely keep the lengths around a
// field right: this makes the hostile values a fuzzed partial can hold.
func rewritePartial(tb testing.TB, b []byte, edit func(field string, col, level, cell int, v []byte) []byte) []byte {
	tb.Helper()
	take := func(n int) []byte {
		if n > len(b) {
			tb.Fatalf("a partial cut short")
		}
		v := b[:n]
		b = b[n:]
		return v
	}
	uv := func() ([]byte, uint64) {
		v, k := binary.Uvarint(b)
		if k <= 0 {
			tb.Fatalf("a partial's varint")
		}
		return take(k), v
	}
	out := append([]byte(nil), take(len(shardMagic))...)
	raw, cols := uv()
	out = append(out, raw...)
	for ci := 0; ci < int(cols); ci++ {
		_, size := uv()
		end := len(b) - int(size)
		col := append([]byte(nil), take(4+1)...) // magic, task
		regression := colstats.Task(col[4]) == colstats.Regression
		_, folds := uv()
		_, classes := uv()
		col = binary.AppendUvarint(binary.AppendUvarint(col, folds), classes)
		col = append(col, take(8)...)
		raw, levels := uv()
		col = append(col, raw...)
		for l := 0; l < int(levels); l++ {
			_, key := uv()
			col = binary.AppendUvarint(col, key)
			if key > 0 {
				col = append(col, take(int(key-1))...)
			}
			raw, _ := uv()
			col = append(col, edit("rows", ci, l, -1, raw)...)
			raw, cells := uv()
			col = append(col, raw...)
			for f := 0; f < int(cells); f++ {
				raw, _ = uv()
				col = append(col, raw...)
				if !regression {
					for range classes {
						raw, _ := uv()
						col = append(col, edit("count", ci, l, f, raw)...)
					}
					continue
				}
				raw, _ = uv()
				col = append(col, edit("n", ci, l, f, raw)...)
				for _, name := range []string{"sum", "sq"} {
					_, n := uv()
					v := edit(name, ci, l, f, take(int(n)))
					col = append(binary.AppendUvarint(col, uint64(len(v))), v...)
				}
			}
			_, n := uv()
			col = append(binary.AppendUvarint(col, n), take(int(n))...)
		}
		if len(b) != end {
			tb.Fatalf("column %d of a partial: %d bytes left", ci, len(b)-end)
		}
		out = append(binary.AppendUvarint(out, uint64(len(col))), col...)
	}
	if len(b) != 0 {
		tb.Fatalf("%d bytes after a partial", len(b))
	}
	return out
}

// hostilePartials returns partials of the jobs (kind, which, bytes) that
// hold values no shard gives: counts that overflow, a cell of more rows
// than a level may have, sums whose squares are not finite.
func hostilePartials(tb testing.TB, jobs []assembleJob) (kinds, which []uint8, data [][]byte) {
	uvarint := func(v uint64) []byte { return binary.AppendUvarint(nil, v) }
	var huge exactsum.Sum
	huge.Add(1e300)
	add := func(kind, i int, edit func(field string, col, level, cell int, v []byte) []byte) {
		kinds, which = append(kinds, uint8(kind)), append(which, uint8(i))
		data = append(data, rewritePartial(tb, jobs[kind].partials[i], edit))
	}
	first := func(field string, v []byte) func(string, int, int, int, []byte) []byte {
		done := false
		return func(f string, col, level, cell int, old []byte) []byte {
			if f == field && !done {
				done = true
				return v
			}
			return old
		}
	}
	for kind := range jobs {
		// The same bytes written again are accepted.
		add(kind, 0, func(_ string, _, _, _ int, v []byte) []byte { return v })
		add(kind, 1, first("rows", uvarint(math.MaxUint64)))
		add(kind, 2, first("rows", uvarint(1<<63)))
	}
	add(0, 0, first("count", uvarint(math.MaxUint64)))
	add(0, 3, first("count", uvarint(1<<40)))
	// Every count of every level 2^63: a level's counts wrap to 0.
	add(0, 1, func(f string, _, _, _ int, v []byte) []byte {
		if f == "count" {
			return uvarint(1 << 63)
		}
		return v
	})
	add(1, 0, first("n", uvarint(math.MaxUint32)))
	add(1, 1, first("sum", huge.AppendBinary(nil)))
	add(1, 2, first("sq", huge.AppendBinary(nil)))
	add(1, 3, func(f string, _, _, _ int, v []byte) []byte {
		if f == "sum" || f == "sq" {
			return huge.AppendBinary(nil)
		}
		return v
	})
	return kinds, which, data
}
