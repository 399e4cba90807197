package main

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/gob"
	"fmt"
	"math/rand/v2"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/register"
	"github.com/cespare/xxhash/v2"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

func init() {
	register.DoFn3x1[context.Context, Shard, func([]byte), error](&surveyFn{})
	register.DoFn3x1[context.Context, Work, func(int, []byte), error](&fitFn{})
	register.DoFn4x0[int, func(*[]byte) bool, func(*Shard) bool, func(Work)](&joinFn{})
	register.Function1x2(keyBytes)
	register.Function1x2(keyShard)
	register.Emitter1[Work]()
	register.Iter1[Shard]()
	register.DoFn6x1[context.Context, int, func(*[]byte) bool, func(*[]byte) bool, func([]byte), func(int, []byte), error](&mergeFn{})
	register.DoFn6x1[context.Context, Shard, func(*[]byte) bool, func(*[]byte) bool, func(int) func(*[]byte) bool, func(string), error](&encodeFn{})
	register.DoFn5x1[context.Context, int, func(*[]byte) bool, func(*[]byte) bool, func(string), error](&tablesFn{})
	register.DoFn3x1[context.Context, int, func(*string) bool, error](&finishFn{})
	register.Iter1[string]()
	register.Emitter1[[]byte]()
	register.Emitter1[string]()
	register.Emitter2[int, []byte]()
	register.Iter1[[]byte]()
	beam.RegisterType(typeOf[Shard]())
	beam.RegisterType(typeOf[Work]())
}

// Build adds the sharded encoding job to the pipeline at s: every shard's
// encoded rows into out (part-NNNNN.EXT, one file a shard, in the shards'
// order), the mapping tables into tables. It returns the paths written.
//
//	shards -> Reshuffle -> survey -> facts (side input of what follows)
//	shards -> fit -> (partition, partial) -> GroupByKey -> merge -> merged (side input)
//	                                                           \-> (shard, before) (side input, ordered scheme)
//	shards -> encode (facts, merged, before) -> out/part-NNNNN.EXT
//	one    -> tables (facts, merged) -> tables
func Build(s beam.Scope, job Job, shards []Shard, out, tables string) beam.PCollection {
	// A run of its own: a worker process kept for another run (or a test
	// that runs the pipeline again over rewritten files) never takes this
	// run's model for that one's.
	job.Run = fmt.Sprintf("%x-%x", time.Now().UnixNano(), rand.Uint64())
	// Without a Reshuffle a runner may fuse the whole graph into one
	// bundle and run the shards one after another.
	sc := beam.Reshuffle(s, beam.CreateList(s, shards))
	facts := beam.ParDo(s.Scope("survey"), &surveyFn{Job: job}, sc)
	// Stage 1 takes every shard's facts in its main input, not as a side
	// input: prism's scheduler loops without pause while a stage that
	// reads a side input has a bundle in progress.
	joined := beam.CoGroupByKey(s, beam.ParDo(s, keyBytes, facts), beam.ParDo(s, keyShard, sc))
	work := beam.Reshuffle(s, beam.ParDo(s.Scope("join"), &joinFn{}, joined))
	partials := beam.ParDo(s.Scope("fit"), &fitFn{Job: job, Schema: shards[0].Path}, work)
	merged, before := beam.ParDo2(s.Scope("merge"), &mergeFn{Job: job, Schema: shards[0].Path}, beam.GroupByKey(s, partials), beam.SideInput{Input: facts})
	written := beam.ParDo(s.Scope("encode"), &encodeFn{Job: job, Schema: shards[0].Path, Out: out}, sc,
		beam.SideInput{Input: facts}, beam.SideInput{Input: merged}, beam.SideInput{Input: before})
	saved := beam.ParDo(s.Scope("tables"), &tablesFn{Job: job, Schema: shards[0].Path, Tables: tables}, beam.Create(s, 0),
		beam.SideInput{Input: facts}, beam.SideInput{Input: merged})
	// Once every shard is written: the temporary files of bundles that
	// failed, or of attempts a runner abandoned, are removed.
	beam.ParDo0(s.Scope("finish"), &finishFn{Out: out}, beam.Create(s, 0), beam.SideInput{Input: written})
	return beam.Flatten(s, written, saved)
}

// surveyFn is stage 0: a shard's facts (pipeline.Survey), as JSON.
type surveyFn struct{ Job Job }

