package pipeline_test

import (
	"fmt"
	"math"
	"path/filepath"
	"reflect"
	"slices"
	"sort"
	"strconv"
	"strings"
	"testing"

	"github.com/cespare/xxhash/v2"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/io/table"
)

// memTable is a table held in memory as the text of its values ("" is
// null in a text column), read through table.NewMemReader: no files.
type memTable struct {
	schema *table.Schema
	rows   [][]string
}

// col returns the values of the column named name.
func (mt memTable) col(name string) []string {
	j := mt.schema.Index(name)
	out := make([]string, len(mt.rows))
	for i, r := range mt.rows {
		out[i] = r[j]
	}
	return out
}

// batches cuts the rows into batches of size rows (the last may be
// shorter). With dict, text columns are in dictionary form (one dictionary
// per batch, entries in first-seen order) instead of text form, so that
// both of the forms a reader may deliver are read.
func (mt memTable) batches(size int, dict bool) []*table.Batch {
	var out []*table.Batch
	for at := 0; at < len(mt.rows); at += size {
		rows := mt.rows[at:min(at+size, len(mt.rows))]
		b := &table.Batch{Rows: len(rows)}
		for j, f := range mt.schema.Fields {
			b.Cols = append(b.Cols, memColumn(f.Kind, rows, j, dict, uint64(len(out)+1)))
		}
		out = append(out, b)
	}
	return out
}

// memColumn is column j of rows in the physical form of its kind.
func memColumn(kind table.Kind, rows [][]string, j int, dict bool, id uint64) table.Column {
	var c table.Column
	switch kind {
	case table.Int64:
		c.Form = table.FormInt64
		for _, r := range rows {
			v, _ := strconv.ParseInt(r[j], 10, 64)
			c.Ints = append(c.Ints, v)
		}
		return c
	case table.Float64:
		c.Form = table.FormFloat64
		for _, r := range rows {
			v, _ := strconv.ParseFloat(r[j], 64)
			c.Floats = append(c.Floats, v)
		}
		return c
	}
	c.Nulls = make([]bool, len(rows))
	if !dict {
		c.Form, c.Offsets = table.FormText, []int32{0}
		for i, r := range rows {
			c.Nulls[i] = r[j] == ""
			c.Data = append(c.Data, r[j]...)
			c.Offsets = append(c.Offsets, int32(len(c.Data)))
		}
		return c
	}
	c.Form, c.Dict = table.FormDict, &table.Dict{Offsets: []int32{0}, ID: id}
	entry := map[string]int32{}
	for i, r := range rows {
		c.Nulls[i] = r[j] == ""
		e, ok := entry[r[j]]
		if !ok {
			e = int32(c.Dict.Len())
			entry[r[j]] = e
			c.Dict.Data = append(c.Dict.Data, r[j]...)
			c.Dict.Offsets = append(c.Dict.Offsets, int32(len(c.Dict.Data)))
		}
		c.Indices = append(c.Indices, e)
	}
	return c
}

// reader returns a reader of the table in batches of size rows.
func (mt memTable) reader(size int, dict bool) table.Reader {
	return table.NewMemReader(mt.schema, mt.batches(size, dict)...)
}

// memOut is a table.Writer that keeps the text of every value written.
type memOut struct{ rows [][]string }

func (w *memOut) Write(b *table.Batch) error {
	for i := 0; i < b.Rows; i++ {
		row := make([]string, len(b.Cols))
		for j := range b.Cols {
			row[j] = string(b.Cols[j].AppendText(nil, i))
		}
		w.rows = append(w.rows, row)
	}
	return nil
}

func (w *memOut) Close() error { return nil }

