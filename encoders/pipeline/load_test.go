package pipeline

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math/big"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"manyfold/io/table"
	"manyfold/io/tableio"
)

// loadCSV is the training table of the loader's tests: two text columns
// (pc with a null level), a binary, a regression and a three-class
// target.
func loadCSV() string {
	var b strings.Builder
	b.WriteString("pc,sender,late,weight,grade\n")
	for i := 0; i < 60; i++ {
		pc := fmt.Sprintf("P%d%d", i%3, i%7)
		if i%11 == 5 {
			pc = ""
		}
		fmt.Fprintf(&b, "%s,ACC-%d,%d,%d.%d,%c\n", pc, i%5, (i*7+i/3)%2, i%13, i%10, 'A'+i%3)
	}
	return b.String()
}

// fitTablesDir fits loadCSV with sp (columns pc and sender, target late
// unless sp names another) and saves its tables in a new directory.
func fitTablesDir(t testing.TB, sp Spec) string {
	t.Helper()
	dir := t.TempDir()
	in := filepath.Join(dir, "train.csv")
	if err := os.WriteFile(in, []byte(loadCSV()), 0o644); err != nil {
		t.Fatal(err)
	}
	if sp.Target == "" {
		sp.Target = "late"
	}
	if sp.Columns == nil {
		sp.Columns = []string{"pc", "sender"}
	}
	r, err := tableio.Open(in, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	m, err := Fit(r, sp, FitOptions{File: in, Tables: true})
	if err != nil {
		t.Fatal(err)
	}
	tables := filepath.Join(dir, "tables")
	if err := m.SaveTables(tables); err != nil {
		t.Fatal(err)
	}
	return tables
}

// loadPlan is the encodings of the loader's tests: every method, so that
// columns[i].encodings[0] is target, [1] freq, [2] topk and [3] hash.
const loadPlan = "target:eb+freq+topk+hash"

// loadSpec is the default job of the loader's tests: every method, two
// folds.
func loadSpec(tb testing.TB) Spec { return planSpec(tb, loadPlan) }

// planSpec is the job of the loader's tests with the encodings plan.
func planSpec(tb testing.TB, plan string) Spec {
	sp := DefaultSpec()
	sp.Encodings = mustPlan(tb, plan)
	sp.Folds = 2
	return sp
}

// readJSON reads the manifest of dir as generic JSON, numbers kept as
// their text.
func readJSON(t *testing.T, dir string) map[string]any {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, ManifestName))
	if err != nil {
		t.Fatal(err)
	}
	d := json.NewDecoder(bytes.NewReader(b))
	d.UseNumber()
	var m map[string]any
	if err := d.Decode(&m); err != nil {
		t.Fatal(err)
	}
	return m
}

func writeJSON(t *testing.T, dir string, m map[string]any) {
	t.Helper()
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, ManifestName), b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// edit rewrites the manifest of dir with f.
func edit(f func(m map[string]any)) func(t *testing.T, dir string) {
	return func(t *testing.T, dir string) {
		m := readJSON(t, dir)
		f(m)
		writeJSON(t, dir, m)
	}
}

func params(m map[string]any) map[string]any { return m["params"].(map[string]any) }

func column(m map[string]any, i int) map[string]any {
	return m["columns"].([]any)[i].(map[string]any)
}

// setParam sets a parameter of the manifest.
func setParam(key string, v any) func(t *testing.T, dir string) {
	return edit(func(m map[string]any) { params(m)[key] = v })
}

// setCol sets a field of the first column's entry (nil deletes it).
func setCol(key string, v any) func(t *testing.T, dir string) {
	return edit(func(m map[string]any) {
		if v == nil {
			delete(column(m, 0), key)
		} else {
			column(m, 0)[key] = v
		}
	})
}

// encoding returns the entry of the first column's encoding e.
func encoding(m map[string]any, e int) map[string]any {
	return column(m, 0)["encodings"].([]any)[e].(map[string]any)
}

// setEnc sets the text of the first column's encoding e.
func setEnc(e int, text string) func(t *testing.T, dir string) {
	return edit(func(m map[string]any) { encoding(m, e)["encoding"] = text })
}

