package main

import (
	"fmt"
	"os"

	"manyfold/encoders/pipeline"
)

const mergeUsage = `Usage: manyfold merge DIR DIR... --tables OUT

Merges mapping tables fitted with the same parameters on shards of one table
(for example by several machines, each on a part of the file) into the tables
of the whole table: per-level row counts and target sums add, and priors,
smoothing weights, frequencies and top-k codes are derived again from the
merged statistics. The shards must have been fitted with --min-level-rows 0,
since a level left out of a shard's tables cannot be added back; give
--min-level-rows here to leave out small levels of the merged tables.
`

func runMerge(args []string) error {
	fs := newFlags("merge", mergeUsage)
	tables := fs.String("tables", "", "directory for the merged mapping tables")
	minRows := fs.Uint64("min-level-rows", 0, "levels with fewer rows in the merged tables are left out")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() < 2 || *tables == "" {
		return usagef("merge takes two or more tables directories and --tables OUT")
	}
	if err := checkTablesFlag(*tables, "", ""); err != nil {
		return err
	}
	var models []*pipeline.Model
	for _, dir := range fs.Args() {
		m, err := pipeline.LoadTables(dir)
		if err != nil {
			return err
		}
		models = append(models, m)
	}
	merged, err := pipeline.Merge(models, fs.Args(), *minRows)
	if err != nil {
		return err
	}
	if err := merged.SaveTables(*tables); err != nil {
		return &outputError{err}
	}
	fmt.Fprintf(os.Stderr, "merged %d tables directories (%d rows) into %s\n", len(models), merged.Rows, *tables)
	return nil
}