// shipments is the parcel network's table of the tests and examples:
// n shipments with a destination postcode (nulls among them), a sender
// account, a route, whether the parcel was late, a delay grade (A, B, C)
// and the delay in hours (multiples of 1/4, so that sums are exact).
func shipments(n int) memTable {
	mt := memTable{schema: &table.Schema{Fields: []table.Field{
		{Name: "dest_postcode", Kind: table.String, Nullable: true},
		{Name: "account", Kind: table.String, Nullable: true},
		{Name: "route", Kind: table.String, Nullable: true},
		{Name: "late", Kind: table.Int64},
		{Name: "grade", Kind: table.String},
		{Name: "delay_hours", Kind: table.Float64},
	}}}
	postcodes := []string{"10115", "20095", "80331", "50667", "01067", "10115", "20095", "10115"}
	for i := 0; i < n; i++ {
		pc := postcodes[(i*i+i/3)%len(postcodes)]
		if i%9 == 4 {
			pc = ""
		}
		mt.rows = append(mt.rows, []string{
			pc,
			fmt.Sprintf("ACC-%d", (i*5)%7),
			fmt.Sprintf("R%d", i%4),
			strconv.Itoa((i*7 + i/3) % 2),
			string(rune('A' + (i*5+i/2)%3)),
			strconv.FormatFloat(float64((i*37)%11)/4+0.5, 'g', -1, 64),
		})
	}
	return mt
}

// newArrivals is the table apply encodes: some training rows and rows with
// levels the fit never saw.
func newArrivals(train memTable) memTable {
	mt := memTable{schema: train.schema, rows: append([][]string(nil), train.rows[:6]...)}
	mt.rows = append(mt.rows,
		[]string{"99999", "ACC-99", "R9", "0", "A", "1"},
		[]string{"", "ACC-3", "R9", "1", "B", "2"},
		[]string{"80331", "ACC-98", "R1", "0", "C", "3"},
	)
	return mt
}

// The independent encoder: what every output column should hold, computed
// from the rows themselves by the documented formulas, without the
// pipeline's statistics.

// targetOutputs returns, per output suffix of the target encoding, the
// value of the target for every row: the indicator of the positive class
// "1" (binary), of each class in sorted order (multi-class), the number
// (regression).
func targetOutputs(mt memTable, target, task string) (names []string, y [][]float64) {
	vals := mt.col(target)
	switch task {
	case "binary":
		return []string{"tmean"}, [][]float64{indicator(vals, "1")}
	case "multiclass":
		classes := distinctSorted(vals)
		for _, c := range classes {
			names = append(names, "tmean_"+c)
			y = append(y, indicator(vals, c))
		}
		return names, y
	}
	v := make([]float64, len(vals))
	for i, s := range vals {
		v[i], _ = strconv.ParseFloat(s, 64)
	}
	return []string{"tmean"}, [][]float64{v}
}

func indicator(vals []string, c string) []float64 {
	out := make([]float64, len(vals))
	for i, v := range vals {
		if v == c {
			out[i] = 1
		}
	}
	return out
}

func distinctSorted(vals []string) []string {
	seen := map[string]bool{}
	var out []string
	for _, v := range vals {
		if !seen[v] {
			seen[v] = true
			out = append(out, v)
		}
	}
	sort.Strings(out)
	return out
}

// mEstimate is the m-estimate (s + m p)/(n + m) of a level with n fitting
// rows whose target sums to s, from the prior p (Cestnik 1990).
func mEstimate(s, n, m, p float64) float64 { return (s + m*p) / (n + m) }

// wantTarget returns, per output, the m-estimate of every row of rows
// (levels lv) fitted on the rows of the fit (levels fitLv, target y) whose
// fold differs from the row's: fold nil fits on every row (apply).
func wantTarget(lv, fitLv []string, y [][]float64, m float64, fold, fitFold []int) [][]float64 {
	out := make([][]float64, len(y))
	for o := range y {
		out[o] = make([]float64, len(lv))
		for i := range lv {
			var s, n, all, sum float64
			for j := range fitLv {
				if fold != nil && fitFold[j] == fold[i] {
					continue
				}
				all++
				sum += y[o][j]
				if fitLv[j] == lv[i] {
					n++
					s += y[o][j]
				}
			}
			out[o][i] = mEstimate(s, n, m, sum/all)
		}
	}
	return out
}

// counts returns the rows of every level.
func counts(lv []string) map[string]int {
	c := map[string]int{}
	for _, v := range lv {
		c[v]++
	}
	return c
}

