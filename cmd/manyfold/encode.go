package main

import (
	"context"
	"fmt"
	"os"
	"runtime/pprof"
	"runtime/trace"
	"strings"
	"time"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/internal/guard"
	"manyfold/io/atomicfile"
	"manyfold/io/derive"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

var encodeUsage = `Usage: manyfold encode FILE --columns a,b,c --out OUT --tables DIR [flags]

Fits encodings of the categorical columns in one pass over FILE, then writes
FILE again in a second pass with the encoded columns appended, and saves the
fitted mapping tables in DIR so that "manyfold apply" encodes new data the same
way. Training rows get target statistics out of fold (--scheme kfold): a row
never sees its own label.

Encodings (--methods), in one grammar with compare and the manifest:
` + method.Help() + `Join encodings with '+'. One list for every column:
  --methods target:eb+freq
or a list per column (then --columns may be left out):
  --methods 'dest_postcode=target:eb+freq,parcel_type=topk:6'

Schemes: kfold (default) uses the statistics of the other folds, prior
included; loo leaves the row's own label out, which still leaks on binary
targets (a level's encoded values then separate its positive and negative
rows by one threshold; Prokhorenkova et al., NeurIPS 2018): prefer kfold;
ordered uses only the rows before it in file order (for time-ordered files);
none is in-sample, for tables that only serve apply.

Frequency and top-k are fitted on all rows of FILE (they do not use the
target). Rows whose target is empty are encoded but not counted.
`

func runEncode(args []string) (err error) {
	if err := refuseRemovedFlags(args); err != nil {
		return err
	}
	fs := newFlags("encode", encodeUsage)
	var in inputFlags
	in.add(fs)
	sp := pipeline.DefaultSpec()
	target := fs.String("target", "", "target column, or a condition on one that makes a binary target (delay>15); needed by the target and woe methods")
	columns := fs.StringSlice("columns", nil, "categorical columns to encode, comma separated: names, patterns (dest_*, !dest_city) and crosses (origin*destination)")
	methods := fs.String("methods", "target:eb", "encodings, joined by '+' (target:eb+freq), for every column or per column (col=target:eb+freq,col2=topk:6); see above")
	task := fs.String("task", "", "binary, multiclass or regression (default: detected from the target)")
	fs.IntVar(&sp.Folds, "folds", 5, "folds for out-of-fold statistics")
	foldBy := fs.String("fold-by", "rows", "fold rule: rows, stratified, group=COL, ordered (contiguous blocks)")
	fs.Uint64Var(&sp.Seed, "seed", 0, "seed of the fold assignment")
	scheme := fs.String("scheme", "kfold", "training rows: kfold, loo, ordered, none")
	fs.Uint64Var(&sp.MinLevelRows, "min-level-rows", 0, "levels with fewer rows are left out of the tables and treated as unseen")
	nulls := fs.String("nulls", "level", "nulls as a level of their own (level) or as unseen")
	keep := fs.String("keep", "all", "input columns written back: all, none, or a comma-separated list")
	fs.StringVar(&sp.FoldColumn, "fold-column", "", "also write each row's fold under this name")
	fs.StringVar(&sp.OrderBy, "order-by", "", "check that the file is sorted by this column (for --scheme ordered or --fold-by ordered)")
	tables := fs.String("tables", "", "directory for the mapping tables")
	var of outputFlags
	of.add(fs)
	jsonOut := fs.Bool("json", false, "also print what was decided (task, classes, encodings, warnings) as one JSON document on standard output")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usagef("encode takes one input file (see manyfold encode --help)")
	}
	file := fs.Arg(0)
	if of.out == "" || *tables == "" {
		return usagef("encode needs --out and --tables")
	}
	if err := checkJSONFlag(*jsonOut, of.out); err != nil {
		return err
	}
	sp.Target, sp.Columns, sp.Task = *target, *columns, *task
	if sp.Encodings, err = method.ParsePlan(*methods); err != nil {
		return usagef("--methods: %v", err)
	}
	if sp.FoldBy, err = folds.ParseRule(*foldBy); err != nil {
		return usagef("--fold-by: %v", err)
	}
	var ok bool
	if sp.Scheme, ok = method.ParseScheme(*scheme); !ok {
		return usagef("unknown --scheme %q (want kfold, loo, ordered, none)", *scheme)
	}
	if sp.Encodings.PerColumn != nil && len(sp.Columns) > 0 {
		return usagef("--methods names the columns (COLUMN=LIST,...): leave out --columns")
	}
	switch *nulls {
	case "level":
	case "unseen":
		sp.NullsUnseen = true
	default:
		return usagef("--nulls %q: want level or unseen", *nulls)
	}
	switch *keep {
	case "all":
	case "none":
		sp.KeepAll = false
	default:
		sp.KeepAll = false
		sp.Keep = strings.Split(*keep, ",")
	}
	// Every parameter is checked before any data is read.
	if err := sp.Validate(); err != nil {
		return err
	}
	ropts, err := in.options()
	if err != nil {
		return err
	}
	wopts, err := of.options(file)
	if err != nil {
		return err
	}
	if err := checkTablesFlag(*tables, file, of.out); err != nil {
		return err
	}
	start := time.Now()
	path, name, done, err := spoolInput(file)
	if err != nil {
		return err
	}
	defer func() { err = done(err) }()
	reserveHeap(path)

	var total int64
	if sp.FoldBy.Needs().Total {
		if total, err = countRows(path, ropts); err != nil {
			return err
		}
	}
	r, err := tableio.Open(path, ropts)
	if err != nil {
		return err
	}
	// Column patterns (dest_*, !dest_city) against the file's columns,
	// never the target or the fold column; then the crosses and
	// conditions the job names.
	if sp.Columns, err = derive.Expand(sp.Columns, r.Schema(), sp.Target, sp.FoldColumn); err != nil {
		r.Close()
		return usagef("--columns: %v", err)
	}
	// The encodings of each column, now that the patterns are columns (a
	// pattern may name several).
	if err := sp.Validate(); err != nil {
		r.Close()
		return err
	}
	wr, err := derive.Wrap(r, specNames(&sp))
	if err != nil {
		r.Close()
		return usagef("%s: %v", name, err)
	}
	r = wr
	keepList, err := vetNested(name, r, &sp, outputFormat(of.out, wopts))
	if err != nil {
		r.Close()
		return err
	}
	if !sp.KeepAll {
		// Check --keep now, not after the first pass.
		if _, err := selectColumns(name, "--keep", r.Schema(), sp.Keep); err != nil {
			r.Close()
			return err
		}
	}
	if err := sp.CheckOutputNames(name, r.Schema()); err != nil {
		r.Close()
		return err
	}
	// The first pass reads only the columns the fit needs.
	full := append([]table.Field(nil), r.Schema().Fields...)
	if need, ok := sp.FitColumns(r.Schema()); ok {
		if err := r.Select(need); err != nil {
			r.Close()
			return err
		}
	}
	pr := newProgress("fit", r)
	r = table.ReadAhead(r)
	region := trace.StartRegion(context.Background(), "fit")
	var m *pipeline.Model
	phase("fit", func() {
		m, err = pipeline.Fit(r, sp, pipeline.FitOptions{File: name, TotalRows: total, Progress: pr.update, Threads: of.threads, Tables: true})
		err = locate(err, r)
	})
	region.End()
	r.Close()
	if m != nil {
		m.Input = full
	}
	pr.done()
	if err != nil {
		return err
	}

	o, err := openOutput(path, name, of.out, ropts, wopts, m, pipeline.Training, keepList, nil)
	if err != nil {
		return err
	}
	defer o.close()
	w := o.w
	// The mapping tables depend on the fit alone: they are written on a
	// core of their own while the second pass runs.
	type staged struct {
		st  *pipeline.StagedTables
		err error
	}
	tablesDone := make(chan staged, 1)
	go phase("tables", func() {
		var s staged
		func() {
			defer guard.Catch(&s.err)
			s.st, s.err = m.StageTables(*tables)
		}()
		tablesDone <- s
	})
	pr = newProgress("encode", o.r)
	region = trace.StartRegion(context.Background(), "encode")
	var sum pipeline.Summary
	phase("encode", func() {
		sum, err = m.Encode(o.r, w, pipeline.EncodeOptions{File: name, Progress: pr.update, Threads: of.threads, Input: o.full})
		err = locate(err, o.r)
	})
	region.End()
	if err == nil {
		// Finish the output (the writer runs behind the encoding), so
		// that bad data met by the writer is reported before anything
		// is committed.
		if cerr := w.Writer.Close(); cerr != nil {
			err = commitError(cerr)
		}
	}
	pr.done()
	saved := <-tablesDone
	if err != nil || saved.err != nil {
		w.Abort()
		if saved.st != nil {
			saved.st.Abort()
		}
		if err != nil {
			return err
		}
		return &outputError{saved.err}
	}
	// The training scores, known now, go into the staged manifest (for
	// apply --report).
	if err := saved.st.RecordScores(sum.Scores); err != nil {
		w.Abort()
		saved.st.Abort()
		return &outputError{err}
	}
	// The output and the tables are one unit: both are made durable
	// first, then the output is renamed into place and the tables
	// directory swapped for the old one.
	if err := atomicfile.CommitAll(w, saved.st); err != nil {
		return commitError(err)
	}
	fmt.Fprintf(os.Stderr, "encoded %d rows", sum.Rows)
	if sum.Missing > 0 {
		fmt.Fprintf(os.Stderr, " (%d with an empty target: encoded, not counted)", sum.Missing)
	}
	elapsed := time.Since(start)
	fmt.Fprintf(os.Stderr, " in %.1fs;", elapsed.Seconds())
	for i, c := range m.Cols {
		fmt.Fprintf(os.Stderr, " %s %d levels", c.Name, m.Levels(i))
		if i < len(m.Cols)-1 {
			fmt.Fprint(os.Stderr, ",")
		}
	}
	if t := m.TargetSummary(); t != "" {
		fmt.Fprintf(os.Stderr, "; %s", t)
	}
	fmt.Fprintf(os.Stderr, "; wrote %s and %s\n", outName(of.out), *tables)
	warnings := m.Warnings()
	for _, w := range warnings {
		fmt.Fprintf(os.Stderr, "warning: %s\n", w)
	}
	if *jsonOut {
		return encodeJSON(m, name, of.out, *tables, sum, elapsed, warnings).print()
	}
	return nil
}

