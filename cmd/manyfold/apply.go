package main

import (
	"errors"
	"fmt"
	"os"
	"time"

	"manyfold/encoders/pipeline"
	"manyfold/io/atomicfile"
	"manyfold/io/csvio"
	"manyfold/io/table"
)

const applyUsage = `Usage: manyfold apply FILE --tables DIR --out OUT [flags]

Encodes FILE with the mapping tables that "manyfold encode" saved in DIR,
exactly as encode would encode a new row: the target mean fitted on all
training rows, and for a level the tables do not hold (unseen, or left out
by --min-level-rows) the prior (or its parent's value with a hierarchical
prior), the top-k "other" code 0, frequency 0, and its hash bucket.
All input columns are written back, then the encoded columns.

--report FILE also writes how FILE drifted from the training rows, per
encoded column (JSON; an HTML page when FILE ends in .html; give --report
twice for both): the share of rows and of levels unseen in training, the
unseen levels with the most rows (those with at least --min-level-rows
rows), the population stability index of the level distribution and,
where FILE holds the target, the target mean's AUC or RMSE against its
training value. --fail-on holds those figures to thresholds: when a column
exceeds one, the output and the report are still written, each figure
over its threshold is printed, and apply exits 7.
`

func runApply(args []string) error {
	fs := newFlags("apply", applyUsage)
	var in inputFlags
	in.add(fs)
	tables := fs.String("tables", "", "directory of mapping tables written by manyfold encode")
	var of outputFlags
	of.add(fs)
	jsonOut := fs.Bool("json", false, "also print the run's summary (rows, encodings, unseen shares, drift over --fail-on) as one JSON document on standard output")
	reports := fs.StringArray("report", nil, "write the drift report to this file: JSON, or HTML for .html (repeat for both)")
	minRows := fs.Uint64("min-level-rows", 10, "the report lists an unseen level only with at least this many rows (never fewer than the fit's --min-level-rows)")
	failOn := fs.String("fail-on", "", "exit 7 when a column's drift exceeds a threshold: unseen=SHARE, levels=SHARE, psi=X, auc_drop=X, rmse_rise=X, separated by commas")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usagef("apply takes one input file (see manyfold apply --help)")
	}
	if *tables == "" || of.out == "" {
		return usagef("apply needs --tables and --out")
	}
	if err := checkJSONFlag(*jsonOut, of.out); err != nil {
		return err
	}
	file := fs.Arg(0)
	wopts, err := of.options(file)
	if err != nil {
		return err
	}
	start := time.Now()
	ropts, err := in.options() // every flag before any data is read
	if err != nil {
		return err
	}
	th, err := checkReportFlags(file, of.out, *reports, *failOn)
	if err != nil {
		return err
	}
	reserveHeap(file, *tables)
	m, mf, err := pipeline.LoadTablesManifest(*tables)
	if err != nil {
		return err
	}
	var drift *pipeline.Drift
	if len(*reports) > 0 || *failOn != "" {
		drift = newDrift(m, mf, *minRows)
	}
	ropts.CSV.TypesIfPresent = fittedKinds(m)
	name := file
	if file == "-" {
		name = "stdin"
	}
	o, err := openOutput(file, name, of.out, ropts, wopts, m, pipeline.NewRows, nil, func(s *table.Schema) error {
		return m.CheckInput(name, s, *tables)
	})
	if err != nil {
		return err
	}
	defer o.close()
	w := o.w
	pr := newProgress("apply", o.r)
	sum, err := m.Encode(o.r, w, pipeline.EncodeOptions{File: name, Use: pipeline.NewRows, Progress: pr.update, Threads: of.threads, Input: o.full, Drift: drift})
	err = locate(err, o.r)
	pr.done()
	if err != nil {
		w.Abort()
		return fittedKindError(err, ropts.CSV, *tables)
	}
	var failed []pipeline.Breach
	var outs []atomicfile.Output
	if drift != nil {
		rep := drift.Report()
		rep.Tables = *tables
		failed = rep.Check(th)
		if outs, err = createDriftReports(rep, *reports); err != nil {
			w.Abort()
			return err
		}
	}
	// The output and the reports are one unit: all are written in full
	// before any is moved into place.
	if err := atomicfile.CommitAll(append([]atomicfile.Output{w}, outs...)...); err != nil {
		return commitError(err)
	}
	elapsed := time.Since(start)
	fmt.Fprintf(os.Stderr, "applied %s to %d rows in %.1fs;", *tables, sum.Rows, elapsed.Seconds())
	for i, c := range m.Cols {
		fmt.Fprintf(os.Stderr, " %s %.1f%% unseen", c.Name, 100*unseenShare(sum, i))
		if i < len(m.Cols)-1 {
			fmt.Fprint(os.Stderr, ",")
		}
	}
	fmt.Fprintf(os.Stderr, "; wrote %s", outName(of.out))
	for _, r := range *reports {
		fmt.Fprintf(os.Stderr, " and %s", r)
	}
	fmt.Fprintln(os.Stderr)
	for _, b := range failed {
		fmt.Fprintln(os.Stderr, "manyfold apply: "+breachLine(b))
	}
	if *jsonOut {
		if err := applyJSON(m, name, of.out, *tables, *reports, sum, elapsed, failed).print(); err != nil {
			return err
		}
	}
	if len(failed) > 0 {
		return &driftError{failed}
	}
	return nil
}