// setFit sets a field of the fit of the first column's encoding e (nil
// deletes it).
func setFit(e int, key string, v any) func(t *testing.T, dir string) {
	return edit(func(m map[string]any) {
		fit, _ := encoding(m, e)["fit"].(map[string]any)
		if fit == nil {
			fit = map[string]any{}
			encoding(m, e)["fit"] = fit
		}
		if v == nil {
			delete(fit, key)
		} else {
			fit[key] = v
		}
	})
}

// replaceTable writes data as the first column's table and records its
// checksum in the manifest, as a consistent but wrong directory would.
func replaceTable(data func(t *testing.T, path string)) func(t *testing.T, dir string) {
	return func(t *testing.T, dir string) {
		m := readJSON(t, dir)
		path := filepath.Join(dir, column(m, 0)["table"].(string))
		data(t, path)
		sum, err := fileChecksum(path)
		if err != nil {
			t.Fatal(err)
		}
		column(m, 0)["table_xxh64"] = sum
		writeJSON(t, dir, m)
	}
}

// parquetTable writes a one-row Parquet table of the given columns; the
// values are the zero value of each kind, the level "A".
func parquetTable(fields ...table.Field) func(t *testing.T, path string) {
	return func(t *testing.T, path string) {
		t.Helper()
		os.Remove(path)
		s := &table.Schema{Fields: fields}
		out, err := tableio.Create(path, s, tableio.WriteOptions{Format: tableio.Parquet})
		if err != nil {
			t.Fatal(err)
		}
		b := &table.Batch{Rows: 1, Cols: make([]table.Column, len(fields))}
		for i, f := range fields {
			switch f.Kind {
			case table.String:
				b.Cols[i] = table.Column{Form: table.FormText, Data: []byte("A"), Offsets: []int32{0, 1}}
			case table.Int64:
				b.Cols[i] = table.Column{Form: table.FormInt64, Ints: []int64{1}}
			case table.Float64:
				b.Cols[i] = table.Column{Form: table.FormFloat64, Floats: []float64{0.5}}
			case table.Bool:
				b.Cols[i] = table.Column{Form: table.FormBool, Bools: []bool{true}}
			}
		}
		if err := out.Write(b); err != nil {
			t.Fatal(err)
		}
		if err := out.Commit(); err != nil {
			t.Fatal(err)
		}
	}
}

// rewriteTable reads the first column's table, lets f change its batches,
// and writes it back (with its checksum in the manifest).
func rewriteTable(f func(b *table.Batch)) func(t *testing.T, dir string) {
	return rewriteTableSchema(nil, f)
}