// encodeJSON is encode's --json document: what apply's has too, and the
// rows with an empty target, the classes, each column's levels and the
// warnings.
func encodeJSON(m *pipeline.Model, input, out, tables string, sum pipeline.Summary, elapsed time.Duration, warnings []string) *runJSON {
	d := newRunJSON(m, input, out, tables, sum.Rows, elapsed)
	d.TargetMissingRows = &sum.Missing
	classes := m.TargetClasses()
	if classes == nil {
		classes = []pipeline.ClassRows{}
	}
	d.Classes = &classes
	for i := range d.Columns {
		n := m.Levels(i)
		d.Columns[i].Levels = &n
	}
	d.Warnings = append(d.Warnings, warnings...)
	return d
}

// removedFlags are encode's flags that became parameters of an encoding
// (mapping tables of format 3): the method, the encoding that replaces
// --name V, and the V a message shows when none was given.
var removedFlags = []struct {
	name, method, placeholder string
	to                        func(v string) string
}{
	{"smoothing", "target", "m=NUM", func(v string) string {
		if v == "auto" {
			return "target:eb"
		}
		return "target:" + v
	}},
	{"prior-by", "target", "prefix=N", func(v string) string {
		if col, ok := strings.CutPrefix(v, "column="); ok {
			return "target:eb:prior=column:" + col
		}
		return "target:eb:prior=" + strings.Replace(v, "=", "", 1) // prefix=3: prefix3
	}},
	{"output", "target", "logodds", func(v string) string {
		if v == "rate" {
			return "target:eb"
		}
		return "target:eb:" + v
	}},
	{"freq", "freq", "share", func(v string) string {
		if v == "count" {
			return "freq"
		}
		return "freq:" + v
	}},
	{"top-k", "topk", "K", func(v string) string { return "topk:" + v }},
	{"min-count", "topk", "N", func(v string) string { return "topk:100:min=" + v }},
	{"buckets", "hash", "B", func(v string) string { return "hash:" + v }},
	{"hash-seed", "hash", "S", func(v string) string { return "hash:1024:seed=" + v }},
	{"signed", "hash", "", func(v string) string {
		if v == "false" {
			return "hash:1024"
		}
		return "hash:1024:signed"
	}},
}

