package method_test

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// TestOneHotAgreesWithTopK: in every output (training pass, apply of the
// loaded tables, apply of tables merged from two halves, one half's tables
// applied to the whole), column <col>_onehot_r is 1 exactly where topk
// gives code r, and a level without a code is all zeros; there are as many
// columns as codes, fewer than K when the column has fewer levels.
func TestOneHotAgreesWithTopK(t *testing.T) {
	header := []string{"pc", "route", "late"}
	var rows [][]string
	for i := 0; i < 2000; i++ {
		// Level i%37 of pc, skewed so that the ranking has ties and a tail;
		// route has 3 levels.
		pc := fmt.Sprintf("P%02d", (i*i+3*i)%37)
		if i%53 == 0 {
			pc = ""
		}
		rows = append(rows, []string{pc, fmt.Sprintf("R%d", i%3), strconv.Itoa(i % 2)})
	}
	j := runJob(t, header, rows, []string{"pc", "route"}, "topk:10:min=2+onehot:10:min=2", "kfold")
	for name, out := range map[string]csvTable{"train": j.train, "apply": j.apply, "merged": j.merged, "half": j.half} {
		for _, c := range []struct {
			col   string
			codes int
		}{{"pc", 10}, {"route", 3}} {
			n := 0
			for _, h := range out.header {
				if len(h) > len(c.col)+8 && h[:len(c.col)+8] == c.col+"_onehot_" {
					n++
				}
			}
			if n != c.codes {
				t.Fatalf("%s: %d one-hot columns of %s, want %d", name, n, c.col, c.codes)
			}
			others := 0
			for i := range out.rows {
				code := int(out.float(t, i, c.col+"_topk"))
				if code == 0 {
					others++
				}
				for r := 1; r <= n; r++ {
					want := 0.0
					if code == r {
						want = 1
					}
					if got := out.float(t, i, fmt.Sprintf("%s_onehot_%d", c.col, r)); got != want {
						t.Fatalf("%s, row %d: %s_onehot_%d is %v, topk code %d", name, i, c.col, r, got, code)
					}
				}
			}
			if c.col == "pc" && others == 0 {
				t.Fatalf("%s: no row of the other level in pc: the all-zeros case went unchecked", name)
			}
		}
	}
}

// TestOneHotParquetIsCompact: one-hot columns written to Parquet take less
// than a bit a value (two values per column: a dictionary, then runs of
// bit-packed or repeated indices), where plain 64-bit integers would take
// 64.
func TestOneHotParquetIsCompact(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "in.csv")
	f, err := os.Create(in)
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintln(f, "pc,late")
	const rows, k = 100000, 20
	x := uint64(1)
	count := map[string]int{}
	for i := 0; i < rows; i++ {
		x = x*6364136223846793005 + 1442695040888963407
		lv := fmt.Sprintf("L%d", (x>>33)%50)
		count[lv]++
		fmt.Fprintf(f, "%s,%d\n", lv, i%2)
	}
	// The rows of the top k levels: most rows first, ties by the level's
	// bytes (topk's ranking).
	var ranked []string
	for lv := range count {
		ranked = append(ranked, lv)
	}
	slices.SortFunc(ranked, func(a, b string) int {
		if count[a] != count[b] {
			return count[b] - count[a]
		}
		return strings.Compare(a, b)
	})
	inTop := 0
	for _, lv := range ranked[:k] {
		inTop += count[lv]
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	sp := pipeline.DefaultSpec()
	sp.Columns, sp.KeepAll = []string{"pc"}, false
	if sp.Encodings, err = method.ParsePlan("onehot:" + strconv.Itoa(k)); err != nil {
		t.Fatal(err)
	}
	r, err := tableio.Open(in, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	m, err := pipeline.Fit(r, sp, pipeline.FitOptions{File: in})
	r.Close()
	if err != nil {
		t.Fatal(err)
	}
	r, err = tableio.Open(in, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	schema, _, _, err := m.OutputSchema(in, r.Schema(), pipeline.NewRows)
	if err != nil {
		t.Fatal(err)
	}
	if len(schema.Fields) != k {
		t.Fatalf("%d output columns, want %d", len(schema.Fields), k)
	}
	out := filepath.Join(dir, "out.parquet")
	w, err := tableio.Create(out, schema, tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := m.Encode(r, w, pipeline.EncodeOptions{File: in, Use: pipeline.NewRows}); err != nil {
		t.Fatal(err)
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
	fi, err := os.Stat(out)
	if err != nil {
		t.Fatal(err)
	}
	bits := float64(fi.Size()*8) / (rows * k)
	t.Logf("%d bytes, %.3f bits a value", fi.Size(), bits)
	if bits >= 1 {
		t.Errorf("%.3f bits a value; want less than 1", bits)
	}
	// The values are read back as 0 and 1, at most one 1 a row, a 1 in
	// every row of a top-k level.
	rd, err := tableio.Open(out, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer rd.Close()
	ones := 0
	if err := table.ForEach(rd, func(b *table.Batch) error {
		for i := 0; i < b.Rows; i++ {
			row := 0
			for _, c := range b.Cols {
				v, _, _ := c.Float(i)
				if v != 0 && v != 1 {
					return fmt.Errorf("value %v", v)
				}
				row += int(v)
			}
			if row > 1 {
				return fmt.Errorf("row %d has %d ones", b.FirstRow+int64(i), row)
			}
			ones += row
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if ones != inTop {
		t.Errorf("%d rows with a one; the top %d levels have %d rows", ones, k, inTop)
	}
}