// topkCodes returns the top-k code of every level by the documented
// ranking: rows descending, ties by the level's bytes ascending, the null
// level before every text; codes 1..k, every other level 0.
func topkCodes(fitLv []string, k int) map[string]int {
	c := counts(fitLv)
	levels := make([]string, 0, len(c))
	for l := range c {
		levels = append(levels, l)
	}
	sort.Slice(levels, func(a, b int) bool {
		if c[levels[a]] != c[levels[b]] {
			return c[levels[a]] > c[levels[b]]
		}
		return levels[a] < levels[b] // "" (null) sorts first
	})
	codes := map[string]int{}
	for r, l := range levels {
		if r < k {
			codes[l] = r + 1
		}
	}
	return codes
}

// wantColumn returns the expected output columns of encoding e (its
// grammar) of one column: levels lv of the rows encoded, fitLv of the rows
// fitted; y and fold as for wantTarget.
func wantColumn(t *testing.T, col, e string, lv, fitLv []string, tnames []string, y [][]float64, fold, fitFold []int) map[string][]float64 {
	t.Helper()
	out := map[string][]float64{}
	name, arg, _ := strings.Cut(e, ":")
	num := func(s string) float64 {
		v, err := strconv.ParseFloat(strings.TrimPrefix(s, "m="), 64)
		if err != nil {
			t.Fatalf("encoding %q: %v", e, err)
		}
		return v
	}
	switch name {
	case "target":
		for o, v := range wantTarget(lv, fitLv, y, num(arg), fold, fitFold) {
			out[col+"_"+tnames[o]] = v
		}
	case "freq":
		c, v := counts(fitLv), make([]float64, len(lv))
		for i, l := range lv {
			v[i] = float64(c[l]) // an unseen level: 0
		}
		out[col+"_freq"] = v
	case "topk":
		codes, v := topkCodes(fitLv, int(num(arg))), make([]float64, len(lv))
		for i, l := range lv {
			v[i] = float64(codes[l]) // other or unseen: 0
		}
		out[col+"_topk"] = v
	case "hash":
		b, v := uint64(num(arg)), make([]float64, len(lv))
		for i, l := range lv {
			v[i] = float64(xxhash.Sum64String(l) % b) // XXH64 with seed 0; null hashes the empty value
		}
		out[col+"_hash"] = v
	default:
		t.Fatalf("no independent encoder for %q", e)
	}
	return out
}

// memCase is one job of the in-memory tests.
type memCase struct {
	name   string
	target string // "" for an unsupervised plan
	task   string
	plan   map[string]string // column -> its encodings (each method once)
}

func memCases() []memCase {
	return []memCase{
		{"binary", "late", "binary", map[string]string{"dest_postcode": "target:m=2+freq", "route": "target:m=0.5+topk:2"}},
		{"multiclass", "grade", "multiclass", map[string]string{"dest_postcode": "target:m=1+topk:3", "account": "target:m=3"}},
		{"regression", "delay_hours", "regression", map[string]string{"dest_postcode": "target:m=2+freq", "route": "target:m=1"}},
		{"unsupervised", "", "", map[string]string{"dest_postcode": "freq+topk:3+hash:16", "account": "hash:4"}},
	}
}

// columns returns the case's columns in a fixed order.
func (tc memCase) columns() []string {
	var cols []string
	for c := range tc.plan {
		cols = append(cols, c)
	}
	sort.Strings(cols)
	return cols
}

// spec is the case's job: k folds by rows, seed 11, a fold column, the
// encoded columns only.
func (tc memCase) spec(t *testing.T, k int) pipeline.Spec {
	t.Helper()
	sp := pipeline.DefaultSpec()
	sp.Target, sp.Task, sp.Columns = tc.target, tc.task, tc.columns()
	var per []string
	for _, c := range sp.Columns {
		per = append(per, c+"="+tc.plan[c])
	}
	var err error
	if sp.Encodings, err = method.ParsePlan(strings.Join(per, ",")); err != nil {
		t.Fatal(err)
	}
	sp.Folds, sp.Seed, sp.FoldColumn, sp.KeepAll = k, 11, "fold", false
	return sp
}

