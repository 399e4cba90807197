package pipeline

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

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
