package pipeline_test

import (
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/io/table"
)

// parcels is the parcel network's small table of the examples: six
// shipments, their destination postcode, sender account and route, and
// whether each was late.
//
//	row  dest_postcode  account  route  late
//	0    10115          ACC-1    R1     1
//	1    80331          ACC-2    R2     0
//	2    10115          ACC-1    R1     1
//	3    10115          ACC-3    R2     0
//	4    80331          ACC-2    R1     1
//	5    20095          ACC-3    R2     0
var parcels = [][]string{
	{"10115", "ACC-1", "R1", "1"},
	{"80331", "ACC-2", "R2", "0"},
	{"10115", "ACC-1", "R1", "1"},
	{"10115", "ACC-3", "R2", "0"},
	{"80331", "ACC-2", "R1", "1"},
	{"20095", "ACC-3", "R2", "0"},
}

// parcelTable returns a reader of rows (in the columns of parcels) held in
// memory, in batches of 4 rows.
func parcelTable(rows [][]string) table.Reader {
	mt := memTable{schema: &table.Schema{Fields: []table.Field{
		{Name: "dest_postcode", Kind: table.String, Nullable: true},
		{Name: "account", Kind: table.String, Nullable: true},
		{Name: "route", Kind: table.String, Nullable: true},
		{Name: "late", Kind: table.Int64},
	}}, rows: rows}
	return mt.reader(4, false)
}

// parcelSpec is the examples' job: dest_postcode encoded by the
// m-estimate with m = 1 and by its frequency, target late, 2 folds,
// written beside the postcode and the target.
func parcelSpec() pipeline.Spec {
	sp := pipeline.DefaultSpec()
	sp.Target, sp.Columns, sp.Folds = "late", []string{"dest_postcode"}, 2
	sp.Encodings, _ = method.ParsePlan("target:m=1+freq")
	sp.KeepAll, sp.Keep = false, []string{"dest_postcode", "late"}
	return sp
}

// printer is a table.Writer that prints each row, floats to 4 decimals.
type printer struct{}

func (printer) Write(b *table.Batch) error {
	for i := 0; i < b.Rows; i++ {
		var row []string
		for j := range b.Cols {
			c := &b.Cols[j]
			if c.Form == table.FormFloat64 {
				row = append(row, strconv.FormatFloat(c.Floats[i], 'f', 4, 64))
				continue
			}
			row = append(row, string(c.AppendText(nil, i)))
		}
		fmt.Println(strings.Join(row, " "))
	}
	return nil
}

func (printer) Close() error { return nil }

// Fit gathers the statistics of the postcode column, and Encode writes the
// training table back with each row encoded from the other fold's rows.
// With the fold rule ordered and 2 folds the six rows are cut in file
// order: rows 0-2 are fold 0 and rows 3-5 fold 1 (floor(row*2/6)).
//
// The values, by hand, with the m-estimate (s + m p)/(n + m), m = 1:
// fold 0's rows are encoded from rows 3-5, whose prior is p = 1/3 and
// where 10115 has s = 0 of n = 1 late and 80331 s = 1 of n = 1, so 10115
// gets (0 + 1/3)/2 = 0.1667 and 80331 (1 + 1/3)/2 = 0.6667. Fold 1's rows
// are encoded from rows 0-2, p = 2/3, where 10115 has s = 2 of n = 2 and
// 80331 s = 0 of n = 1: 10115 gets (2 + 2/3)/3 = 0.8889, 80331
// (0 + 2/3)/2 = 0.3333, and 20095, not among them, the prior 0.6667. The
// frequency is the level's rows in the whole table: 3, 2 and 1.
func ExampleFit() {
	sp := parcelSpec()
	sp.FoldColumn = "fold"
	sp.FoldBy, _ = folds.ParseRule("ordered")
	m, err := pipeline.Fit(parcelTable(parcels), sp, pipeline.FitOptions{File: "parcels", TotalRows: 6})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("rows", m.Rows, "classes", m.Classes, "columns", m.OutputNames())
	if _, err := m.Encode(parcelTable(parcels), printer{}, pipeline.EncodeOptions{File: "parcels"}); err != nil {
		fmt.Println(err)
	}
	// Output:
	// rows 6 classes [0 1] columns [dest_postcode_tmean dest_postcode_freq]
	// 10115 1 0.1667 3 0
	// 80331 0 0.6667 2 0
	// 10115 1 0.1667 3 0
	// 10115 0 0.8889 3 1
	// 80331 1 0.3333 2 1
	// 20095 0 0.6667 1 1
}