func (fn *surveyFn) ProcessElement(ctx context.Context, sh Shard, emit func([]byte)) error {
	sp, err := fn.Job.Spec()
	if err != nil {
		return err
	}
	r, done, err := open(ctx, &sp, sh.Path)
	if err != nil {
		return err
	}
	defer done()
	f, err := pipeline.Survey(r, sp, sh.Path)
	if err != nil {
		return err
	}
	// gob, not JSON: a class label is bytes, which JSON would turn into
	// UTF-8 (two Latin-1 labels into one).
	var buf bytes.Buffer
	if err := gob.NewEncoder(&buf).Encode(ShardFacts{Index: sh.Index, Facts: f}); err != nil {
		return err
	}
	emit(buf.Bytes())
	return nil
}

// readFacts collects the facts of every shard from the side input.
func readFacts(iter func(*[]byte) bool) ([]ShardFacts, error) {
	var out []ShardFacts
	var b []byte
	for iter(&b) {
		var f ShardFacts
		if err := gob.NewDecoder(bytes.NewReader(b)).Decode(&f); err != nil {
			return nil, fmt.Errorf("a shard's facts: %w", err)
		}
		out = append(out, f)
	}
	return out, nil
}

// planned is the job as a worker rebuilds it: the spec, the schema (of
// the first shard, with the derived columns, read once) and the plan.
type planned struct {
	sp     pipeline.Spec
	schema *table.Schema
	plan   *pipeline.ShardPlan
}

// planOf rebuilds the job's plan on a worker from every shard's facts
// (the side input).
func planOf(ctx context.Context, job Job, schemaPath string, facts func(*[]byte) bool) (planned, error) {
	fs, err := readFacts(facts)
	if err != nil {
		return planned{}, err
	}
	return planFrom(ctx, job, schemaPath, fs)
}

// planFrom is planOf with the facts read.
func planFrom(ctx context.Context, job Job, schemaPath string, facts []ShardFacts) (planned, error) {
	var pl planned
	var err error
	if pl.sp, err = job.Spec(); err != nil {
		return pl, err
	}
	if pl.schema, err = schemaOf(ctx, &pl.sp, schemaPath); err != nil {
		return pl, err
	}
	pl.plan, err = plan(pl.sp, pl.schema, slices.Clone(facts))
	return pl, err
}

// fitFn is stage 1: a shard's statistics, one partial per partition.
type fitFn struct {
	Job    Job
	Schema string // the shard whose schema the plan takes
}

// Work is a shard and every shard's facts.
type Work struct {
	Shard Shard
	Facts [][]byte
}

func keyBytes(b []byte) (int, []byte) { return 0, b }
func keyShard(sh Shard) (int, Shard)  { return 0, sh }

// joinFn gives every shard the facts of all.
type joinFn struct{}

func (fn *joinFn) ProcessElement(_ int, facts func(*[]byte) bool, shards func(*Shard) bool, emit func(Work)) {
	var all [][]byte
	var b []byte
	for facts(&b) {
		all = append(all, slices.Clone(b))
	}
	var sh Shard
	for shards(&sh) {
		emit(Work{Shard: sh, Facts: all})
	}
}

// iterOf iterates over bs as a side input would.
func iterOf(bs [][]byte) func(*[]byte) bool {
	i := 0
	return func(b *[]byte) bool {
		if i == len(bs) {
			return false
		}
		*b = bs[i]
		i++
		return true
	}
}

func (fn *fitFn) ProcessElement(ctx context.Context, w Work, emit func(int, []byte)) error {
	sh := w.Shard
	pl, err := planOf(ctx, fn.Job, fn.Schema, iterOf(w.Facts))
	if err != nil {
		return err
	}
	r, done, err := open(ctx, &pl.sp, sh.Path)
	if err != nil {
		return err
	}
	defer done()
	ss, err := pipeline.FitShard(r, pl.plan, sh.Index, pipeline.FitOptions{File: sh.Path, Threads: 2})
	if err != nil {
		return err
	}
	parts, err := ss.Partials(fn.Job.Partitions)
	if err != nil {
		return err
	}
	for part, b := range parts {
		if pl.sp.Scheme == method.Ordered {
			// The merge orders the shards' partials: each after its
			// shard's index.
			b = append(binary.AppendUvarint(make([]byte, 0, len(b)+binary.MaxVarintLen64), uint64(sh.Index)), b...)
		}
		emit(part, b)
	}
	return nil
}

// mergeFn merges one partition's partials from every shard. For the
// ordered scheme it also gives each shard the statistics of the shards
// before it in the partition (pipeline.Preceding), keyed by the shard's
// index.
type mergeFn struct {
	Job    Job
	Schema string
}

