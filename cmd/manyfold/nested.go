package main

import (
	"strconv"
	"strings"

	"manyfold/encoders/pipeline"
	"manyfold/io/dataset"
	"manyfold/io/derive"
	"manyfold/io/pqio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// Nested Parquet columns (lists, maps, structs) are not table columns: they
// cannot be encoded, and only a Parquet output can hold them, copied as they
// are. Asking for anything else is a usage error (exit code 2), found
// before any pass over the data.

// nestedOf returns the nested top-level columns of a Parquet input (none
// for other formats).
func nestedOf(r table.Reader) []pqio.Nested {
	switch b := derive.Base(r).(type) {
	case *pqio.Reader:
		return b.Nested()
	case *dataset.Reader:
		return b.Nested()
	}
	return nil
}

// findNested returns the nested column of that name, or nil.
func findNested(nested []pqio.Nested, name string) *pqio.Nested {
	for i := range nested {
		if nested[i].Name == name {
			return &nested[i]
		}
	}
	return nil
}

// refuseNested gives a usage error when one of names, given with flag, is
// a nested column: only flat columns can be used so (encoded, read).
func refuseNested(file, flag, used string, nested []pqio.Nested, names ...string) error {
	for _, name := range names {
		if n := findNested(nested, name); n != nil {
			return usagef("%s: %s %q is a nested Parquet column (%s): only flat columns can be %s",
				file, flag, name, n.Kind, used)
		}
	}
	return nil
}

// vetNested checks, before any pass, what encode asks of the input's
// nested columns: none is encoded or read as the target, group, order or
// prior column, and any that is kept goes to a Parquet output. It takes the
// names of nested columns out of sp.Keep and returns the --keep list as
// given (nil when every column is kept), from which keptNested places them.
func vetNested(file string, r table.Reader, sp *pipeline.Spec, format tableio.Format) ([]string, error) {
	nested := nestedOf(r)
	var keep []string
	if !sp.KeepAll {
		keep = append([]string{}, sp.Keep...)
	}
	if len(nested) == 0 {
		return keep, nil
	}
	if err := refuseNested(file, "--columns", "encoded", nested, sp.Columns...); err != nil {
		return nil, err
	}
	group := ""
	group = sp.GroupColumn()
	uses := []struct{ flag, name string }{{"--target", sp.Target}, {"--fold-by group=", group}, {"--order-by", sp.OrderBy}}
	for _, pc := range sp.PriorColumns() {
		uses = append(uses, struct{ flag, name string }{"prior=column:", pc})
	}
	for _, f := range uses {
		if err := refuseNested(file, f.flag, "read", nested, f.name); err != nil {
			return nil, err
		}
	}
	if !sp.KeepAll {
		flat := sp.Keep[:0:0]
		for _, k := range sp.Keep {
			if findNested(nested, k) == nil {
				flat = append(flat, k)
			}
		}
		sp.Keep = flat
	}
	suggest := r.Schema().Names()
	if keep != nil {
		suggest = sp.Keep
	}
	return keep, checkNestedOutput(file, keptNested(nested, keep), suggest, format, pipeline.Training)
}

// keptNested returns the nested columns that an output keeps, placed among
// its columns: with keep nil (every column kept), all of them, each before
// the flat column it precedes in the input; otherwise those that keep
// names, at their place in that list.
func keptNested(nested []pqio.Nested, keep []string) []pqio.Nested {
	if keep == nil {
		return nested
	}
	var out []pqio.Nested
	flat := 0
	for _, k := range keep {
		if n := findNested(nested, k); n != nil {
			out = append(out, pqio.Nested{Name: n.Name, Kind: n.Kind, Before: flat})
		} else {
			flat++
		}
	}
	return out
}

// checkNestedOutput refuses kept nested columns when the output is not
// Parquet, naming them and saying how to leave them out: with --keep and
// the flat columns to keep, suggest.
func checkNestedOutput(file string, kept []pqio.Nested, suggest []string, format tableio.Format, use pipeline.Use) error {
	if len(kept) == 0 || format == tableio.Parquet {
		return nil
	}
	var names []string
	for _, n := range kept {
		names = append(names, strconv.Quote(n.Name)+" ("+n.Kind+")")
	}
	kind := map[tableio.Format]string{tableio.CSV: "CSV", tableio.Arrow: "Arrow"}[format]
	what, them := "column "+names[0]+" is", "it"
	if len(names) > 1 {
		what, them = "columns "+strings.Join(names, ", ")+" are", "them"
	}
	if use == pipeline.NewRows {
		return usagef("%s: the nested Parquet %s written back by apply, and %s output cannot hold %s: write a Parquet output, which copies %s as %s",
			file, what, kind, them, them, map[string]string{"it": "it is", "them": "they are"}[them])
	}
	flag := "--keep none"
	if len(suggest) > 0 {
		flag = "--keep " + strings.Join(suggest, ",")
	}
	return usagef("%s: the nested Parquet %s kept, and %s output cannot hold %s: leave %s out with --keep (the columns to write back: %s) or write a Parquet output",
		file, what, kind, them, them, flag)
}

// outputFormat returns the format an output will be written in.
func outputFormat(out string, wopts tableio.WriteOptions) tableio.Format {
	if wopts.Format != "" {
		return wopts.Format
	}
	return tableio.FormatOf(out)
}
