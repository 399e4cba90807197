package method_test

import (
	"encoding/csv"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/io/tableio"
)

// job is one run of the whole job through the pipeline, as encode, apply
// and merge run it, for the methods' tests: the training table encoded
// with its fold column, the same table applied with the saved and loaded
// mapping tables, the tables of two halves of it merged, and the first
// half's tables applied to the whole.
type job struct {
	header []string   // the training table's header
	rows   [][]string // its rows
	train  csvTable   // the training pass's output
	apply  csvTable   // apply of the loaded tables to the training table
	merged csvTable   // apply of the tables merged from the two halves
	half   csvTable   // apply of the first half's tables to the whole table (the second half's new levels unseen)
}

// csvTable is a CSV file read back: the header and the rows.
type csvTable struct {
	header []string
	rows   [][]string
}

// col returns the index of column name, failing the test if it is absent.
func (c csvTable) col(t *testing.T, name string) int {
	t.Helper()
	for i, h := range c.header {
		if h == name {
			return i
		}
	}
	t.Fatalf("no column %q in %v", name, c.header)
	return -1
}

// float returns the value of column name in row i.
func (c csvTable) float(t *testing.T, i int, name string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(c.rows[i][c.col(t, name)], 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// runJob writes header and rows as a CSV file, encodes the columns with
// methods (the grammar) and scheme, target late and 5 folds by rows, and
// returns what every step wrote.
func runJob(t *testing.T, header []string, rows [][]string, columns []string, methods, scheme string) job {
	t.Helper()
	dir := t.TempDir()
	write := func(name string, rows [][]string) string {
		p := filepath.Join(dir, name)
		f, err := os.Create(p)
		if err != nil {
			t.Fatal(err)
		}
		w := csv.NewWriter(f)
		w.Write(header)
		w.WriteAll(rows)
		if err := f.Close(); err != nil {
			t.Fatal(err)
		}
		return p
	}
	spec := func() pipeline.Spec {
		sp := pipeline.DefaultSpec()
		sp.Target, sp.Columns, sp.Folds, sp.FoldColumn = "late", columns, 5, "fold"
		var err error
		if sp.Encodings, err = method.ParsePlan(methods); err != nil {
			t.Fatal(err)
		}
		var ok bool
		if sp.Scheme, ok = method.ParseScheme(scheme); !ok {
			t.Fatalf("scheme %q", scheme)
		}
		sp.FoldBy = folds.RowsRule{}
		return sp
	}
	fit := func(in string) *pipeline.Model {
		r, err := tableio.Open(in, tableio.ReadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		m, err := pipeline.Fit(r, spec(), pipeline.FitOptions{File: in, Tables: true})
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	encode := func(m *pipeline.Model, in, out string, use pipeline.Use) csvTable {
		r, err := tableio.Open(in, tableio.ReadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		schema, _, _, err := m.OutputSchema(in, r.Schema(), use)
		if err != nil {
			t.Fatal(err)
		}
		w, err := tableio.Create(out, schema, tableio.WriteOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := m.Encode(r, w, pipeline.EncodeOptions{File: in, Use: use}); err != nil {
			w.Abort()
			t.Fatal(err)
		}
		if err := w.Commit(); err != nil {
			t.Fatal(err)
		}
		return readCSV(t, out)
	}
	save := func(m *pipeline.Model, name string) *pipeline.Model {
		tables := filepath.Join(dir, name)
		if err := m.SaveTables(tables); err != nil {
			t.Fatal(err)
		}
		l, err := pipeline.LoadTables(tables)
		if err != nil {
			t.Fatal(err)
		}
		return l
	}
	in := write("train.csv", rows)
	m := fit(in)
	j := job{header: header, rows: rows}
	j.train = encode(m, in, filepath.Join(dir, "train_out.csv"), pipeline.Training)
	j.apply = encode(save(m, "tables"), in, filepath.Join(dir, "apply_out.csv"), pipeline.NewRows)
	half := len(rows) / 2
	a := save(fit(write("a.csv", rows[:half])), "ta")
	b := save(fit(write("b.csv", rows[half:])), "tb")
	j.half = encode(a, in, filepath.Join(dir, "half_out.csv"), pipeline.NewRows)
	merged, err := pipeline.Merge([]*pipeline.Model{a, b}, []string{"ta", "tb"}, 0)
	if err != nil {
		t.Fatal(err)
	}
	j.merged = encode(save(merged, "tm"), in, filepath.Join(dir, "merged_out.csv"), pipeline.NewRows)
	return j
}

func readCSV(t *testing.T, path string) csvTable {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	all, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return csvTable{header: all[0], rows: all[1:]}
}
