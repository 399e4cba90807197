package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"sync"

	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/io/dataset"
	"manyfold/io/derive"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// Job is an encoding job as the workers receive it: the encode command's
// settings as text (a DoFn's fields travel as JSON), parsed into a
// pipeline.Spec on each worker by Spec.
type Job struct {
	Target, Columns, Methods, Task, FoldBy, Scheme, OrderBy string
	Folds                                                   int
	Seed                                                    uint64
	Partitions                                              int    // a power of two
	Format                                                  string // of the encoded shards: parquet or csv
	Run                                                     string // this run's id (Build), which keys the workers' models
	Stats                                                   string // the staging folder of the merged statistics (Build)
}

// Spec parses the job.
func (j Job) Spec() (pipeline.Spec, error) {
	sp := pipeline.DefaultSpec()
	sp.Target, sp.Task, sp.Folds, sp.Seed, sp.OrderBy = j.Target, j.Task, j.Folds, j.Seed, j.OrderBy
	if j.Columns != "" {
		sp.Columns = strings.Split(j.Columns, ",")
	}
	var err error
	if j.Methods != "" {
		if sp.Encodings, err = method.ParsePlan(j.Methods); err != nil {
			return sp, fmt.Errorf("-methods: %w", err)
		}
	}
	if sp.FoldBy, err = folds.ParseRule(j.FoldBy); err != nil {
		return sp, fmt.Errorf("-fold-by: %w", err)
	}
	var ok bool
	if sp.Scheme, ok = method.ParseScheme(j.Scheme); !ok {
		return sp, fmt.Errorf("-scheme %q: want kfold, loo, ordered or none", j.Scheme)
	}
	return sp, sp.Validate()
}

// names lists the columns the job names, for the derived ones (crosses,
// conditions) that a shard's reader adds.
func names(sp *pipeline.Spec) []string {
	n := append([]string{}, sp.Columns...)
	n = append(n, sp.Target, sp.GroupColumn(), sp.OrderBy)
	return append(n, sp.PriorColumns()...)
}

// Shard is one input file of the pipeline and its place among them.
type Shard struct {
	Index int
	Path  string
}

// local returns a local path holding the shard's bytes: the path itself
// for a local file, else a temporary copy read through Beam's filesystem
// layer (a Parquet file is read from its end, which a stream cannot do),
// removed by done.
func local(ctx context.Context, p string) (string, func(), error) {
	if !strings.Contains(p, "://") {
		return p, func() {}, nil
	}
	fs, err := filesystem.New(ctx, p)
	if err != nil {
		return "", nil, err
	}
	defer fs.Close()
	src, err := fs.OpenRead(ctx, p)
	if err != nil {
		return "", nil, err
	}
	defer src.Close()
	f, err := os.CreateTemp("", "manyfold-shard-*"+path.Ext(p))
	if err != nil {
		return "", nil, err
	}
	done := func() { os.Remove(f.Name()) }
	if _, err := io.Copy(f, src); err != nil {
		f.Close()
		done()
		return "", nil, fmt.Errorf("copying %s: %w", p, err)
	}
	if err := f.Close(); err != nil {
		done()
		return "", nil, err
	}
	return f.Name(), done, nil
}

// open opens a shard as a table with the job's derived columns. fields,
// when given, are the columns of every shard together (dataset.Columns):
// the shard is read as a part of them (a column of integers here and of
// floats in another shard is read as floats), as the plain binary reads
// it within the dataset.
func open(ctx context.Context, sp *pipeline.Spec, p string, fields []table.Field) (table.Reader, func(), error) {
	lp, done, err := local(ctx, p)
	if err != nil {
		return nil, nil, err
	}
	r, err := tableio.Open(lp, tableio.ReadOptions{})
	if err != nil {
		done()
		return nil, nil, err
	}
	if fields != nil {
		c, err := dataset.Conform(r, fields)
		if err != nil {
			r.Close()
			done()
			return nil, nil, fmt.Errorf("%s: %w", p, err)
		}
		r = c
	}
	w, err := derive.Wrap(r, names(sp))
	if err != nil {
		r.Close()
		done()
		return nil, nil, fmt.Errorf("%s: %w", p, err)
	}
	return w, func() { w.Close(); done() }, nil
}