// SaveTables writes the fitted model as mapping tables, LoadTables reads
// them back, and Encode with Use NewRows encodes new shipments with the
// values fitted on every training row (apply). The mapping tables do not
// record which columns a run kept, so apply writes every input column
// before the encoded ones.
//
// By hand, over all six rows: the prior is p = 3/6 = 0.5; 10115 has s = 2
// late of n = 3, so (2 + 0.5)/(3 + 1) = 0.625; 80331 s = 1 of n = 2,
// (1 + 0.5)/3 = 0.5; 20095 s = 0 of n = 1, (0 + 0.5)/2 = 0.25; 99999,
// never seen, gets the prior 0.5 and frequency 0.
func ExampleLoadTables() {
	dir, err := os.MkdirTemp("", "parcels")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)
	tables := filepath.Join(dir, "tables")

	m, err := pipeline.Fit(parcelTable(parcels), parcelSpec(), pipeline.FitOptions{File: "parcels", Tables: true})
	if err == nil {
		err = m.SaveTables(tables)
	}
	if err != nil {
		fmt.Println(err)
		return
	}
	loaded, err := pipeline.LoadTables(tables)
	if err != nil {
		fmt.Println(err)
		return
	}
	arrivals := [][]string{
		{"10115", "ACC-7", "R3", "0"},
		{"80331", "ACC-1", "R1", "0"},
		{"20095", "ACC-2", "R2", "0"},
		{"99999", "ACC-9", "R9", "0"},
	}
	sum, err := loaded.Encode(parcelTable(arrivals), printer{}, pipeline.EncodeOptions{File: "arrivals", Use: pipeline.NewRows})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("unseen", sum.Unseen)
	// Output:
	// 10115 ACC-7 R3 0 0.6250 3
	// 80331 ACC-1 R1 0 0.5000 2
	// 20095 ACC-2 R2 0 0.2500 1
	// 99999 ACC-9 R9 0 0.5000 0
	// unseen [1]
}

// Merge combines the mapping tables of two halves of the table, fitted on
// their own, into the tables of the whole: the counts add up, and every
// value is derived again from the sums, so the merged tables encode as the
// tables of ExampleLoadTables do (0.625, 0.5, 0.25 and the prior 0.5,
// worked out there).
func ExampleMerge() {
	dir, err := os.MkdirTemp("", "parcels")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)

	var halves []*pipeline.Model
	var names []string
	for i, rows := range [][][]string{parcels[:3], parcels[3:]} {
		name := filepath.Join(dir, fmt.Sprintf("half%d", i+1))
		m, err := pipeline.Fit(parcelTable(rows), parcelSpec(), pipeline.FitOptions{File: name, Tables: true})
		if err == nil {
			err = m.SaveTables(name)
		}
		if err == nil {
			m, err = pipeline.LoadTables(name)
		}
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Println("half", i+1, "rows", m.Rows)
		halves, names = append(halves, m), append(names, name)
	}
	merged, err := pipeline.Merge(halves, names, 0)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("merged rows", merged.Rows)
	arrivals := [][]string{
		{"10115", "ACC-7", "R3", "1"},
		{"80331", "ACC-1", "R1", "1"},
		{"20095", "ACC-2", "R2", "1"},
		{"99999", "ACC-9", "R9", "1"},
	}
	if _, err := merged.Encode(parcelTable(arrivals), printer{}, pipeline.EncodeOptions{File: "arrivals", Use: pipeline.NewRows}); err != nil {
		fmt.Println(err)
	}
	// Output:
	// half 1 rows 3
	// half 2 rows 3
	// merged rows 6
	// 10115 ACC-7 R3 1 0.6250 3
	// 80331 ACC-1 R1 1 0.5000 2
	// 20095 ACC-2 R2 1 0.2500 1
	// 99999 ACC-9 R9 1 0.5000 0
}