func (fn *mergeFn) ProcessElement(ctx context.Context, part int, partials func(*[]byte) bool, facts func(*[]byte) bool, emit func([]byte), emitBefore func(int, []byte)) error {
	pl, err := planOf(ctx, fn.Job, fn.Schema, facts)
	if err != nil {
		return err
	}
	ordered := pl.sp.Scheme == method.Ordered
	var all [][]byte
	var byShard [][]byte // ordered: the shards' partials by index
	var b []byte
	for partials(&b) {
		if !ordered {
			all = append(all, slices.Clone(b))
			continue
		}
		i, k := binary.Uvarint(b)
		if k <= 0 || i >= uint64(len(pl.plan.First)) {
			return fmt.Errorf("partition %d: a partial without its shard's index", part)
		}
		for len(byShard) <= int(i) {
			byShard = append(byShard, nil)
		}
		if byShard[i] != nil {
			return fmt.Errorf("partition %d: shard %d's partial given twice", part, i)
		}
		byShard[i] = slices.Clone(b[k:])
		all = append(all, byShard[i])
	}
	m, err := pipeline.MergePartials(pl.plan, pl.schema, all, pipeline.FitOptions{})
	if err != nil {
		return fmt.Errorf("partition %d: %w", part, err)
	}
	emit(m)
	if ordered {
		byShard = append(byShard, make([][]byte, len(pl.plan.First)-len(byShard))...)
		before, err := pipeline.Preceding(pl.plan, pl.schema, byShard, pipeline.FitOptions{})
		if err != nil {
			return fmt.Errorf("partition %d: %w", part, err)
		}
		for i, b := range before {
			emitBefore(i, b)
		}
	}
	return nil
}

// model returns the model assembled from the merged partitions, once per
// worker for the same job and statistics.
func model(ctx context.Context, job Job, schemaPath string, factsIter, merged func(*[]byte) bool) (*modelOnce, error) {
	facts, err := readFacts(factsIter)
	if err != nil {
		return nil, err
	}
	// The key: the job, its first shard and every shard's facts. Only the
	// first bundle of a worker reads the merged statistics (a side input
	// is fetched as it is iterated: hundreds of megabytes at 10M rows).
	slices.SortFunc(facts, func(a, b ShardFacts) int { return a.Index - b.Index })
	var kb bytes.Buffer
	gob.NewEncoder(&kb).Encode(struct {
		Job    Job
		Schema string
		Facts  []ShardFacts
	}{job, schemaPath, facts})
	key := fmt.Sprintf("%x", xxhash.Sum64(kb.Bytes()))
	v, _ := models.LoadOrStore(key, &modelOnce{})
	mo := v.(*modelOnce)
	mo.once.Do(func() {
		var parts [][]byte
		var b []byte
		for merged(&b) {
			parts = append(parts, b) // each element decoded into a slice of its own
			b = nil
		}
		var pl planned
		if pl, mo.err = planFrom(ctx, job, schemaPath, facts); mo.err != nil {
			return
		}
		mo.plan, mo.schema = pl.plan, pl.schema
		mo.m, mo.err = pipeline.Assemble(pl.plan, pl.schema, parts, pipeline.FitOptions{File: "the shards", Threads: 2, Tables: true})
	})
	if mo.err != nil {
		models.CompareAndDelete(key, mo) // a later bundle tries again
	}
	return mo, mo.err
}

// encodeFn is stage 2: a shard's rows encoded into out/part-NNNNN.EXT.
type encodeFn struct {
	Job    Job
	Schema string
	Out    string
}

// partName is the encoded file of shard i.
func partName(out string, i int, format string) string {
	name := fmt.Sprintf("part-%05d.%s", i, format)
	if strings.Contains(out, "://") {
		return strings.TrimSuffix(out, "/") + "/" + name
	}
	return filepath.Join(out, name)
}

func (fn *encodeFn) ProcessElement(ctx context.Context, sh Shard, facts, merged func(*[]byte) bool, before func(int) func(*[]byte) bool, emit func(string)) error {
	mo, err := model(ctx, fn.Job, fn.Schema, facts, merged)
	if err != nil {
		return err
	}
	m, opt := mo.m, encodeOptions(mo.plan, sh)
	if m.Spec.Scheme == method.Ordered {
		var parts [][]byte
		var b []byte
		for it := before(sh.Index); it(&b); b = nil {
			parts = append(parts, b)
		}
		if opt.Before, err = mo.plan.Before(mo.schema, parts, pipeline.FitOptions{}); err != nil {
			return fmt.Errorf("%s: the statistics of the shards before it: %w", sh.Path, err)
		}
	}
	final := partName(fn.Out, sh.Index, fn.Job.Format)
	removeStale(final)
	err = writeFile(final, func(dst string) error {
		r, done, err := open(ctx, &m.Spec, sh.Path)
		if err != nil {
			return err
		}
		defer done()
		r = &ctxReader{Reader: r, ctx: ctx} // an abandoned bundle stops, its file removed
		schema, _, _, err := m.OutputSchema(sh.Path, r.Schema(), pipeline.Training)
		if err != nil {
			return err
		}
		w, err := tableio.Create(dst, schema, tableio.WriteOptions{})
		if err != nil {
			return err
		}
		if _, err := m.Encode(r, w, opt); err != nil {
			w.Abort()
			return err
		}
		if failOnce(final) {
			w.Abort()
			return fmt.Errorf("%s: a failure injected once (MANYFOLD_BEAM_FAIL_ONCE)", final)
		}
		return w.Commit()
	})
	if err != nil {
		return err
	}
	emit(final)
	return nil
}