// rewriteTableSchema is rewriteTable that may change the schema too (fs,
// nil: none) before the batches are written.
func rewriteTableSchema(fs func(s *table.Schema), f func(b *table.Batch)) func(t *testing.T, dir string) {
	return replaceTable(func(t *testing.T, path string) {
		t.Helper()
		r, err := tableio.Open(path, tableio.ReadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		s := *r.Schema()
		var batches []*table.Batch
		if err := table.ForEach(r, func(b *table.Batch) error {
			c := &table.Batch{Rows: b.Rows, Cols: make([]table.Column, len(b.Cols))}
			for i, col := range b.Cols {
				c.Cols[i] = col
				c.Cols[i].Nulls = append([]bool(nil), col.Nulls...)
				c.Cols[i].Data = append([]byte(nil), col.Data...)
				c.Cols[i].Offsets = append([]int32(nil), col.Offsets...)
				c.Cols[i].Ints = append([]int64(nil), col.Ints...)
				c.Cols[i].Floats = append([]float64(nil), col.Floats...)
				if col.Form == table.FormDict {
					c.Cols[i] = table.Column{Form: table.FormText, Nulls: c.Cols[i].Nulls, Offsets: []int32{0}}
					for j := 0; j < b.Rows; j++ {
						c.Cols[i].Data = append(c.Cols[i].Data, col.Bytes(j)...)
						c.Cols[i].Offsets = append(c.Cols[i].Offsets, int32(len(c.Cols[i].Data)))
					}
				}
			}
			batches = append(batches, c)
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		r.Close()
		for _, b := range batches {
			f(b)
		}
		if fs != nil {
			fs(&s)
		}
		os.Remove(path)
		out, err := tableio.Create(path, &s, tableio.WriteOptions{Format: tableio.Parquet})
		if err != nil {
			t.Fatal(err)
		}
		for _, b := range batches {
			if err := out.Write(b); err != nil {
				t.Fatal(err)
			}
		}
		if err := out.Commit(); err != nil {
			t.Fatal(err)
		}
	})
}

// setText sets row i of a text column of rows rows to v.
func setText(c *table.Column, rows, i int, v string) {
	vals := make([]string, rows)
	for j := range vals {
		vals[j] = string(c.Bytes(j))
	}
	vals[i] = v
	c.Data, c.Offsets = c.Data[:0], []int32{0}
	for _, x := range vals {
		c.Data = append(c.Data, x...)
		c.Offsets = append(c.Offsets, int32(len(c.Data)))
	}
}

// loadOrPanic runs LoadTables, turning a panic into an error, and gives
// up after a minute (a FIFO once made it wait for ever).
func loadOrPanic(dir string) error {
	done := make(chan error, 1)
	go func() {
		defer func() {
			if p := recover(); p != nil {
				done <- fmt.Errorf("panic: %v", p)
			}
		}()
		_, err := LoadTables(dir)
		done <- err
	}()
	select {
	case err := <-done:
		return err
	case <-time.After(time.Minute):
		return errors.New("LoadTables did not return within a minute")
	}
}

type loadCase struct {
	name    string
	spec    func(testing.TB) Spec // nil: loadSpec
	corrupt func(t *testing.T, dir string)
	want    []string // in the message
}

func runLoadCases(t *testing.T, cases []loadCase) {
	t.Helper()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			spec := loadSpec
			if c.spec != nil {
				spec = c.spec
			}
			dir := fitTablesDir(t, spec(t))
			if _, err := LoadTables(dir); err != nil {
				t.Fatalf("the tables as fitted do not load: %v", err)
			}
			c.corrupt(t, dir)
			err := loadOrPanic(dir)
			var me *ManifestError
			if !errors.As(err, &me) {
				t.Fatalf("want a ManifestError, got %T %v", err, err)
			}
			msg := err.Error()
			t.Log(msg)
			if strings.Contains(msg, "\n") {
				t.Errorf("message of several lines: %q", msg)
			}
			for _, w := range c.want {
				if !strings.Contains(msg, w) {
					t.Errorf("message %q does not name %q", msg, w)
				}
			}
		})
	}
}