// want returns the expected output: every encoded column by name, rows
// encoded from fit; fold nil for apply.
func (tc memCase) want(t *testing.T, rows, fit memTable, fold, fitFold []int) map[string][]float64 {
	t.Helper()
	var tnames []string
	var y [][]float64
	if tc.target != "" {
		tnames, y = targetOutputs(fit, tc.target, tc.task)
	}
	out := map[string][]float64{}
	for _, c := range tc.columns() {
		for _, e := range strings.Split(tc.plan[c], "+") {
			for name, v := range wantColumn(t, c, e, rows.col(c), fit.col(c), tnames, y, fold, fitFold) {
				out[name] = v
			}
		}
	}
	return out
}

// check compares the output (names: its columns) with want, value by
// value, to within 1e-12 of the value's size (the pipeline sums a
// regression target about an origin, so its last bits may differ).
func check(t *testing.T, names []string, out [][]string, want map[string][]float64) {
	t.Helper()
	if len(out) == 0 {
		t.Fatal("no rows written")
	}
	seen := 0
	for j, name := range names {
		w, ok := want[name]
		if !ok {
			continue
		}
		seen++
		if len(w) != len(out) {
			t.Fatalf("%s: %d rows written, want %d", name, len(out), len(w))
		}
		for i := range out {
			got, err := strconv.ParseFloat(out[i][j], 64)
			if err != nil || math.Abs(got-w[i]) > 1e-12*math.Max(1, math.Abs(w[i])) {
				t.Errorf("%s row %d: %s, want %v", name, i+1, out[i][j], w[i])
			}
		}
	}
	if seen != len(want) {
		t.Errorf("output columns %v, want %d encoded columns", names, len(want))
	}
}

// outNames returns the names of the columns Encode writes for input mt.
func outNames(t *testing.T, m *pipeline.Model, mt memTable, use pipeline.Use) []string {
	t.Helper()
	s, _, _, err := m.OutputSchema("shipments", mt.schema, use)
	if err != nil {
		t.Fatal(err)
	}
	return s.Names()
}