// removeStale removes the temporary files of earlier attempts at the
// local file final (".NAME.tmp-*", see atomicfile).
func removeStale(final string) {
	if strings.Contains(final, "://") {
		return
	}
	stale, _ := filepath.Glob(filepath.Join(filepath.Dir(final), "."+filepath.Base(final)+".tmp-*"))
	for _, p := range stale {
		os.Remove(p)
	}
}

// finishFn runs once every shard is written (its side input is their
// paths): it removes the temporary files of attempts that failed or were
// abandoned.
type finishFn struct{ Out string }

func (fn *finishFn) ProcessElement(ctx context.Context, _ int, written func(*string) bool) error {
	var p string
	for written(&p) {
		if strings.HasPrefix(filepath.Base(p), "part-") {
			removeStale(p)
		}
	}
	return nil
}

// ctxReader stops reading once the bundle's context is done.
type ctxReader struct {
	table.Reader
	ctx context.Context
}

func (c *ctxReader) Next() (*table.Batch, error) {
	if err := c.ctx.Err(); err != nil {
		return nil, err
	}
	return c.Reader.Next()
}

// encodeOptions returns the options that encode shard sh of the plan.
func encodeOptions(p *pipeline.ShardPlan, sh Shard) pipeline.EncodeOptions {
	o := p.EncodeOptions(sh.Index)
	o.File, o.Threads = sh.Path, 2
	return o
}

// failOnce reports, the first time it is asked about a path that ends in
// the suffix MANYFOLD_BEAM_FAIL_ONCE names, that the write should fail (a
// test's injected fault: the bundle fails once and is retried); a marker
// file beside the path remembers that it did.
func failOnce(final string) bool {
	suffix := os.Getenv("MANYFOLD_BEAM_FAIL_ONCE")
	if suffix == "" || !strings.HasSuffix(final, suffix) || strings.Contains(final, "://") {
		return false
	}
	marker := final + ".failed-once"
	f, err := os.OpenFile(marker, os.O_CREATE|os.O_EXCL|os.O_WRONLY, 0o644)
	if err != nil {
		return false // failed before
	}
	f.Close()
	return true
}

// tablesFn writes the mapping tables from the assembled model.
type tablesFn struct {
	Job    Job
	Schema string
	Tables string
}

func (fn *tablesFn) ProcessElement(ctx context.Context, _ int, facts, merged func(*[]byte) bool, emit func(string)) error {
	mo, err := model(ctx, fn.Job, fn.Schema, facts, merged)
	if err != nil {
		return err
	}
	m := mo.m
	if !strings.Contains(fn.Tables, "://") {
		if err := m.SaveTables(fn.Tables); err != nil {
			return err
		}
		emit(fn.Tables)
		return nil
	}
	// Another filesystem: the tables written locally, then copied, the
	// manifest last.
	d, err := os.MkdirTemp("", "manyfold-tables-*")
	if err != nil {
		return err
	}
	defer os.RemoveAll(d)
	local := filepath.Join(d, "t")
	if err := m.SaveTables(local); err != nil {
		return err
	}
	entries, err := os.ReadDir(local)
	if err != nil {
		return err
	}
	slices.SortFunc(entries, func(a, b os.DirEntry) int {
		return boolInt(a.Name() == "manifest.json") - boolInt(b.Name() == "manifest.json")
	})
	fs, err := filesystem.New(ctx, fn.Tables)
	if err != nil {
		return err
	}
	defer fs.Close()
	for _, e := range entries {
		data, err := os.ReadFile(filepath.Join(local, e.Name()))
		if err != nil {
			return err
		}
		if err := filesystem.Write(ctx, fs, strings.TrimSuffix(fn.Tables, "/")+"/"+path.Base(e.Name()), data); err != nil {
			return err
		}
	}
	emit(fn.Tables)
	return nil
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}
