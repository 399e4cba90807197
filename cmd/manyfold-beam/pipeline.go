package main

import (
	"bytes"
	"context"
	"encoding/gob"
	"fmt"
	"math/rand/v2"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/register"
	"github.com/cespare/xxhash/v2"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/io/derive"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

func init() {
	register.DoFn3x1[context.Context, Shard, func([]byte), error](&surveyFn{})
	register.DoFn3x1[context.Context, Work, func(int, Piece), error](&fitFn{})
	register.DoFn5x1[context.Context, int, func(*[]byte) bool, func(*Shard) bool, func(Work), error](&joinFn{})
	register.DoFn5x0[int, func(*string) bool, func(*Work) bool, func(Work), func(Work)](&statsJoinFn{})
	register.DoFn5x1[context.Context, int, func(*string) bool, func(*Work) bool, func(string), error](&tablesFn{})
	register.Function1x2(keyBytes)
	register.Function1x2(keyShard)
	register.Function1x2(keyString)
	register.Function1x2(keyWork)
	register.Emitter1[Work]()
	register.Emitter2[int, Piece]()
	register.Iter1[Shard]()
	register.Iter1[Work]()
	register.Iter1[Piece]()
	register.DoFn4x1[context.Context, int, func(*Piece) bool, func(string), error](&mergeFn{})
	register.DoFn3x1[context.Context, Work, func(string), error](&encodeFn{})
	register.DoFn3x1[context.Context, int, func(*string) bool, error](&finishFn{})
	register.Iter1[string]()
	register.Emitter1[[]byte]()
	register.Emitter1[string]()
	register.Iter1[[]byte]()
	beam.RegisterType(typeOf[Shard]())
	beam.RegisterType(typeOf[Work]())
	beam.RegisterType(typeOf[Piece]())
}

// Build adds the sharded encoding job to the pipeline at s: every shard's
// encoded rows into out (part-NNNNN.EXT, one file a shard, in the shards'
// order), the mapping tables into tables. It returns the paths written.
//
//	shards -> Reshuffle -> survey -> facts
//	(facts, shards) -> CoGroupByKey -> work: a shard and every shard's facts -> Reshuffle
//	work -> fit -> (partition, piece) -> GroupByKey -> merge -> out/_stats-RUN/ files
//	(their paths, work) -> CoGroupByKey -> work with the paths, and one for the tables -> Reshuffle
//	work -> encode -> out/part-NNNNN.EXT, and each shard's training scores in a file
//	(their paths, the tables' work) -> CoGroupByKey -> tables (scores merged)
//	every path written (side input) -> finish
//
// No stage that runs long reads a side input: prism's scheduler loops
// without pause while a stage that reads side inputs has a bundle in
// progress (at 10M rows it took a core of the two). What a stage needs of
// the stages before it comes in its main input, through a CoGroupByKey
// (which also waits for all of them); the merged statistics, hundreds of
// megabytes, are files in a staging folder that stage 2 reads, removed
// once every output is written.
func Build(s beam.Scope, job Job, shards []Shard, out, tables string) beam.PCollection {
	// A run of its own: a worker process kept for another run (or a test
	// that runs the pipeline again over rewritten files) never takes this
	// run's model for that one's.
	job.Run = fmt.Sprintf("%x-%x", time.Now().UnixNano(), rand.Uint64())
	job.Stats = joinPath(out, "_stats-"+job.Run)
	// Without a Reshuffle a runner may fuse the whole graph into one
	// bundle and run the shards one after another.
	sc := beam.Reshuffle(s, beam.CreateList(s, shards))
	facts := beam.ParDo(s.Scope("survey"), &surveyFn{Job: job}, sc)
	joined := beam.CoGroupByKey(s, beam.ParDo(s, keyBytes, facts), beam.ParDo(s, keyShard, sc))
	work := beam.Reshuffle(s, beam.ParDo(s.Scope("join"), &joinFn{Job: job}, joined))
	pieces := beam.ParDo(s.Scope("fit"), &fitFn{Job: job, Schema: shards[0].Path}, work)
	stats := beam.ParDo(s.Scope("merge"), &mergeFn{Job: job, Schema: shards[0].Path}, beam.GroupByKey(s, pieces))
	ready := beam.CoGroupByKey(s, beam.ParDo(s, keyString, stats), beam.ParDo(s, keyWork, work))
	stage2, tablesWork := beam.ParDo2(s.Scope("join stats"), &statsJoinFn{}, ready)
	written := beam.ParDo(s.Scope("encode"), &encodeFn{Job: job, Schema: shards[0].Path, Out: out}, beam.Reshuffle(s, stage2))
	// The tables once every shard is encoded: their manifest records the
	// training scores merged from the shards'.
	done := beam.CoGroupByKey(s, beam.ParDo(s, keyString, written), beam.ParDo(s, keyWork, tablesWork))
	saved := beam.ParDo(s.Scope("tables"), &tablesFn{Job: job, Schema: shards[0].Path, Tables: tables}, done)
	all := beam.Flatten(s, written, saved)
	// Once every output is written: the temporary files of bundles that
	// failed, or of attempts a runner abandoned, are removed, and the
	// staging folder.
	beam.ParDo0(s.Scope("finish"), &finishFn{Out: out, Run: job.Run}, beam.Create(s, 0), beam.SideInput{Input: all})
	return all
}

// joinPath joins a folder (local, or a URL of Beam's filesystems) and a
// name.
func joinPath(dir, name string) string {
	if strings.Contains(dir, "://") {
		return strings.TrimSuffix(dir, "/") + "/" + name
	}
	return filepath.Join(dir, name)
}

// surveyFn is stage 0: a shard's facts (pipeline.Survey), as JSON.
type surveyFn struct{ Job Job }

func (fn *surveyFn) ProcessElement(ctx context.Context, sh Shard, emit func([]byte)) error {
	sp, err := fn.Job.Spec()
	if err != nil {
		return err
	}
	r, done, err := open(ctx, &sp, sh.Path, nil)
	if err != nil {
		return err
	}
	defer done()
	fields := slices.Clone(derive.Base(r).Schema().Fields)
	f, err := pipeline.Survey(r, sp, sh.Path)
	if err != nil {
		return err
	}
	// gob, not JSON: a class label is bytes, which JSON would turn into
	// UTF-8 (two Latin-1 labels into one).
	var buf bytes.Buffer
	if err := gob.NewEncoder(&buf).Encode(ShardFacts{Index: sh.Index, Path: sh.Path, Fields: fields, Facts: f}); err != nil {
		return err
	}
	emit(buf.Bytes())
	return nil
}

// readFacts decodes the facts of every shard, as stage 0 gave them.
func readFacts(all [][]byte) ([]ShardFacts, error) {
	var out []ShardFacts
	for _, b := range all {
		var f ShardFacts
		if err := gob.NewDecoder(bytes.NewReader(b)).Decode(&f); err != nil {
			return nil, fmt.Errorf("a shard's facts: %w", err)
		}
		out = append(out, f)
	}
	return out, nil
}

// planned is the job as a worker rebuilds it: the spec, the shards'
// columns together (fields), the schema (those, with the derived columns,
// read once from the first shard) and the plan.
type planned struct {
	sp     pipeline.Spec
	fields []table.Field
	schema *table.Schema
	plan   *pipeline.ShardPlan
}

// planFrom rebuilds the job's plan on a worker from every shard's facts.
func planFrom(ctx context.Context, job Job, schemaPath string, facts []ShardFacts) (planned, error) {
	var pl planned
	var err error
	if pl.sp, err = job.Spec(); err != nil {
		return pl, err
	}
	if pl.fields, err = columns(facts); err != nil {
		return pl, err
	}
	if pl.schema, err = schemaOf(ctx, &pl.sp, schemaPath, pl.fields); err != nil {
		return pl, err
	}
	pl.plan, err = plan(pl.sp, pl.schema, slices.Clone(facts))
	return pl, err
}

// plans keeps the plan a worker rebuilt, by the facts file and the
// schema's shard (the run is in the file's path).
var plans sync.Map // string -> planned

// plannedFor returns the job's plan from the facts file (joinFn), once per
// worker: every element of a stage would otherwise rebuild it from every
// shard's facts, and read the first shard's schema again.
func plannedFor(ctx context.Context, job Job, schemaPath, factsName string) (planned, error) {
	key := factsName + "\x00" + schemaPath
	if v, ok := plans.Load(key); ok {
		return v.(planned), nil
	}
	facts, err := loadFacts(ctx, factsName)
	if err != nil {
		return planned{}, err
	}
	pl, err := planFrom(ctx, job, schemaPath, facts)
	if err != nil {
		return pl, err
	}
	plans.Store(key, pl)
	return pl, nil
}

// fitFn is stage 1: a shard's statistics, one partial per partition.
type fitFn struct {
	Job    Job
	Schema string // the shard the plan's schema is read from (its kinds those of every shard, dataset.Columns)
}

// Work is what a worker needs of the stages before it to fit or encode
// a shard: the file of every shard's facts and, for stage 2, the merged
// statistics' files (Stats); Tables marks the element that writes the
// mapping tables. The facts travel as a file, not in the elements: every
// element would carry every shard's, shards times partitions of them.
type Work struct {
	Shard  Shard
	Facts  string
	Stats  []string
	Tables bool
}

// Piece is a shard's partial of one partition, as the file Path in the
// staging folder, with the file of every shard's facts (from which the
// merge rebuilds the plan). The partials themselves do not travel in the
// elements: at 10M rows, copying them through prism's data plane cost 4 s
// of CPU.
type Piece struct {
	Shard int
	Facts string
	Path  string
}

func keyBytes(b []byte) (int, []byte)  { return 0, b }
func keyShard(sh Shard) (int, Shard)   { return 0, sh }
func keyString(p string) (int, string) { return 0, p }
func keyWork(w Work) (int, Work)       { return 0, w }

// statsJoinFn gives every shard's work the merged statistics' files, and
// emits the work of the mapping tables apart.
type statsJoinFn struct{}

func (fn *statsJoinFn) ProcessElement(_ int, paths func(*string) bool, work func(*Work) bool, emit, emitTables func(Work)) {
	var all []string
	var p string
	for paths(&p) {
		all = append(all, p)
	}
	slices.Sort(all)
	var w, last Work
	for work(&w) {
		w.Stats = all
		emit(w)
		last = w
	}
	if last.Facts != "" {
		emitTables(Work{Facts: last.Facts, Stats: all, Tables: true})
	}
}

// joinFn writes every shard's facts, in shard order, as the file
// STATS/facts, and gives every shard its path.
type joinFn struct{ Job Job }

func (fn *joinFn) ProcessElement(ctx context.Context, _ int, facts func(*[]byte) bool, shards func(*Shard) bool, emit func(Work)) error {
	var all [][]byte
	var b []byte
	for facts(&b) {
		all = append(all, slices.Clone(b))
	}
	fs, err := readFacts(all)
	if err != nil {
		return err
	}
	// In shard order, so that a retried bundle writes the same bytes.
	slices.SortFunc(fs, func(a, b ShardFacts) int { return a.Index - b.Index })
	var buf bytes.Buffer
	if err := gob.NewEncoder(&buf).Encode(fs); err != nil {
		return err
	}
	name := joinPath(fn.Job.Stats, "facts")
	if err := writeAll(ctx, name, buf.Bytes()); err != nil {
		return err
	}
	var sh Shard
	for shards(&sh) {
		emit(Work{Shard: sh, Facts: name})
	}
	return nil
}

// factsCache keeps the facts files a worker read, by path (the run's
// staging folder is in it).
var factsCache sync.Map // string -> []ShardFacts

// loadFacts reads the file of every shard's facts (joinFn), once per
// worker.
func loadFacts(ctx context.Context, name string) ([]ShardFacts, error) {
	if v, ok := factsCache.Load(name); ok {
		return slices.Clone(v.([]ShardFacts)), nil
	}
	b, err := readAll(ctx, name)
	if err != nil {
		return nil, err
	}
	var fs []ShardFacts
	if err := gob.NewDecoder(bytes.NewReader(b)).Decode(&fs); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	factsCache.Store(name, fs)
	return slices.Clone(fs), nil
}

func (fn *fitFn) ProcessElement(ctx context.Context, w Work, emit func(int, Piece)) error {
	sh := w.Shard
	pl, err := plannedFor(ctx, fn.Job, fn.Schema, w.Facts)
	if err != nil {
		return err
	}
	r, done, err := open(ctx, &pl.sp, sh.Path, pl.fields)
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
		name := joinPath(fn.Job.Stats, fmt.Sprintf("partial-%05d-%05d", sh.Index, part))
		if err := writeAll(ctx, name, b); err != nil {
			return err
		}
		if failOnce(name) {
			return fmt.Errorf("%s: a failure injected once (MANYFOLD_BEAM_FAIL_ONCE)", name)
		}
		emit(part, Piece{Shard: sh.Index, Facts: w.Facts, Path: name})
	}
	return nil
}

