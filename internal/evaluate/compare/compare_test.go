package compare

import (
	"bytes"
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"manyfold/folds"
	"manyfold/internal/parcels"
	"manyfold/io/csvio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// csvReader returns a reader of CSV text.
func csvReader(t *testing.T, text string) table.Reader {
	t.Helper()
	r, err := csvio.NewReader(strings.NewReader(text), "test.csv", csvio.Options{Delimiter: ','})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// splitmix64 is a small deterministic generator for test data.
type splitmix64 uint64

func (s *splitmix64) next() uint64 {
	*s += 0x9E3779B97F4A7C15
	z := uint64(*s)
	z = (z ^ z>>30) * 0xBF58476D1CE4E5B9
	z = (z ^ z>>27) * 0x94D049BB133111EB
	return z ^ z>>31
}

// idTable is a table of n shipments whose shipment_id is unique (random
// hex, so that its 3-character prefixes group about n/4096 rows each) and
// whose late flag is a fair coin independent of everything.
func idTable(n int, seed uint64) (string, []float64) {
	var b strings.Builder
	b.WriteString("shipment_id,late\n")
	rng := splitmix64(seed)
	y := make([]float64, n)
	for i := 0; i < n; i++ {
		id := rng.next()
		late := rng.next() >> 63
		y[i] = float64(late)
		fmt.Fprintf(&b, "%016x%08d,%d\n", id, i, late)
	}
	return b.String(), y
}

func find(t *testing.T, c ColumnResult, name string) CandidateResult {
	t.Helper()
	for _, k := range c.Candidates {
		if k.Name == name {
			return k
		}
	}
	t.Fatalf("candidate %s missing from %s", name, c.Column)
	return CandidateResult{}
}

// TestLeakIsCaught: a unique id carries no information about an
// independent target. Every honest candidate must score chance on the
// held-out rows, while the in-sample mean fits its own training rows
// almost perfectly and is no better than chance held out.
func TestLeakIsCaught(t *testing.T) {
	const n, k, seed = 20000, 5, 3
	text, y := idTable(n, 11)
	cands, err := ParseCandidates("prior,target:insample,target:eb,target:m=10,target:blend=5,1,target:eb:prior=prefix3,freq,topk:100,hash:256")
	if err != nil {
		t.Fatal(err)
	}
	res, err := Run(csvReader(t, text), Options{File: "ids.csv", Target: "late", Columns: []string{"shipment_id"},
		Candidates: cands, Folds: k, InnerFolds: 5, Seed: seed, NoTimings: true, Threads: 2})
	if err != nil {
		t.Fatal(err)
	}
	// The bound. Under H0 (scores independent of labels) the standard
	// error of an AUC on n1 positives and n0 negatives is about
	// sqrt((n1+n0+1)/(12 n1 n0)) (Hanley & McNeil, Radiology 143, 1982:
	// the variance of the Mann-Whitney statistic at AUC = 0.5). The
	// outer folds hold disjoint held-out rows, so the mean over K folds
	// has standard error sqrt(Σ SE_f²)/K; we allow 4 of those. With 20000
	// rows, 5 folds and a fair coin, SE_f ≈ 0.0091 and the bound is about
	// 4·0.0041 ≈ 0.016.
	var n1, n0 [k]float64
	for i, yi := range y {
		f := folds.Row(seed, uint64(i), k)
		if yi == 1 {
			n1[f]++
		} else {
			n0[f]++
		}
	}
	var v float64
	for f := 0; f < k; f++ {
		v += (n1[f] + n0[f] + 1) / (12 * n1[f] * n0[f])
	}
	bound := 4 * math.Sqrt(v) / k
	if bound < 0.01 || bound > 0.03 {
		t.Fatalf("bound %.4f is not near the 0.016 worked out above", bound)
	}
	t.Logf("bound: 0.5 ± %.4f", bound)
	c := res.Columns[0]
	if c.Levels != n {
		t.Errorf("levels = %d, want %d", c.Levels, n)
	}
	for _, cand := range c.Candidates {
		if math.Abs(cand.Primary.Mean-0.5) > bound {
			t.Errorf("%s: held-out AUC %.4f outside 0.5 ± %.4f", cand.Name, cand.Primary.Mean, bound)
		}
		if cand.UnseenShare != 1 {
			t.Errorf("%s: unseen share %v, want 1 (every id is new)", cand.Name, cand.UnseenShare)
		}
	}
	in := find(t, c, "target:insample")
	if in.TrainPrimary.Mean <= 0.95 {
		t.Errorf("in-sample baseline's training AUC %.4f, want > 0.95", in.TrainPrimary.Mean)
	}
	for _, name := range []string{"target:eb", "target:m=10", "freq"} {
		if tr := find(t, c, name).TrainPrimary.Mean; math.Abs(tr-0.5) > bound {
			t.Errorf("%s: training AUC %.4f: an honest encoding of an id must not fit its training rows", name, tr)
		}
	}
	if w := winner(c); w != nil && w.Baseline {
		t.Errorf("winner %s is a baseline", w.Name)
	}
	if c.Winner != nil || !strings.Contains(c.Reading, "no clear winner") {
		t.Errorf("winner %v, reading %q: nothing should beat the prior", c.Winner, c.Reading)
	}
}

func winner(c ColumnResult) *CandidateResult {
	for i := range c.Candidates {
		if c.Candidates[i].Winner {
			return &c.Candidates[i]
		}
	}
	return nil
}

// parcelsFile writes a generated shipments table to a Parquet file.
func parcelsFile(t *testing.T, cfg parcels.Config) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "shipments.parquet")
	w, err := tableio.Create(path, parcels.Schema(), tableio.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := parcels.Generate(cfg, w); err != nil {
		w.Abort()
		t.Fatal(err)
	}
	if err := w.Commit(); err != nil {
		t.Fatal(err)
	}
	return path
}

func runFile(t *testing.T, path string, opt Options) *Result {
	t.Helper()
	r, err := tableio.Open(path, tableio.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	opt.File = "shipments.parquet"
	res, err := Run(r, opt)
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// TestSignalIsFound: late depends on the destination postcode through
// level effects; target:eb must beat the prior baseline by a clear
// margin, and the winner must not depend on the seed.
func TestSignalIsFound(t *testing.T) {
	if testing.Short() {
		t.Skip("100k rows")
	}
	path := parcelsFile(t, parcels.Config{Rows: 100000, Seed: 5})
	cands, _ := ParseCandidates("prior,target:insample,target:eb,freq,topk:100,hash:1024")
	var winners []string
	var orders [][]string
	for _, seed := range []uint64{1, 2} {
		res := runFile(t, path, Options{Target: "late", Columns: []string{"dest_postcode"}, Candidates: cands,
			Folds: 5, InnerFolds: 5, Seed: seed, NoTimings: true, Threads: 2})
		c := res.Columns[0]
		auto, prior := find(t, c, "target:eb"), find(t, c, "prior")
		// Margin: 0.02 AUC, about ten times the fold-to-fold standard
		// deviation seen on this table (0.002 to 0.004).
		if d := auto.Primary.Mean - prior.Primary.Mean; d < 0.02 {
			t.Errorf("seed %d: target:eb beats the prior by %.4f AUC, want > 0.02", seed, d)
		}
		if prior.Primary.Mean != 0.5 {
			t.Errorf("seed %d: the prior alone scores %.4f, want exactly 0.5 (a constant)", seed, prior.Primary.Mean)
		}
		in := find(t, c, "target:insample")
		if in.TrainPrimary.Mean-in.Primary.Mean < 0.05 {
			t.Errorf("seed %d: in-sample baseline flatters itself by only %.4f (train %.4f, held out %.4f)",
				seed, in.TrainPrimary.Mean-in.Primary.Mean, in.TrainPrimary.Mean, in.Primary.Mean)
		}
		w := winner(c)
		if w == nil {
			t.Fatalf("seed %d: no winner", seed)
		}
		winners = append(winners, w.Name)
		var order []string
		for _, k := range c.Candidates {
			if !k.Baseline {
				order = append(order, k.Name)
			}
		}
		orders = append(orders, order)
		t.Logf("seed %d: %v; %s", seed, order, c.Reading)
	}
	if winners[0] != winners[1] {
		t.Errorf("winner changes with the seed: %s, %s", winners[0], winners[1])
	}
	if winners[0] != "target:eb" {
		t.Errorf("winner %s, want target:eb", winners[0])
	}
	if strings.Join(orders[0], ",") != strings.Join(orders[1], ",") {
		t.Logf("note: order of the honest candidates differs between seeds: %v, %v", orders[0], orders[1])
	}
}

// TestSameSeedSameOutput: two runs with one seed give byte-identical text
// and JSON, whatever the number of threads; another seed changes them.
func TestSameSeedSameOutput(t *testing.T) {
	path := parcelsFile(t, parcels.Config{Rows: 20000, Seed: 9, Postcodes: 2000, Accounts: 5000})
	out := func(seed uint64, threads int) (string, string) {
		res := runFile(t, path, Options{Target: "late", Columns: []string{"dest_postcode", "sender_account"},
			Folds: 3, InnerFolds: 3, Seed: seed, NoTimings: true, Threads: threads, With: []string{"weight_kg"}})
		var a, b bytes.Buffer
		if err := WriteText(&a, res); err != nil {
			t.Fatal(err)
		}
		if err := WriteJSON(&b, res); err != nil {
			t.Fatal(err)
		}
		return a.String(), b.String()
	}
	t1, j1 := out(4, 1)
	t2, j2 := out(4, 2)
	if t1 != t2 || j1 != j2 {
		t.Errorf("same seed, different output:\n%s\n---\n%s", t1, t2)
	}
	t3, _ := out(5, 2)
	if t3 == t1 {
		t.Error("another seed gave the same table")
	}
	if !(strings.Contains(t1, "<- winner") || strings.Contains(t1, "no clear winner")) || !strings.Contains(t1, "reading: ") {
		t.Errorf("table lacks the winner mark or the reading:\n%s", t1)
	}
}

// TestSampleBoundsModelRows: --sample keeps about the asked rows for the
// models while the statistics count every row.
func TestSampleBoundsModelRows(t *testing.T) {
	text, _ := idTable(10000, 2)
	cands, _ := ParseCandidates("prior,freq")
	res, err := Run(csvReader(t, text), Options{File: "ids.csv", Target: "late", Columns: []string{"shipment_id"},
		Candidates: cands, Folds: 2, InnerFolds: 2, Sample: 2000, TotalRows: 10000, NoTimings: true})
	if err != nil {
		t.Fatal(err)
	}
	if res.Rows != 10000 {
		t.Errorf("rows %d, want 10000", res.Rows)
	}
	// Binomial(10000, 0.2): sd 40; allow 5 sd.
	if res.ModelRows < 1800 || res.ModelRows > 2200 {
		t.Errorf("model rows %d, want about 2000", res.ModelRows)
	}
}

// TestTasks runs a regression and a multi-class target and checks that
// the level effects are found by the task's metrics.
func TestTasks(t *testing.T) {
	path := parcelsFile(t, parcels.Config{Rows: 30000, Seed: 4, Postcodes: 3000, Accounts: 5000})
	cands, _ := ParseCandidates("prior,target:eb,hash:256")
	res := runFile(t, path, Options{Target: "cost", Columns: []string{"route"}, Candidates: cands,
		Folds: 3, InnerFolds: 3, NoTimings: true, With: []string{"weight_kg"}})
	if res.Task != "regression" || res.Metric != "rmse" || res.HigherBetter {
		t.Fatalf("task %s metric %s higher %v, want regression rmse lower", res.Task, res.Metric, res.HigherBetter)
	}
	c := res.Columns[0]
	if a, p := find(t, c, "target:eb"), find(t, c, "prior"); !(a.Primary.Mean < p.Primary.Mean) {
		t.Errorf("regression: target:eb RMSE %.4f not below the prior's %.4f", a.Primary.Mean, p.Primary.Mean)
	}
	res = runFile(t, path, Options{Target: "parcel_type", Columns: []string{"route"}, Candidates: cands,
		Folds: 3, InnerFolds: 3, NoTimings: true})
	if res.Task != "multiclass" || res.Metric != "log_loss" || len(res.Classes) < 3 {
		t.Fatalf("task %s metric %s classes %v, want multiclass log_loss", res.Task, res.Metric, res.Classes)
	}
	for _, k := range res.Columns[0].Candidates {
		for _, m := range k.Metrics {
			if math.IsNaN(m.Mean) {
				t.Errorf("multiclass %s: %s is NaN", k.Name, m.Name)
			}
		}
		if k.Name == "target:eb" && k.OutputColumns != len(res.Classes) {
			t.Errorf("multiclass target:eb has %d columns, want one per class (%d)", k.OutputColumns, len(res.Classes))
		}
	}
}

func TestParseCandidates(t *testing.T) {
	tests := []struct {
		in   string
		want []string
		err  bool
	}{
		{in: DefaultCandidates, want: []string{"prior", "target:insample", "target:eb", "target:eb+freq", "freq", "topk:100", "hash:1024"}},
		{in: "target,topk,hash", want: []string{"target:eb", "topk:100", "hash:1024"}},
		{in: "target:blend=20,10,target:m=50", want: []string{"target:blend=20,10", "target:m=50"}},
		{in: "target:blend=20,10:prior=prefix3,freq", want: []string{"target:blend=20,10:prior=prefix3", "freq"}},
		{in: "target:eb:prior=prefix3", want: []string{"target:eb:prior=prefix3"}},
		{in: "target:eb,target", err: true}, // listed twice
		{in: "topk:0", err: true},
		{in: "hash:x", err: true},
		{in: "target:m=-1", err: true},
		{in: "target:prior=prefix0", err: true},
		{in: "onehot:5+freq", want: []string{"onehot:5+freq"}}, // a combination
		{in: "bogus", err: true},
		{in: "freq:3", err: true},
		{in: "", err: true},
	}
	for _, tc := range tests {
		got, err := ParseCandidates(tc.in)
		if (err != nil) != tc.err {
			t.Errorf("%q: error %v, want error %v", tc.in, err, tc.err)
			continue
		}
		var names []string
		for _, c := range got {
			names = append(names, c.Name)
		}
		if !tc.err && strings.Join(names, " ") != strings.Join(tc.want, " ") {
			t.Errorf("%q: %v, want %v", tc.in, names, tc.want)
		}
	}
}

// TestRunErrors: bad options are usage errors naming the problem.
func TestRunErrors(t *testing.T) {
	text := "a,late\nx,1\ny,0\nx,1\ny,0\n"
	tests := []struct {
		opt  Options
		want string
	}{
		{Options{Target: "late", Columns: []string{"b"}, Folds: 2, InnerFolds: 2}, `"b"`},
		{Options{Target: "lat", Columns: []string{"a"}, Folds: 2, InnerFolds: 2}, "late"},
		{Options{Target: "late", Columns: []string{"late"}, Folds: 2, InnerFolds: 2}, "is the target"},
		{Options{Target: "late", Columns: []string{"a"}, Folds: 1, InnerFolds: 2}, "folds 1: want 2 to 50"},
		{Options{Target: "late", Columns: []string{"a"}, Folds: 2, InnerFolds: 0}, "inner folds 0: want 2 to 50"},
		{Options{Target: "late", Columns: []string{"a"}, With: []string{"w"}, Folds: 2, InnerFolds: 2}, `t.csv: with names column "w"`},
		{Options{Target: "late", Columns: []string{"a"}, Folds: 40, InnerFolds: 2}, "too few rows"},
	}
	for _, tc := range tests {
		tc.opt.File = "t.csv"
		_, err := Run(csvReader(t, text), tc.opt)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%+v: error %v, want one containing %q", tc.opt, err, tc.want)
		}
	}
	_, err := Run(csvReader(t, "a,late\nx,1\ny,1\n"), Options{File: "t.csv", Target: "late", Columns: []string{"a"}, Folds: 2, InnerFolds: 2})
	if err == nil || !strings.Contains(err.Error(), "single class") {
		t.Errorf("single class: %v", err)
	}
}

// TestJSONNaN: a metric that is not finite is written as null.
func TestJSONNaN(t *testing.T) {
	r := &Result{Columns: []ColumnResult{{Candidates: []CandidateResult{{Name: "x", Primary: Stat{math.NaN(), 0}, PerFold: []float64{0.5, math.NaN()}}}}}}
	var b bytes.Buffer
	if err := WriteJSON(&b, r); err != nil {
		t.Fatal(err)
	}
	s := b.String()
	if !strings.Contains(s, `"mean": null`) || !strings.Contains(s, "0.5,\n") || !strings.Contains(s, "null\n") {
		t.Errorf("JSON:\n%s", s)
	}
}

// TestPrefixPriorCarriesHierarchy: every code is seen once, so only its
// prefix can carry information to held-out rows; the target is the
// prefix's effect plus noise. target:eb:prior=prefix2 must then beat the
// plain target mean (the prior alone, as every held-out code is unseen) by
// far: the prefix effects span 10 units against a noise sd of 1, so the
// RMSE falls from about 3 (the sd of effects and noise together) to about 1.
func TestPrefixPriorCarriesHierarchy(t *testing.T) {
	var b strings.Builder
	b.WriteString("code,y\n")
	rng := splitmix64(9)
	for i := 0; i < 4000; i++ {
		p := int(rng.next() % 20) // 20 prefixes of effect p/2
		noise := float64(int64(rng.next()%2001)-1000) / 577.0
		fmt.Fprintf(&b, "%02d%05d,%g\n", p, i, float64(p)/2+noise)
	}
	cands, _ := ParseCandidates("prior,target:eb,target:eb:prior=prefix2")
	res, err := Run(csvReader(t, b.String()), Options{Target: "y", Columns: []string{"code"}, Candidates: cands, Folds: 3, InnerFolds: 3, Seed: 1, NoTimings: true})
	if err != nil {
		t.Fatal(err)
	}
	c := res.Columns[0]
	plain, prefix := find(t, c, "target:eb"), find(t, c, "target:eb:prior=prefix2")
	t.Logf("RMSE: target:eb %.4f, target:eb:prior=prefix2 %.4f", plain.Primary.Mean, prefix.Primary.Mean)
	if prefix.Primary.Mean > 1.2 || plain.Primary.Mean < 2.5 {
		t.Errorf("RMSE with the prefix prior %.4f (want about 1, below 1.2), without %.4f (want about 3, above 2.5)", prefix.Primary.Mean, plain.Primary.Mean)
	}
}

// TestJointModel: on the parcel table, whose late deliveries depend on the
// postcode and on the account independently, one model over both
// columns' winners beats the better column alone, and the joint reading's
// figures are the JSON's.
func TestJointModel(t *testing.T) {
	path := parcelsFile(t, parcels.Config{Rows: 30000, Seed: 5, Postcodes: 2000, Accounts: 3000})
	cands, _ := ParseCandidates("prior,target:eb,freq")
	res := runFile(t, path, Options{Target: "late", Columns: []string{"dest_postcode", "sender_account"}, Candidates: cands,
		Folds: 5, InnerFolds: 3, Seed: 2, NoTimings: true, Joint: true})
	j := res.Joint
	if j == nil || len(j.Columns) != 2 || j.OverBestColumn == nil {
		t.Fatalf("joint result %+v", j)
	}
	t.Logf("%s", j.Reading)
	if !(j.OverBestColumn.Low > 0) {
		t.Errorf("the joint model gains %.4f AUC over %s (interval %.4f to %.4f); want a gain whose interval lies above 0",
			j.OverBestColumn.Mean, j.OverBestColumn.Over, j.OverBestColumn.Low, j.OverBestColumn.High)
	}
	if !strings.Contains(j.Reading, num(j.Primary.Mean)) || !strings.Contains(j.Reading, num(j.OverBestColumn.Low)) {
		t.Errorf("reading %q lacks the JSON's figures", j.Reading)
	}
	// Without --joint there is none.
	res = runFile(t, path, Options{Target: "late", Columns: []string{"dest_postcode"}, Candidates: cands, Folds: 3, InnerFolds: 3, Seed: 2, NoTimings: true})
	if res.Joint != nil {
		t.Error("a joint result without Joint")
	}
}