// schemaOf returns the schema of the shards' columns, fields, with the
// derived columns, read from the shard at p.
func schemaOf(ctx context.Context, sp *pipeline.Spec, p string, fields []table.Field) (*table.Schema, error) {
	r, done, err := open(ctx, sp, p, fields)
	if err != nil {
		return nil, err
	}
	defer done()
	return &table.Schema{Fields: slices.Clone(r.Schema().Fields)}, nil
}

// plan rebuilds the plan from every shard's facts (stage 0's output, in
// any order).
func plan(sp pipeline.Spec, schema *table.Schema, facts []ShardFacts) (*pipeline.ShardPlan, error) {
	slices.SortFunc(facts, func(a, b ShardFacts) int { return a.Index - b.Index })
	fs := make([]pipeline.ShardFacts, len(facts))
	for i, f := range facts {
		if f.Index != i {
			return nil, fmt.Errorf("the facts of shard %d are missing", i)
		}
		fs[i] = f.Facts
	}
	return pipeline.PlanShards(sp, schema, fs, "the shards")
}

// ShardFacts is a shard's stage-0 facts with its index, its path and its
// columns as its reader found them (before the derived ones).
type ShardFacts struct {
	Index  int
	Path   string
	Fields []table.Field
	Facts  pipeline.ShardFacts
}

// columns returns the columns of every shard together, by the rule of a
// dataset read on one machine (dataset.Columns).
func columns(facts []ShardFacts) ([]table.Field, error) {
	parts := make([]dataset.Part, len(facts))
	for i, f := range facts {
		parts[i] = dataset.Part{Path: f.Path, Fields: f.Fields, Empty: f.Facts.Rows == 0}
	}
	return dataset.Columns(parts)
}

// models keeps the model a worker assembled, by the job and the merged
// statistics it came from, so that the bundles of one worker assemble it
// once.
var models sync.Map // string -> *modelOnce

type modelOnce struct {
	once   sync.Once
	m      *pipeline.Model
	plan   *pipeline.ShardPlan
	schema *table.Schema
	fields []table.Field // the shards' columns together
	err    error
}

// writeFile writes the file final with write, which creates it at the
// path it is given through a temporary name and a rename (tableio.Create,
// SaveTables' staged directory), so that a retried bundle writes the same
// bytes again and never leaves a partial file under the final name. A
// path of another filesystem (gs://, s3://) is written locally first.
func writeFile(final string, write func(p string) error) error {
	if strings.Contains(final, "://") {
		return writeRemote(final, write)
	}
	if err := os.MkdirAll(filepath.Dir(final), 0o755); err != nil {
		return err
	}
	return write(final)
}

// writeRemote writes a file of another filesystem: locally first, then
// copied under the final name as a stream (an object store makes an
// object visible only once it is whole), so that a worker's memory does
// not hold an encoded shard.
func writeRemote(final string, write func(tmp string) error) error {
	ctx := context.Background()
	d, err := os.MkdirTemp("", "manyfold-out-*")
	if err != nil {
		return err
	}
	defer os.RemoveAll(d)
	tmp := filepath.Join(d, path.Base(final))
	if err := write(tmp); err != nil {
		return err
	}
	return upload(ctx, final, tmp)
}

// upload copies the local file src as final, of another filesystem, as
// a stream.
func upload(ctx context.Context, final, src string) error {
	f, err := os.Open(src)
	if err != nil {
		return err
	}
	defer f.Close()
	fs, err := filesystem.New(ctx, final)
	if err != nil {
		return err
	}
	defer fs.Close()
	// A cancelled context abandons the upload: Close then does not make
	// the object of the bytes copied so far.
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	w, err := fs.OpenWrite(ctx, final)
	if err != nil {
		return err
	}
	if _, err := io.Copy(w, f); err != nil {
		cancel()
		w.Close()
		return fmt.Errorf("writing %s: %w", final, err)
	}
	if err := w.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", final, err)
	}
	return nil
}

// typeOf returns the reflect type of T, for registering it.
func typeOf[T any]() reflect.Type { return reflect.TypeOf((*T)(nil)).Elem() }