// mergeFn merges one partition's partials from every shard into the
// file STATS/merged-PPPPP. For the ordered scheme it also gives each shard
// the statistics of the shards before it in the partition
// (pipeline.Preceding), in STATS/before-SSSSS-PPPPP. It emits the merged
// file's path.
type mergeFn struct {
	Job    Job
	Schema string
}

func (fn *mergeFn) ProcessElement(ctx context.Context, part int, pieces func(*Piece) bool, emit func(string)) error {
	var all [][]byte
	var byShard [][]byte // the shards' partials by index
	var factsName string
	var pc Piece
	for pieces(&pc) {
		factsName = pc.Facts
		if pc.Shard < 0 || pc.Shard > 1<<30 {
			return fmt.Errorf("partition %d: a partial of shard %d", part, pc.Shard)
		}
		for len(byShard) <= pc.Shard {
			byShard = append(byShard, nil)
		}
		if byShard[pc.Shard] != nil {
			return fmt.Errorf("partition %d: shard %d's partial given twice", part, pc.Shard)
		}
		b, err := readAll(ctx, pc.Path)
		if err != nil {
			return err
		}
		byShard[pc.Shard] = b
		all = append(all, b)
		pc = Piece{}
	}
	pl, err := plannedFor(ctx, fn.Job, fn.Schema, factsName)
	if err != nil {
		return err
	}
	m, err := pipeline.MergePartials(pl.plan, pl.schema, all, pipeline.FitOptions{})
	if err != nil {
		return fmt.Errorf("partition %d: %w", part, err)
	}
	if pl.sp.Scheme == method.Ordered {
		byShard = append(byShard, make([][]byte, max(0, len(pl.plan.First)-len(byShard)))...)
		before, err := pipeline.Preceding(pl.plan, pl.schema, byShard, pipeline.FitOptions{})
		if err != nil {
			return fmt.Errorf("partition %d: %w", part, err)
		}
		for i, b := range before {
			if err := writeAll(ctx, beforeName(fn.Job.Stats, i, part), b); err != nil {
				return err
			}
		}
	}
	name := joinPath(fn.Job.Stats, fmt.Sprintf("merged-%05d", part))
	if err := writeAll(ctx, name, m); err != nil {
		return err
	}
	emit(name)
	return nil
}