// TestLoadDamagedManifest corrupts one field of the manifest of a fitted
// tables directory per case: each must give a ManifestError naming the
// field, never a panic or a model that answers wrongly.
func TestLoadDamagedManifest(t *testing.T) {
	prefix := func(tb testing.TB) Spec { return planSpec(tb, "target:eb:prior=prefix2+freq+topk+hash") }
	multi := func(tb testing.TB) Spec { sp := loadSpec(tb); sp.Target = "grade"; return sp }
	regression := func(tb testing.TB) Spec { sp := loadSpec(tb); sp.Target = "weight"; sp.Task = "regression"; return sp }
	const fit = "columns[0].encodings[0].fit"
	cases := []loadCase{
		{"prior missing", nil, setFit(0, "prior", nil), []string{fit + ": prior is missing"}},
		{"prior empty", nil, setFit(0, "prior", []any{}), []string{fit + ": prior has 0 values"}},
		{"prior null", nil, setFit(0, "prior", []any{nil}), []string{fit, "prior[0]"}},
		{"prior out of range", nil, setFit(0, "prior", []any{1.5}), []string{fit, "prior[0]"}},
		{"prior another rate", nil, setFit(0, "prior", []any{0.123}), []string{"01-pc.parquet", "the manifest's prior, m"}},
		{"m another weight", nil, setFit(0, "m", []any{0.5}), []string{"01-pc.parquet", "the manifest's prior, m"}},
		{"smoothing other", nil, setEnc(0, "target:m=50"), []string{fit, "m[0]", "m=50"}},
		{"smoothing a blend", nil, setEnc(0, "target:blend=2,1"), []string{fit, "m[0]", "blend"}},
		{"regression prior other", regression, setFit(0, "prior", []any{40}), []string{"01-pc.parquet", "the manifest's prior, m"}},
		{"m missing", nil, setFit(0, "m", nil), []string{fit + ": m is missing"}},
		{"m empty", nil, setFit(0, "m", []any{}), []string{fit + ": m has 0 values"}},
		{"m negative", nil, setFit(0, "m", []any{-2}), []string{fit, "m[0]"}},
		{"m of a column that has no target", func(tb testing.TB) Spec { return planSpec(tb, "freq") },
			setFit(0, "m", []any{3}), []string{fit, `unknown field "m"`}},
		{"unknown field in a fit", nil, setFit(0, "prior_weight", []any{1}), []string{fit, `unknown field "prior_weight"`}},
		{"fit missing", nil, edit(func(m map[string]any) { delete(encoding(m, 0), "fit") }), []string{fit + ": prior is missing"}},
		{"fit of a hash missing", nil, edit(func(m map[string]any) { delete(encoding(m, 3), "fit") }), []string{"columns[0].encodings[3].fit", "expected_occupied"}},
		{"buckets 0", nil, setEnc(3, "hash:0"), []string{"columns[0].encodings[3]", "hash:0"}},
		{"buckets other", nil, setEnc(3, "hash:77"), []string{"bucket", "01-pc.parquet"}},
		{"hash seed other", nil, setEnc(3, "hash:1024:seed=9"), []string{"bucket", "01-pc.parquet"}},
		{"unknown method", nil, setEnc(1, "shrink"), []string{"columns[0].encodings[1]", `unknown method "shrink"`, "target, freq, topk, hash"}},
		{"unknown target parameter", nil, setEnc(0, "target:woe"), []string{"columns[0].encodings[0]", `unknown parameter "woe"`}},
		{"no encodings", nil, setCol("encodings", []any{}), []string{"columns[0].encodings is empty"}},
		{"encodings missing", nil, setCol("encodings", nil), []string{"columns[0].encodings is missing"}},
		{"encoding text missing", nil, edit(func(m map[string]any) { delete(encoding(m, 1), "encoding") }), []string{"columns[0].encodings[1].encoding"}},
		{"encoding twice", nil, edit(func(m map[string]any) {
			c := column(m, 0)
			c["encodings"] = append(c["encodings"].([]any), encoding(m, 1))
		}), []string{"manifest.json", "columns[0].encodings", "freq twice"}},
		{"encoding not canonical", nil, setEnc(0, "target"), []string{"columns[0].encodings[0]", `"target" is not written`, "target:eb"}},
		{"bogus column type", nil, setCol("type", "blob"), []string{"columns[0].type", "blob"}},
		{"column type other than the input's", nil, setCol("type", "int"), []string{"columns[0].type"}},
		{"bogus input type", nil, edit(func(m map[string]any) { m["input"].([]any)[0].(map[string]any)["type"] = "blob" }), []string{"input[0].type", "blob"}},
		{"column not in the input", nil, setCol("name", "zip"), []string{"zip", "input"}},
		{"bogus task", nil, edit(func(m map[string]any) { m["task"] = "ranking" }), []string{"task", "ranking"}},
		{"task without target", nil, edit(func(m map[string]any) { delete(m, "target") }), []string{"target"}},
		{"binary with three classes", nil, edit(func(m map[string]any) { m["classes"] = []any{"0", "1", "2"} }), []string{"classes"}},
		{"class twice", multi, edit(func(m map[string]any) { c := m["classes"].([]any); c[1] = c[0] }), []string{"classes", "twice"}},
		{"classes of a regression", regression, edit(func(m map[string]any) { m["classes"] = []any{"0", "1"} }), []string{"classes"}},
		{"bogus nulls", nil, setParam("nulls", "skip"), []string{"params.nulls", "skip"}},
		{"bogus freq", nil, setEnc(1, "freq:x"), []string{"columns[0].encodings[1]", "freq:x"}},
		{"bogus output", nil, setEnc(0, "target:eb:probit"), []string{"columns[0].encodings[0]", "probit"}},
		{"log-odds of a regression", regression, setEnc(0, "target:eb:logodds"), []string{"columns[0].encodings[0]", "log-odds"}},
		{"bogus scheme", nil, setParam("scheme", "bootstrap"), []string{"scheme", "bootstrap"}},
		{"bogus smoothing", nil, setEnc(0, "target:m=-3"), []string{"columns[0].encodings[0]", "m=-3"}},
		{"top_k 0", nil, setEnc(2, "topk:0"), []string{"columns[0].encodings[2]", "topk:0"}},
		{"top_k negative", nil, setEnc(2, "topk:-5"), []string{"columns[0].encodings[2]", "topk:-5"}},
		{"top_k below the codes stored", nil, setEnc(2, "topk:1"), []string{"topk", "01-pc.parquet"}},
		{"top_k a text", nil, setEnc(2, "topk:ten"), []string{"columns[0].encodings[2]", "ten"}},
		{"params.smoothing, a field of format 2", nil, setParam("smoothing", "auto"), []string{ManifestName, `unknown field "smoothing"`}},
		{"unknown field", nil, edit(func(m map[string]any) { column(m, 0)["prior_weight"] = 1 }), []string{"prior_weight"}},
		{"format 2", nil, edit(func(m map[string]any) { m["format"] = 2 }), []string{"format version 2", "refit them"}},
		{"rows 0", nil, edit(func(m map[string]any) { m["rows"] = 0 }), []string{ManifestName, "rows is 0"}},
		{"rows fewer than the tables hold", nil, edit(func(m map[string]any) { m["rows"] = 5 }), []string{"rows", "01-pc.parquet"}},
		{"levels stored other", nil, setCol("levels_stored", 3), []string{"levels_stored", "01-pc.parquet"}},
		{"levels stored above levels", nil, setCol("levels_stored", 1000), []string{"columns[0].levels_stored"}},
		{"no columns", nil, edit(func(m map[string]any) { m["columns"] = []any{} }), []string{ManifestName, "no columns"}},
		{"column twice", nil, edit(func(m map[string]any) { c := m["columns"].([]any); c[1] = c[0] }), []string{ManifestName, `"pc" is named twice`}},
		{"not JSON", nil, func(t *testing.T, dir string) {
			os.WriteFile(filepath.Join(dir, ManifestName), []byte("{\"format\": 3,"), 0o644)
		}, []string{ManifestName}},
		{"trailing bytes", nil, func(t *testing.T, dir string) {
			b, _ := os.ReadFile(filepath.Join(dir, ManifestName))
			os.WriteFile(filepath.Join(dir, ManifestName), append(b, "{}"...), 0o644)
		}, []string{ManifestName}},
		{"parent table missing from the manifest", prefix, setCol("parent_table", nil), []string{"columns[0].parent_table"}},
		{"parent prior missing", prefix, setFit(0, "parent_prior", nil), []string{fit + ": parent_prior"}},
		{"parent m missing", prefix, setFit(0, "parent_m", nil), []string{fit + ": parent_m"}},
		{"parent prior without a prior", nil, setFit(0, "parent_prior", []any{0.5}), []string{fit + ": parent_prior"}},
		{"parent table without a prior", nil, setCol("parent_table", "01-pc.parents.parquet"), []string{"columns[0].parent_table"}},
		{"prior prefix negative", nil, setEnc(0, "target:eb:prior=prefix-1"), []string{"columns[0].encodings[0]", "prefix-1"}},
		{"prior column not in the input", nil, setEnc(0, "target:eb:prior=column:region"), []string{ManifestName, `"region" is not among the input columns`}},
	}
	runLoadCases(t, cases)
}