// unseenShare is the share of the rows of a pass whose level of column i
// was unseen in training (or left out of the tables), 0 without rows.
func unseenShare(sum pipeline.Summary, i int) float64 {
	if sum.Rows == 0 {
		return 0
	}
	return float64(sum.Unseen[i]) / float64(sum.Rows)
}

// applyJSON is apply's --json document: what encode's has too, and the
// reports written, each column's unseen rows and the drift figures over
// their --fail-on thresholds.
func applyJSON(m *pipeline.Model, input, out, tables string, reports []string, sum pipeline.Summary, elapsed time.Duration, failed []pipeline.Breach) *runJSON {
	d := newRunJSON(m, input, out, tables, sum.Rows, elapsed)
	d.Reports = reports
	for i := range d.Columns {
		share := unseenShare(sum, i)
		d.Columns[i].UnseenRows, d.Columns[i].UnseenShare = &sum.Unseen[i], &share
	}
	if failed == nil {
		failed = []pipeline.Breach{}
	}
	d.Failed = &failed
	return d
}

// checkReportFlags vets --report and --fail-on before any data is read: a
// report is neither the input nor the output nor named twice, and the
// thresholds parse.
func checkReportFlags(file, out string, reports []string, failOn string) (pipeline.Thresholds, error) {
	for i, r := range reports {
		switch {
		case r == "" || r == "-":
			return pipeline.Thresholds{}, usagef("--report %q: give a file name", r)
		case reads(file, r):
			return pipeline.Thresholds{}, usagef("--report %s is the input file or among its files; choose another path", r)
		case sameOutput(r, out):
			return pipeline.Thresholds{}, usagef("--report and --out both name %s; give two files", r)
		}
		for _, q := range reports[:i] {
			if sameOutput(q, r) {
				return pipeline.Thresholds{}, usagef("--report names %s twice", r)
			}
		}
	}
	th, err := pipeline.ParseThresholds(failOn)
	if err != nil {
		return th, usagef("--fail-on %v", err)
	}
	return th, nil
}

// newDrift returns the gatherer of apply's drift report from the tables of
// m and their manifest mf (each column's training score).
func newDrift(m *pipeline.Model, mf *pipeline.Manifest, minRows uint64) *pipeline.Drift {
	training := make([]*float64, len(mf.Columns))
	for i, c := range mf.Columns {
		training[i] = c.TrainingScore
	}
	return pipeline.NewDrift(m, pipeline.DriftOptions{MinLevelRows: minRows, Training: training})
}

// fittedKinds returns the kinds the mapping tables' columns were fitted on,
// the encoded columns' and the --prior-by column's, so that a CSV input
// reads them as those kinds instead of inferring them from its own rows:
// postcodes fitted as text stay text in a batch whose postcodes happen to
// have no leading zero ("501" and "00501" stay distinct levels). --type
// still overrides them.
func fittedKinds(m *pipeline.Model) map[string]table.Kind {
	kinds := make(map[string]table.Kind, len(m.Cols)+1)
	for _, pc := range m.Spec.PriorColumns() {
		for _, f := range m.Input {
			if f.Name == pc {
				kinds[pc] = f.Kind
			}
		}
	}
	for _, c := range m.Cols {
		kinds[c.Name] = c.Kind
	}
	return kinds
}

// fittedKindError turns the error of a CSV value that does not read as the
// kind its column was fitted on (read as that kind by fittedKinds, not
// forced with --type) into the mismatch it is: exit 6, naming the line,
// the column and the value. Other errors are returned as they are.
func fittedKindError(err error, opts csvio.Options, dir string) error {
	var de *table.DataError
	var ke *csvio.KindError
	if !errors.As(err, &de) || !errors.As(err, &ke) {
		return err
	}
	if _, forced := opts.Types[de.Column]; forced {
		return err
	}
	if _, fitted := opts.TypesIfPresent[de.Column]; !fitted {
		return err
	}
	v := ke.Value
	if len(v) > 40 {
		v = v[:40] + "..."
	}
	return &pipeline.ManifestError{Dir: dir, Msg: fmt.Sprintf("column %q of %s is %s on line %d (%q), but the tables were fitted on %s",
		de.Column, de.File, ke.Is, de.Line, v, ke.Want)}
}
