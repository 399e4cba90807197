package main

import (
	"errors"
	"fmt"
	"os"
	"time"

	"manyfold/encoders/pipeline"
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
`

func runApply(args []string) error {
	fs := newFlags("apply", applyUsage)
	var in inputFlags
	in.add(fs)
	tables := fs.String("tables", "", "directory of mapping tables written by manyfold encode")
	var of outputFlags
	of.add(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usagef("apply takes one input file (see manyfold apply --help)")
	}
	if *tables == "" || of.out == "" {
		return usagef("apply needs --tables and --out")
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
	reserveHeap(file, *tables)
	m, err := pipeline.LoadTables(*tables)
	if err != nil {
		return err
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
	sum, err := m.Encode(o.r, w, pipeline.EncodeOptions{File: name, Use: pipeline.NewRows, Progress: pr.update, Threads: of.threads, Input: o.full})
	pr.done()
	if err != nil {
		w.Abort()
		return fittedKindError(err, ropts.CSV, *tables)
	}
	if err := w.Commit(); err != nil {
		return commitError(err)
	}
	fmt.Fprintf(os.Stderr, "applied %s to %d rows in %.1fs;", *tables, sum.Rows, time.Since(start).Seconds())
	for i, c := range m.Cols {
		share := 0.0
		if sum.Rows > 0 {
			share = float64(sum.Unseen[i]) / float64(sum.Rows)
		}
		fmt.Fprintf(os.Stderr, " %s %.1f%% unseen", c.Name, 100*share)
		if i < len(m.Cols)-1 {
			fmt.Fprint(os.Stderr, ",")
		}
	}
	fmt.Fprintf(os.Stderr, "; wrote %s\n", outName(of.out))
	return nil
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