// TestLoadDamagedTables damages or replaces a table file per case.
// finer returns the exact sum written as text plus 2^-1100: the same
// rounded value, with a bit no sum of float64 values has (the text form is
// 0x<odd hex integer>p<exponent>).
func finer(t *testing.T, text string) string {
	hex, exp, ok := strings.Cut(strings.TrimPrefix(text, "0x"), "p")
	m, ok2 := new(big.Int).SetString(hex, 16)
	e, err := strconv.Atoi(exp)
	if !ok || !ok2 || err != nil || e < -1100 {
		t.Fatalf("exact sum %q: not the form expected", text)
	}
	m.Lsh(m, uint(e+1100))
	m.Add(m, big.NewInt(1))
	return fmt.Sprintf("0x%xp-1100", m)
}

func TestLoadDamagedTables(t *testing.T) {
	target := func(dir string) string { return filepath.Join(dir, "01-pc.parquet") }
	cases := []loadCase{
		{"table missing", nil, func(t *testing.T, dir string) { os.Remove(target(dir)) }, []string{"01-pc.parquet"}},
		{"table changed", nil, func(t *testing.T, dir string) {
			b, _ := os.ReadFile(target(dir))
			b[len(b)/2] ^= 1
			os.WriteFile(target(dir), b, 0o644)
		}, []string{"01-pc.parquet", "checksum"}},
		{"tables swapped", nil, func(t *testing.T, dir string) {
			a, b := target(dir), filepath.Join(dir, "02-sender.parquet")
			os.Rename(a, a+".x")
			os.Rename(b, a)
			os.Rename(a+".x", b)
		}, []string{"parquet", "checksum"}},
		{"table entries swapped", nil, edit(func(m map[string]any) {
			a, b := column(m, 0), column(m, 1)
			a["table"], b["table"] = b["table"], a["table"]
			a["table_xxh64"], b["table_xxh64"] = b["table_xxh64"], a["table_xxh64"]
		}), []string{"columns[0].table", "02-sender.parquet"}},
		{"checksum missing", nil, setCol("table_xxh64", nil), []string{"columns[0].table_xxh64"}},
		{"checksum bogus", nil, setCol("table_xxh64", "xyz"), []string{"columns[0].table_xxh64"}},
		{"table a CSV", nil, replaceTable(func(t *testing.T, path string) {
			os.WriteFile(path, []byte("level,rows\nA,1\n"), 0o644)
		}), []string{"01-pc.parquet", "Parquet"}},
		{"table of other types", nil, replaceTable(parquetTable(
			table.Field{Name: "level", Kind: table.Int64}, table.Field{Name: "rows", Kind: table.String},
			table.Field{Name: "target_rows", Kind: table.Float64}, table.Field{Name: "count_0", Kind: table.Float64},
			table.Field{Name: "count_1", Kind: table.Bool}, table.Field{Name: "tmean", Kind: table.Int64},
			table.Field{Name: "freq", Kind: table.String}, table.Field{Name: "topk", Kind: table.Float64},
			table.Field{Name: "bucket", Kind: table.Float64})), []string{"01-pc.parquet", "level"}},
		{"table of other names", nil, replaceTable(parquetTable(table.Field{Name: "level", Kind: table.String}, table.Field{Name: "n", Kind: table.Int64})),
			[]string{"01-pc.parquet", "columns"}},
		{"level twice", nil, rewriteTable(func(b *table.Batch) { setText(&b.Cols[0], b.Rows, 2, string(b.Cols[0].Bytes(1))) }),
			[]string{"01-pc.parquet", "twice"}},
		{"negative rows", nil, rewriteTable(func(b *table.Batch) { b.Cols[1].Ints[1] = -4 }), []string{"01-pc.parquet", "rows"}},
		{"counts above the rows", nil, rewriteTable(func(b *table.Batch) { b.Cols[3].Ints[1] += 100 }), []string{"01-pc.parquet"}},
		{"tmean not a rate", nil, rewriteTable(func(b *table.Batch) { b.Cols[5].Floats[1] = 7 }), []string{"01-pc.parquet", "tmean"}},
		{"freq negative", nil, rewriteTable(func(b *table.Batch) { b.Cols[6].Floats[1] = -1 }), []string{"01-pc.parquet", "freq"}},
		// A regression target's table: level, rows, target_rows, target_sum,
		// target_sumsq, target_sum_exact, target_sumsq_exact, ...
		{"exact sum not the rounded one", regressionSpec, rewriteTable(func(b *table.Batch) { setText(&b.Cols[5], b.Rows, 1, "0x1p-20") }),
			[]string{"01-pc.parquet", "row 2", "target_sum_exact"}},
		{"exact sum not canonical", regressionSpec, rewriteTable(func(b *table.Batch) { setText(&b.Cols[6], b.Rows, 1, "0x2p0") }),
			[]string{"01-pc.parquet", "row 2", "target_sumsq_exact", "0x2p0"}},
		{"exact sum finer than float64 sums", regressionSpec, rewriteTable(func(b *table.Batch) { setText(&b.Cols[5], b.Rows, 1, finer(t, string(b.Cols[5].Bytes(1)))) }),
			[]string{"01-pc.parquet", "row 2", "finer"}},
		{"exact sum too long", regressionSpec, rewriteTable(func(b *table.Batch) { setText(&b.Cols[5], b.Rows, 1, "0x"+strings.Repeat("f", 5000)+"p0") }),
			[]string{"01-pc.parquet", "target_sum_exact"}},
		{"parent path", nil, setCol("table", "../01-pc.parquet"), []string{"columns[0].table", "plain file name"}},
		{"absolute path", nil, func(t *testing.T, dir string) {
			edit(func(m map[string]any) { column(m, 0)["table"] = target(dir) })(t, dir)
		}, []string{"columns[0].table", "plain file name"}},
		{"symbolic link", nil, func(t *testing.T, dir string) {
			other := filepath.Join(t.TempDir(), "elsewhere.parquet")
			os.Rename(target(dir), other)
			if err := os.Symlink(other, target(dir)); err != nil {
				t.Skip(err)
			}
		}, []string{"01-pc.parquet", "not a regular file"}},
		{"FIFO", nil, func(t *testing.T, dir string) {
			os.Remove(target(dir))
			if err := syscall.Mkfifo(target(dir), 0o644); err != nil {
				t.Skip(err)
			}
		}, []string{"01-pc.parquet", "not a regular file"}},
		{"directory", nil, func(t *testing.T, dir string) {
			os.Remove(target(dir))
			os.Mkdir(target(dir), 0o755)
		}, []string{"01-pc.parquet", "not a regular file"}},
		{"manifest a FIFO", nil, func(t *testing.T, dir string) {
			os.Remove(filepath.Join(dir, ManifestName))
			if err := syscall.Mkfifo(filepath.Join(dir, ManifestName), 0o644); err != nil {
				t.Skip(err)
			}
		}, []string{ManifestName, "not a regular file"}},
		{"manifest too large", nil, func(t *testing.T, dir string) {
			f, err := os.OpenFile(filepath.Join(dir, ManifestName), os.O_WRONLY, 0)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			if err := f.Truncate(maxManifestBytes + 1); err != nil {
				t.Fatal(err)
			}
		}, []string{ManifestName, "bytes"}},
	}
	runLoadCases(t, cases)
}

