// Command manyfold-beam runs manyfold's encoding job on a distributed
// engine through Apache Beam's Go SDK: the sharded fit of package pipeline
// (shards.go), one element per shard or partition, never per row. Its
// outputs are those of "manyfold encode" over the shards read as one
// table: the encoded shards, concatenated in the order of their paths, and
// the mapping tables, byte for byte.
//
//	manyfold-beam -input 'DATA/part-*.parquet' -out OUT -tables TABLES \
//	    -target late -columns dest_postcode,sender_account -methods target:eb+freq \
//	    [-folds 5] [-seed 0] [-scheme kfold|loo|none] [-fold-by rows|stratified|group=COL|ordered] \
//	    [-task binary|multiclass|regression] [-partitions 64] [-format parquet|csv] \
//	    [Beam's flags: -runner prism|universal|flink|spark|dataflow -endpoint ... -worker_binary ...]
//
// -input is a glob of table files on any of Beam's filesystems (local
// paths, gs://, s3://); -out receives part-NNNNN.EXT, one file per input
// file, numbered in the order of their paths. Without -runner the job runs
// in this process on the prism runner. See the README's "Past one
// machine" for submitting to Flink, Spark and Dataflow.
package main

import (
	"context"
	"flag"
	"fmt"
	"os"
	"runtime/pprof"
	"slices"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem/gcs"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem/local"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem/s3"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/runners/prism"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/x/beamx"
)

var (
	input  = flag.String("input", "", "glob of the input table files (local, gs://, s3://)")
	out    = flag.String("out", "", "directory of the encoded files, part-NNNNN.EXT")
	tables = flag.String("tables", "", "directory of the mapping tables")
	job    = Job{}
)

func init() {
	flag.StringVar(&job.Target, "target", "", "target column")
	flag.StringVar(&job.Columns, "columns", "", "categorical columns to encode, comma separated")
	flag.StringVar(&job.Methods, "methods", "target:eb", "encodings, as manyfold encode --methods")
	flag.StringVar(&job.Task, "task", "", "binary, multiclass or regression (default: detected)")
	flag.StringVar(&job.FoldBy, "fold-by", "rows", "fold rule: rows, stratified, group=COL, ordered")
	flag.StringVar(&job.Scheme, "scheme", "kfold", "training rows: kfold, loo, ordered, none")
	flag.StringVar(&job.OrderBy, "order-by", "", "check that the shards, in order, are sorted by this column (for -scheme ordered)")
	flag.IntVar(&job.Folds, "folds", 5, "folds for out-of-fold statistics")
	flag.Uint64Var(&job.Seed, "seed", 0, "seed of the fold assignment")
	flag.IntVar(&job.Partitions, "partitions", 64, "partitions of the levels' statistics (a power of two)")
	flag.StringVar(&job.Format, "format", "parquet", "format of the encoded files: parquet or csv")
}

func main() {
	flag.Parse()
	beam.Init()
	if p := os.Getenv("MANYFOLD_CPUPROFILE"); p != "" {
		if f, err := os.Create(p); err == nil {
			pprof.StartCPUProfile(f)
			defer pprof.StopCPUProfile()
		}
	}
	if err := run(context.Background()); err != nil {
		fmt.Fprintln(os.Stderr, "manyfold-beam:", err)
		pprof.StopCPUProfile()
		os.Exit(1)
	}
}

func run(ctx context.Context) error {
	if *input == "" || *out == "" || *tables == "" {
		return fmt.Errorf("-input, -out and -tables are required")
	}
	if _, err := job.Spec(); err != nil {
		return err
	}
	shards, err := listShards(ctx, *input)
	if err != nil {
		return err
	}
	p, s := beam.NewPipelineWithRoot()
	Build(s, job, shards, *out, *tables)
	_, err = beamx.RunWithMetrics(ctx, p)
	return err
}

// listShards lists the input files matching the glob, in the order of
// their paths: the shards' order.
func listShards(ctx context.Context, glob string) ([]Shard, error) {
	fs, err := filesystem.New(ctx, glob)
	if err != nil {
		return nil, err
	}
	defer fs.Close()
	paths, err := fs.List(ctx, glob)
	if err != nil {
		return nil, err
	}
	if len(paths) == 0 {
		return nil, fmt.Errorf("%s: no files", glob)
	}
	slices.Sort(paths)
	shards := make([]Shard, len(paths))
	for i, p := range paths {
		shards[i] = Shard{Index: i, Path: p}
	}
	return shards, nil
}