// beforeName is the file of the statistics before shard i in partition
// part (the ordered scheme).
func beforeName(stats string, i, part int) string {
	return joinPath(stats, fmt.Sprintf("before-%05d-%05d", i, part))
}

// writeAll writes data as the file name, through a temporary name and a
// rename (a retried bundle writes the same bytes again).
func writeAll(ctx context.Context, name string, data []byte) error {
	return writeFile(name, func(p string) error {
		f, err := os.CreateTemp(filepath.Dir(p), "."+filepath.Base(p)+".tmp-*")
		if err != nil {
			return err
		}
		if _, err := f.Write(data); err != nil {
			f.Close()
			os.Remove(f.Name())
			return err
		}
		if err := f.Close(); err != nil {
			os.Remove(f.Name())
			return err
		}
		if err := os.Rename(f.Name(), p); err != nil {
			os.Remove(f.Name())
			return err
		}
		return nil
	})
}

// readAll reads a file, local or of Beam's filesystems.
func readAll(ctx context.Context, name string) ([]byte, error) {
	if !strings.Contains(name, "://") {
		return os.ReadFile(name)
	}
	fs, err := filesystem.New(ctx, name)
	if err != nil {
		return nil, err
	}
	defer fs.Close()
	return filesystem.Read(ctx, fs, name)
}