// regressionSpec is the loader's job with the numeric target weight.
func regressionSpec(tb testing.TB) Spec {
	sp := planSpec(tb, "target:eb+freq")
	sp.Target = "weight"
	return sp
}

// TestLoadWithoutExactSums: a regression target's tables written before
// they carried exact sums (no target_sum_exact, target_sumsq_exact) still
// load, for apply and for a merge, with their rounded sums.
func TestLoadWithoutExactSums(t *testing.T) {
	dir := fitTablesDir(t, regressionSpec(t))
	whole, err := LoadTables(dir)
	if err != nil {
		t.Fatal(err)
	}
	rewriteTableSchema(func(s *table.Schema) {
		if s.Fields[5].Name != "target_sum_exact" || s.Fields[6].Name != "target_sumsq_exact" {
			t.Fatalf("fields %v", s.Names())
		}
		s.Fields = slices.Delete(s.Fields, 5, 7)
	}, func(b *table.Batch) { b.Cols = slices.Delete(b.Cols, 5, 7) })(t, dir)
	old, _, err := LoadTablesManifest(dir)
	if err != nil {
		t.Fatalf("apply's load: %v", err)
	}
	oldExact, err := LoadTables(dir)
	if err != nil {
		t.Fatalf("merge's load: %v", err)
	}
	for l := 0; l < whole.Cols[0].St.NumLevels(); l++ {
		want := whole.Cols[0].St.Target(l, 0, -1, 0)
		for _, m := range []*Model{old, oldExact} {
			if got := m.Cols[0].St.Target(l, 0, -1, 0); got != want {
				t.Errorf("level %d: %+v, want %+v", l, got, want)
			}
		}
	}
	if _, err := Merge([]*Model{oldExact, oldExact}, []string{dir, dir}, 0); err != nil {
		t.Fatalf("merge: %v", err)
	}
}

// TestLoadParentTables checks the hierarchical prior's tables: a parent
// table swapped for the column's own, or missing.
func TestLoadParentTables(t *testing.T) {
	prefix := func(tb testing.TB) Spec { return planSpec(tb, "target:eb:prior=prefix2+freq+topk+hash") }
	cases := []loadCase{
		{"parent table missing", prefix, func(t *testing.T, dir string) { os.Remove(filepath.Join(dir, "01-pc.parents.parquet")) },
			[]string{"01-pc.parents.parquet"}},
		{"parent table is the column's", prefix, edit(func(m map[string]any) {
			c := column(m, 0)
			c["parent_table"], c["parent_table_xxh64"] = c["table"], c["table_xxh64"]
		}), []string{"columns[0].parent_table"}},
	}
	runLoadCases(t, cases)
}
