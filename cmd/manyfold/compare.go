package main

import (
	"fmt"
	"io"
	"os"
	"runtime"

	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/internal/cmdline"
	"manyfold/internal/evaluate/compare"
	"manyfold/io/atomicfile"
	"manyfold/io/derive"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

const compareUsage = `Usage: manyfold compare FILE --target COL --columns a,b [flags]

Measures which encoding of each categorical column serves the target best,
by nested cross-validation: for each outer fold every candidate is fitted on
the outer training rows only (frequency and top-k included), the training
rows' target statistics come from the inner folds (out of fold), the
held-out rows are encoded with the tables of all outer training rows, and a
linear model (L2 logistic for a binary target, multinomial for several
classes, ridge for a number) is fitted on the training rows and scored on
the held-out rows. Every candidate sees the same folds, fixed by --seed.

--fold-by sets the rule of the outer and inner folds: rows (the default: a
hash of the row number), group=COL (all rows with one value of COL share an
outer and an inner fold, so a customer's or a sender's rows never sit on
both sides of a split; the inner folds are drawn independently of the
outer), or stratified (each class of the target spread evenly over the
folds; classification targets only). ordered is refused: compare's nested
folds cannot keep the row order.

Candidates (--candidates, comma separated): prior (baseline: no information
from the column; always scored, added when not listed, as the verdict
measures every gain against it), target:insample (baseline: the raw level
mean fitted on
the training rows themselves; it leaks, and is shown so the gap is seen),
or encodings in encode's grammar (see manyfold encode --help), several
joined by '+' to feed one model together (target:eb+freq). A column prior
(prior=column:COL) is not taken. Numeric outputs (target means, weights of
evidence, frequencies, indicators) enter the models as standardised
features, top-k codes and hash buckets as one indicator column per code.

The statistics always stream over every row; --sample bounds the rows the
models are fitted and scored on (a deterministic hash sample of about that
many rows), so compare runs on files larger than memory. Rows whose target is
empty are left out. Output: a table on stdout, best first, the winner marked,
with a one-line reading per column; --json and --report write the result as
JSON and as a self-contained HTML page.

The verdict: each gain is tested by the corrected resampled t-test over the
outer folds (Nadeau and Bengio, 2003), given with its 95% interval and
p-value. The winner is the simplest candidate the test cannot tell from the
best, and only when it beats the prior; otherwise "no clear winner" (the
JSON's winner is null). The output ends with the manyfold encode command
that encodes each column by its winner.
`

func runCompare(args []string) (err error) {
	fs := newFlags("compare", compareUsage)
	var in inputFlags
	in.add(fs)
	target := fs.String("target", "", "target column, or a condition on one that makes a binary target (delay>15)")
	columns := fs.StringSlice("columns", nil, "categorical columns to compare, comma separated: names, patterns (dest_*, !dest_city) and crosses (origin*destination)")
	cands := fs.String("candidates", compare.DefaultCandidates, "candidates, comma separated")
	joint := fs.Bool("joint", false, "also score one model over every column's winning encodings together, against the best column alone")
	task := fs.String("task", "", "binary, multiclass or regression (default: detected from the target)")
	nfolds := fs.Int("folds", 5, "outer folds")
	inner := fs.Int("inner-folds", 5, "inner folds for the training rows' target statistics")
	seed := fs.Uint64("seed", 0, "seed of the outer, inner and sample assignments")
	foldBy := fs.String("fold-by", "rows", "rule of the outer and inner folds: rows, stratified, group=COL")
	with := fs.StringSlice("with", nil, "numeric columns added to every model, comma separated")
	sample := fs.Int64("sample", 200000, "rows the models are fitted and scored on (about; 0: all)")
	lambda := fs.Float64("lambda", compare.DefaultLambda, "L2 weight of the models")
	jsonOut := fs.String("json", "", "write the result as JSON to this file")
	report := fs.String("report", "", "write an HTML report to this file")
	timings := fs.Bool("timings", false, "record each candidate's fit and encode seconds (they vary from run to run; without them the same seed gives byte-identical output)")
	threads := fs.Int("threads", runtime.NumCPU(), "models fitted at once (the result is the same for any number)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usagef("compare takes one input file (see manyfold compare --help)")
	}
	file := fs.Arg(0)
	if *target == "" || len(*columns) == 0 {
		return usagef("compare needs --target and --columns")
	}
	if !(*lambda > 0) {
		return usagef("--lambda %v: want a number > 0", *lambda)
	}
	list, err := compare.ParseCandidates(*cands)
	if err != nil {
		return err
	}
	rule, err := folds.ParseRule(*foldBy)
	if err != nil {
		return usagef("--fold-by: %v", err)
	}
	// Every option is checked before any data is read.
	opts := compare.Options{
		Target: *target, Task: *task, Columns: *columns, Candidates: list,
		Folds: *nfolds, InnerFolds: *inner, Seed: *seed, FoldBy: rule, With: *with, Sample: *sample,
		Lambda: *lambda, Threads: *threads, NoTimings: !*timings, Joint: *joint,
	}
	if err := opts.Validate(); err != nil {
		return err
	}
	if err := pipeline.CheckThreads(*threads); err != nil {
		return err
	}
	for _, p := range []string{*jsonOut, *report} {
		if reads(file, p) {
			return usagef("%s is the input file or among its files; choose another path", p)
		}
	}
	if sameOutput(*jsonOut, *report) {
		return usagef("--json and --report both name %s; give two files", *jsonOut)
	}
	ropts, err := in.options()
	if err != nil {
		return err
	}
	path, name, done, err := spoolInput(file)
	if err != nil {
		return err
	}
	defer func() { err = done(err) }()
	reserveHeap(path)
	r, err := tableio.Open(path, ropts)
	if err != nil {
		return err
	}
	if err := refuseNested(name, "--columns", "encoded", nestedOf(r), *columns...); err != nil {
		r.Close()
		return err
	}
	if err := refuseNested(name, "--fold-by group=", "read", nestedOf(r), rule.Needs().Group); err != nil {
		r.Close()
		return err
	}
	// Parquet knows its row count; for other input a cheap first pass
	// counts the rows so that --sample can be turned into a share.
	var total int64
	if table.RowCount(r) < 0 && *sample > 0 {
		r.Close()
		if total, err = countRows(path, ropts); err != nil {
			return err
		}
		if r, err = tableio.Open(path, ropts); err != nil {
			return err
		}
	}
	// Column patterns, then the crosses and conditions the run names.
	if opts.Columns, err = derive.Expand(opts.Columns, r.Schema(), opts.Target); err != nil {
		r.Close()
		return usagef("--columns: %v", err)
	}
	wr, err := derive.Wrap(r, append(append([]string{}, opts.Columns...), opts.Target, rule.Needs().Group))
	if err != nil {
		r.Close()
		return usagef("%s: %v", name, err)
	}
	r = wr
	defer r.Close()
	pr := newProgress("compare", r)
	opts.File, opts.TotalRows, opts.Progress, opts.Models = name, total, pr.update, pr.models
	res, err := compare.Run(r, opts)
	err = locate(err, r)
	pr.done()
	if err != nil {
		return err
	}
	res.Tool = "manyfold " + pipeline.Version
	res.CommandLine = cmdline.Join(append([]string{"manyfold", "compare"}, args...))
	if err := writeResults(res, *jsonOut, *report); err != nil {
		return &outputError{err}
	}
	if err := compare.WriteText(os.Stdout, res); err != nil {
		return &outputError{err}
	}
	return nil
}

// writeResults writes the JSON result and the HTML report, those whose
// path is not empty, as one unit: both are written in full before either
// is moved into place, so a failure leaves neither.
func writeResults(res *compare.Result, jsonPath, reportPath string) error {
	var outs []atomicfile.Output
	fail := func(err error) error {
		for _, o := range outs {
			o.Abort()
		}
		return err
	}
	for _, o := range []struct {
		path  string
		write func(io.Writer, *compare.Result) error
	}{{jsonPath, compare.WriteJSON}, {reportPath, compare.WriteReportTo}} {
		if o.path == "" {
			continue
		}
		f, err := atomicfile.Create(o.path)
		if err != nil {
			return fail(err)
		}
		outs = append(outs, f)
		if err := o.write(f, res); err != nil {
			return fail(fmt.Errorf("write %s: %w", o.path, err))
		}
	}
	return atomicfile.CommitAll(outs...)
}