// fitMem fits the case's job on mt read in batches of size rows.
func fitMem(t *testing.T, sp pipeline.Spec, mt memTable, size int, dict bool) *pipeline.Model {
	t.Helper()
	m, err := pipeline.Fit(mt.reader(size, dict), sp, pipeline.FitOptions{File: "shipments", Tables: true})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// encodeMem encodes mt read in batches of size rows.
func encodeMem(t *testing.T, m *pipeline.Model, mt memTable, size int, dict bool, use pipeline.Use) [][]string {
	t.Helper()
	var out memOut
	sum, err := m.Encode(mt.reader(size, dict), &out, pipeline.EncodeOptions{File: "shipments", Use: use})
	if err != nil {
		t.Fatal(err)
	}
	if sum.Rows != int64(len(mt.rows)) {
		t.Errorf("Encode counted %d rows, want %d", sum.Rows, len(mt.rows))
	}
	return out.rows
}

// saveLoad writes the model's mapping tables and loads them back.
func saveLoad(t *testing.T, m *pipeline.Model, dir string) *pipeline.Model {
	t.Helper()
	if err := m.SaveTables(dir); err != nil {
		t.Fatal(err)
	}
	l, err := pipeline.LoadTables(dir)
	if err != nil {
		t.Fatal(err)
	}
	return l
}

// memRows is the size of the tests' training table.
const memRows = 45

// TestMemoryPipeline runs Fit, Encode (k-fold training pass), SaveTables,
// LoadTables and Encode (apply) on in-memory readers, for a binary, a
// multi-class and a regression target and an unsupervised plan, and
// checks every value against the independent encoder above: the
// m-estimate from the rows of the other folds (the rows rule's folds,
// folds.Row), frequencies and top-k codes from the counts, hash buckets
// from XXH64. Each job runs with batches of 1 row, 7 rows (in dictionary
// form) and all rows, which must write the same bytes.
func TestMemoryPipeline(t *testing.T) {
	const k = 3
	train := shipments(memRows)
	apply := newArrivals(train)
	fold := make([]int, memRows)
	for i := range fold {
		fold[i] = folds.Row(11, uint64(i), k)
	}
	for _, tc := range memCases() {
		t.Run(tc.name, func(t *testing.T) {
			sp := tc.spec(t, k)
			var firstTrain, firstApply [][]string
			for _, size := range []int{1, 7, memRows} {
				dict := size == 7
				m := fitMem(t, sp, train, size, dict)
				trained := encodeMem(t, m, train, size, dict, pipeline.Training)
				names := outNames(t, m, train, pipeline.Training)
				check(t, names, trained, tc.want(t, train, train, fold, fold))
				foldAt := slices.Index(names, "fold")
				for i, row := range trained {
					if row[foldAt] != strconv.Itoa(fold[i]) {
						t.Fatalf("row %d: fold %s, want %d (folds.Row)", i+1, row[foldAt], fold[i])
					}
				}
				loaded := saveLoad(t, m, filepath.Join(t.TempDir(), "tables"))
				applied := encodeMem(t, loaded, apply, size, dict, pipeline.NewRows)
				check(t, outNames(t, loaded, apply, pipeline.NewRows), applied, tc.want(t, apply, train, nil, nil))
				if firstTrain == nil {
					firstTrain, firstApply = trained, applied
					continue
				}
				if !reflect.DeepEqual(trained, firstTrain) {
					t.Errorf("batches of %d rows: the training pass differs from batches of 1", size)
				}
				if !reflect.DeepEqual(applied, firstApply) {
					t.Errorf("batches of %d rows: apply differs from batches of 1", size)
				}
			}
		})
	}
}

// TestMemoryMerge fits the two halves of the table on their own, saves,
// loads and merges their tables, and checks that the merged model applies
// as the model of the whole table does (the same bytes, for a regression
// target too: its sums are exact until rounded) and as the independent
// encoder says.
func TestMemoryMerge(t *testing.T) {
	const k = 3
	train := shipments(memRows)
	apply := newArrivals(train)
	halves := []memTable{{schema: train.schema, rows: train.rows[:20]}, {schema: train.schema, rows: train.rows[20:]}}
	for _, tc := range memCases() {
		t.Run(tc.name, func(t *testing.T) {
			sp := tc.spec(t, k)
			var models []*pipeline.Model
			var names []string
			for i, h := range halves {
				dir := filepath.Join(t.TempDir(), fmt.Sprintf("half%d", i+1))
				models = append(models, saveLoad(t, fitMem(t, sp, h, 7, false), dir))
				names = append(names, dir)
			}
			merged, err := pipeline.Merge(models, names, 0)
			if err != nil {
				t.Fatal(err)
			}
			if merged.Rows != memRows {
				t.Errorf("merged model: %d rows, want %d", merged.Rows, memRows)
			}
			merged = saveLoad(t, merged, filepath.Join(t.TempDir(), "merged"))
			got := encodeMem(t, merged, apply, 4, false, pipeline.NewRows)
			cols := outNames(t, merged, apply, pipeline.NewRows)
			check(t, cols, got, tc.want(t, apply, train, nil, nil))

			whole := saveLoad(t, fitMem(t, sp, train, memRows, false), filepath.Join(t.TempDir(), "whole"))
			want := encodeMem(t, whole, apply, 4, false, pipeline.NewRows)
			if !reflect.DeepEqual(got, want) {
				t.Errorf("merged halves apply\n%v\nthe whole table's tables\n%v", got, want)
			}
		})
	}
}

// TestMemoryMergeRefusesOtherPlans checks that Merge refuses halves fitted
// with other encodings, naming the second.
func TestMemoryMergeRefusesOtherPlans(t *testing.T) {
	train := shipments(memRows)
	tc := memCases()[0]
	a := tc.spec(t, 3)
	b := tc.spec(t, 3)
	b.Encodings, _ = method.ParsePlan("dest_postcode=target:m=3+freq,route=target:m=0.5+topk:2")
	dirA, dirB := filepath.Join(t.TempDir(), "a"), filepath.Join(t.TempDir(), "b")
	ma := saveLoad(t, fitMem(t, a, train, 7, false), dirA)
	mb := saveLoad(t, fitMem(t, b, train, 7, false), dirB)
	_, err := pipeline.Merge([]*pipeline.Model{ma, mb}, []string{dirA, dirB}, 0)
	if err == nil || !strings.Contains(err.Error(), dirB) || !strings.Contains(err.Error(), "target:m=3") {
		t.Errorf("merge of other encodings: %v, want an error naming %s and target:m=3", err, dirB)
	}
}