// model returns the model assembled from the merged partitions' files,
// once per worker for the same job and facts.
func model(ctx context.Context, job Job, schemaPath string, w Work) (*modelOnce, error) {
	// The key: the job (its run among its fields), its first shard, the
	// facts file and the merged statistics' files (all in the run's
	// staging folder).
	var kb bytes.Buffer
	gob.NewEncoder(&kb).Encode(struct {
		Job           Job
		Schema, Facts string
		Stats         []string
	}{job, schemaPath, w.Facts, w.Stats})
	key := fmt.Sprintf("%x", xxhash.Sum64(kb.Bytes()))
	v, _ := models.LoadOrStore(key, &modelOnce{})
	mo := v.(*modelOnce)
	mo.once.Do(func() {
		parts := make([][]byte, len(w.Stats))
		for i, p := range w.Stats {
			if parts[i], mo.err = readAll(ctx, p); mo.err != nil {
				return
			}
		}
		var pl planned
		if pl, mo.err = plannedFor(ctx, job, schemaPath, w.Facts); mo.err != nil {
			return
		}
		mo.plan, mo.schema, mo.fields = pl.plan, pl.schema, pl.fields
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

// scoresName is the file of shard i's training scores (ScoreState).
func scoresName(stats string, i int) string {
	return joinPath(stats, fmt.Sprintf("scores-%05d", i))
}

// partName is the encoded file of shard i.
func partName(out string, i int, format string) string {
	return joinPath(out, fmt.Sprintf("part-%05d.%s", i, format))
}

func (fn *encodeFn) ProcessElement(ctx context.Context, w Work, emit func(string)) error {
	mo, err := model(ctx, fn.Job, fn.Schema, w)
	if err != nil {
		return err
	}
	sh := w.Shard
	m, opt := mo.m, encodeOptions(mo.plan, sh)
	if m.Spec.Scheme == method.Ordered {
		parts := make([][]byte, fn.Job.Partitions)
		for p := range parts {
			if parts[p], err = readAll(ctx, beforeName(fn.Job.Stats, sh.Index, p)); err != nil {
				return err
			}
		}
		if opt.Before, err = mo.plan.Before(mo.schema, parts, pipeline.FitOptions{}); err != nil {
			return fmt.Errorf("%s: the statistics of the shards before it: %w", sh.Path, err)
		}
	}
	final := partName(fn.Out, sh.Index, fn.Job.Format)
	removeStale(final)
	err = writeFile(final, func(dst string) error {
		r, done, err := open(ctx, &m.Spec, sh.Path, mo.fields)
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
		sum, err := m.Encode(r, w, opt)
		if err != nil {
			w.Abort()
			return err
		}
		state, err := sum.ScoreState()
		if err == nil {
			err = writeAll(ctx, scoresName(fn.Job.Stats, sh.Index), state)
		}
		if err != nil {
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

// finishFn runs once every output is written (its side input is their
// paths): it removes the temporary files of attempts that failed or were
// abandoned, and the staging folders of the merged statistics: this run's
// and those of runs into the same folder that started before it (a run
// that failed leaves its own). A run started later, into the same folder,
// keeps its own: two jobs into one folder at once overwrite each other's
// parts anyway, but not each other's statistics.
type finishFn struct{ Out, Run string }

func (fn *finishFn) ProcessElement(ctx context.Context, _ int, written func(*string) bool) error {
	var p string
	for written(&p) {
		if strings.HasPrefix(filepath.Base(p), "part-") {
			removeStale(p)
		}
	}
	if !strings.Contains(fn.Out, "://") {
		stale, _ := filepath.Glob(filepath.Join(fn.Out, "_stats-*"))
		for _, d := range stale {
			if !startedBy(filepath.Base(d), fn.Run) {
				continue
			}
			if err := os.RemoveAll(d); err != nil {
				return err
			}
		}
		return nil
	}
	fs, err := filesystem.New(ctx, fn.Out)
	if err != nil {
		return err
	}
	defer fs.Close()
	rm, ok := fs.(filesystem.Remover)
	if !ok {
		return nil // left for the store's lifecycle rules
	}
	names, err := fs.List(ctx, joinPath(fn.Out, "_stats-*/*"))
	if err != nil {
		return err
	}
	for _, n := range names {
		dir := path.Base(path.Dir(n))
		if !startedBy(dir, fn.Run) {
			continue
		}
		if err := rm.Remove(ctx, n); err != nil {
			return err
		}
	}
	return nil
}

// startedBy reports whether the staging folder dir ("_stats-RUN") is of
// run, or of a run that started before it (a run id begins with its start
// time in nanoseconds, in hexadecimal).
func startedBy(dir, run string) bool {
	other, ok := strings.CutPrefix(dir, "_stats-")
	if !ok {
		return false
	}
	if other == run {
		return true
	}
	t := func(id string) (uint64, bool) {
		hex, _, _ := strings.Cut(id, "-")
		v, err := strconv.ParseUint(hex, 16, 64)
		return v, err == nil
	}
	a, okA := t(other)
	b, okB := t(run)
	return okA && okB && a < b
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
// one of the suffixes MANYFOLD_BEAM_FAIL_ONCE lists (comma-separated),
// that the bundle should fail there (a test's injected fault: the bundle
// fails once and is retried, or the job is run again). A marker file in
// the folder MANYFOLD_BEAM_FAIL_MARKS, named by the suffix, remembers that
// it did, across runs (a run's staging folder has a name of its own).
func failOnce(final string) bool {
	marks := os.Getenv("MANYFOLD_BEAM_FAIL_MARKS")
	if marks == "" {
		return false
	}
	for _, suffix := range strings.Split(os.Getenv("MANYFOLD_BEAM_FAIL_ONCE"), ",") {
		if suffix == "" || !strings.HasSuffix(final, suffix) {
			continue
		}
		f, err := os.OpenFile(filepath.Join(marks, filepath.Base(suffix)), os.O_CREATE|os.O_EXCL|os.O_WRONLY, 0o644)
		if err != nil {
			return false // failed before
		}
		f.Close()
		return true
	}
	return false
}

// tablesFn writes the mapping tables once every shard is encoded, their
// manifest with the training scores merged from the shards' files.
type tablesFn struct {
	Job    Job
	Schema string
	Tables string
}

func (fn *tablesFn) ProcessElement(ctx context.Context, _ int, _ func(*string) bool, work func(*Work) bool, emit func(string)) error {
	var w Work
	if !work(&w) {
		return nil
	}
	mo, err := model(ctx, fn.Job, fn.Schema, w)
	if err != nil {
		return err
	}
	var sm pipeline.ScoreMerger // one shard's state in memory at a time
	for i := range mo.plan.First {
		b, err := readAll(ctx, scoresName(fn.Job.Stats, i))
		if err != nil {
			return err
		}
		if len(b) == 0 {
			b = nil
		}
		if err := sm.Add(b); err != nil {
			return err
		}
	}
	scores := sm.Scores()
	return saveTables(ctx, mo.m, scores, fn.Tables, emit)
}

// saveTables writes the mapping tables of the assembled model into
// tables, the training scores in their manifest, and emits their folder.
func saveTables(ctx context.Context, m *pipeline.Model, scores []*pipeline.Score, tables string, emit func(string)) error {
	save := func(dir string) error {
		st, err := m.StageTables(dir)
		if err != nil {
			return err
		}
		if err := st.RecordScores(scores); err != nil {
			st.Abort()
			return err
		}
		return st.Commit()
	}
	if !strings.Contains(tables, "://") {
		if err := save(tables); err != nil {
			return err
		}
		emit(tables)
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
	if err := save(local); err != nil {
		return err
	}
	entries, err := os.ReadDir(local)
	if err != nil {
		return err
	}
	slices.SortFunc(entries, func(a, b os.DirEntry) int {
		return boolInt(a.Name() == "manifest.json") - boolInt(b.Name() == "manifest.json")
	})
	for _, e := range entries {
		if err := upload(ctx, joinPath(tables, path.Base(e.Name())), filepath.Join(local, e.Name())); err != nil {
			return err
		}
	}
	emit(tables)
	return nil
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}