// refuseRemovedFlags refuses the first removed flag in args with a usage
// error that gives its replacement in the --methods grammar. It runs
// before the flags are parsed, which would only call the flag unknown.
func refuseRemovedFlags(args []string) error {
	for i, a := range args {
		if a == "--" {
			return nil
		}
		if !strings.HasPrefix(a, "--") {
			continue
		}
		name, v, hasV := strings.Cut(a[2:], "=")
		for _, f := range removedFlags {
			if name != f.name {
				continue
			}
			if !hasV { // --signed takes no value; the others the next argument
				v = f.placeholder
				if f.placeholder != "" && i+1 < len(args) && !strings.HasPrefix(args[i+1], "-") {
					v = args[i+1]
				}
			}
			return usagef("--%s is now a parameter of the %s encoding: --methods %s (see manyfold encode --help)", f.name, f.method, f.to(v))
		}
	}
	return nil
}

// countRows reads a table once to count its rows (for --fold-by ordered
// on input whose row count is not in its metadata).
func countRows(path string, opts tableio.ReadOptions) (int64, error) {
	r, err := tableio.Open(path, opts)
	if err != nil {
		return 0, err
	}
	defer r.Close()
	if err := r.Select([]int{0}); err != nil {
		return 0, err
	}
	var n int64
	err = table.ForEach(r, func(b *table.Batch) error { n += int64(b.Rows); return nil })
	return n, err
}

// phase runs f with the profiler label phase=name, which the goroutines f
// starts inherit: "go tool pprof -tagfocus phase=tables" then shows the
// time of one phase of a run recorded with MANYFOLD_CPUPROFILE.
func phase(name string, f func()) {
	pprof.Do(context.Background(), pprof.Labels("phase", name), func(context.Context) { f() })
}
