package main

import (
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"manyfold/internal/evaluate/metrics"
)

// noiseTable returns a CSV of rows rows: a postcode drawn uniformly from
// levels levels and a late flag drawn independently of it (a fair coin),
// the first row's late being 1. The column carries no information about
// the target, so an honest out-of-fold encoding cannot predict a training
// row's own label.
func noiseTable(rows, levels int, seed uint64) string {
	rng := rand.New(rand.NewPCG(seed, 7))
	var b strings.Builder
	b.WriteString("postcode,late\n")
	for i := 0; i < rows; i++ {
		late := rng.IntN(2)
		if i == 0 {
			late = 1
		}
		fmt.Fprintf(&b, "P%05d,%d\n", rng.IntN(levels), late)
	}
	return b.String()
}

// TestStratifiedFoldsDoNotLeak encodes a noise column with --fold-by
// stratified on a table whose first row is positive (so the classes are met
// in the order 1, 0, the reverse of their sorted order) and checks that
// (1) the training rows' AUC of the out-of-fold mean against their own label
// is that of a score independent of the label, and (2) every value is the
// out-of-fold m-estimate recomputed from the written fold column.
//
// The bound of (1): for a score independent of the labels, the AUC is the
// Mann-Whitney statistic U/(n0 n1), whose null variance without ties is
// (n0+n1+1)/(12 n0 n1) (Mann & Whitney, Ann. Math. Statist. 18(1), 1947):
// a standard deviation of 0.0041 at 10,000 of each class. Rows of one level
// and fold share their value (ties, which lower the variance) and levels
// share their rows' labels across folds (which can raise it); we allow
// twice the standard deviation for that, and 5 of those: 0.041. A leaking
// encoding is far outside: before the stratifier followed class labels the
// fit and the encode pass drew different folds and this AUC was 0.67.
func TestStratifiedFoldsDoNotLeak(t *testing.T) {
	const rows, levels, k = 20000, 2000, 5
	dir := t.TempDir()
	in := writeFile(t, dir, "noise.csv", noiseTable(rows, levels, 11))
	out := filepath.Join(dir, "enc.csv")
	mustRun(t, "encode", in, "--target", "late", "--columns", "postcode", "--fold-by", "stratified",
		"--folds", strconv.Itoa(k), "--methods", "target:m=1", "--fold-column", "fold", "--seed", "3",
		"--out", out, "--tables", filepath.Join(dir, "tables"))
	tt := readTable(t, out)
	pc, lateS, foldS, enc := tt.col(t, "postcode"), tt.col(t, "late"), tt.col(t, "fold"), tt.col(t, "postcode_tmean")

	y := make([]float64, rows)
	score := make([]float64, rows)
	fold := make([]int, rows)
	var n0, n1 float64
	for i := range y {
		y[i] = parseF(t, lateS[i])
		score[i] = parseF(t, enc[i])
		fold[i] = int(parseF(t, foldS[i]))
		if y[i] == 1 {
			n1++
		} else {
			n0++
		}
	}
	sd := math.Sqrt((n0 + n1 + 1) / (12 * n0 * n1))
	bound := 5 * 2 * sd
	if auc := metrics.AUC(y, score); math.Abs(auc-0.5) > bound {
		t.Errorf("training rows' AUC of the out-of-fold mean against their own label = %.4f, want 0.5 +- %.4f", auc, bound)
	}

	// (2) Recompute (s + m p)/(n + m), m = 1, from the rows of the other
	// folds (Cestnik 1990; the prior p is the mean of those rows).
	type cell struct{ n, s float64 }
	byLevel := map[string][]cell{}
	foldN := make([]float64, k)
	foldS1 := make([]float64, k)
	for i := range y {
		c := byLevel[pc[i]]
		if c == nil {
			c = make([]cell, k)
			byLevel[pc[i]] = c
		}
		c[fold[i]].n++
		c[fold[i]].s += y[i]
		foldN[fold[i]]++
		foldS1[fold[i]] += y[i]
	}
	var totN, totS float64
	for f := 0; f < k; f++ {
		totN += foldN[f]
		totS += foldS1[f]
	}
	bad := 0
	for i := range y {
		f := fold[i]
		prior := (totS - foldS1[f]) / (totN - foldN[f])
		var n, s float64
		for g, c := range byLevel[pc[i]] {
			if g != f {
				n += c.n
				s += c.s
			}
		}
		want := (s + prior) / (n + 1)
		if !near(score[i], want, 1e-12) {
			if bad++; bad <= 5 {
				t.Errorf("row %d (fold %d): postcode_tmean %.15g, the out-of-fold m-estimate from the written folds is %.15g", i+1, f, score[i], want)
			}
		}
	}
	if bad > 5 {
		t.Errorf("%d rows in all differ from the out-of-fold values of the written fold column", bad)
	}
}

// shiftTable returns a CSV of a postcode (levels levels) and a cost whose
// level means spread with standard deviation about 1 around shift and whose
// rows spread about 1 around their level's mean. Every cost is a multiple
// of 1/1024 plus shift, so that the shifted texts are exact float64 values
// (below 2^53 / 1024 for the shifts used) and the shifted table is the
// unshifted one moved by exactly shift.
func shiftTable(rows, levels int, shift float64) string {
	rng := rand.New(rand.NewPCG(5, 9))
	means := make([]float64, levels)
	for i := range means {
		means[i] = rng.NormFloat64()
	}
	var b strings.Builder
	b.WriteString("postcode,cost\n")
	for i := 0; i < rows; i++ {
		l := rng.IntN(levels)
		y := math.Round((means[l]+rng.NormFloat64())*1024) / 1024
		fmt.Fprintf(&b, "P%04d,%s\n", l, strconv.FormatFloat(y+shift, 'g', -1, 64))
	}
	return b.String()
}

// TestShiftedTargetEncodesShifted: the smoothed mean is affine in the
// target (the m-estimate (s + m p)/(n + m), and the empirical-Bayes m =
// sigma^2/tau^2 is a ratio of variances, which a shift does not change), so
// the encodings of y + c are those of y plus c. The comparison allows 1e-9
// of the target's standard deviation plus four units in the last place of
// the shifted value, which is what a float64 near c can hold. Before the
// sums were taken about a value of the target itself, tau^2 came out <= 0
// in most folds at c = 1e8 and the column collapsed to the prior.
func TestShiftedTargetEncodesShifted(t *testing.T) {
	const rows, levels = 6000, 300
	encode := func(shift float64, extra ...string) []float64 {
		dir := t.TempDir()
		in := writeFile(t, dir, "cost.csv", shiftTable(rows, levels, shift))
		out := filepath.Join(dir, "enc.csv")
		args := append([]string{"encode", in, "--target", "cost", "--columns", "postcode", "--seed", "4",
			"--out", out, "--tables", filepath.Join(dir, "tables")}, extra...)
		mustRun(t, args...)
		var v []float64
		for _, s := range readTable(t, out).col(t, "postcode_tmean") {
			v = append(v, parseF(t, s))
		}
		return v
	}
	for _, extra := range [][]string{nil, {"--scheme", "loo"}, {"--scheme", "ordered"}, {"--methods", "target:blend=5,2"}} {
		base := encode(0, extra...)
		_, sd := metrics.MeanStd(base)
		if sd == 0 {
			t.Fatalf("%v: the unshifted encoding is constant", extra)
		}
		for _, shift := range []float64{1e8, 1e12} {
			got := encode(shift, extra...)
			tol := 1e-9*sd + 4*(math.Nextafter(shift, math.Inf(1))-shift)
			bad := 0
			for i := range base {
				if d := got[i] - shift - base[i]; math.Abs(d) > tol {
					if bad++; bad <= 3 {
						t.Errorf("%v, shift %g: row %d encodes to %.17g, the unshifted row to %.17g (off by %.3g, allowed %.3g)",
							extra, shift, i+1, got[i], base[i], d, tol)
					}
				}
			}
			if bad > 3 {
				t.Errorf("%v, shift %g: %d rows in all", extra, shift, bad)
			}
		}
	}
}

// TestBlendLogOddsInterior: with the sigmoid blend the weight of a large
// level's own rate rounds to exactly 1, so a level with no positives got
// the rate 0 and the clipped log-odds log(1e-15) = -34.5. With
// target:blend=2,1:logodds the level's rate enters as (s + 1/2)/(n + 1)
// (Haldane 1956, Anscombe 1956), strictly inside (0, 1): here
// log(0.5/(n + 1)) for the training rows of a level of n out-of-fold rows,
// all negative, since lambda = 1 / (1 + exp(-(n - 2)/1)) is 1 in float64
// for n > 40.
func TestBlendLogOddsInterior(t *testing.T) {
	var b strings.Builder
	b.WriteString("route,late\n")
	for i := 0; i < 3000; i++ {
		fmt.Fprintf(&b, "R-NEVER,0\nR-MIXED,%d\n", i%2)
	}
	dir := t.TempDir()
	in := writeFile(t, dir, "routes.csv", b.String())
	out := filepath.Join(dir, "enc.csv")
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", in, "--target", "late", "--columns", "route", "--methods", "target:blend=2,1:logodds",
		"--fold-column", "fold", "--out", out, "--tables", tables)
	tt := readTable(t, out)
	routes, vals, folds := tt.col(t, "route"), tt.col(t, "route_tmean"), tt.col(t, "fold")
	inFold := map[string]float64{}
	for i := range routes {
		if routes[i] == "R-NEVER" {
			inFold[folds[i]]++
		}
	}
	for i := range routes {
		v := parseF(t, vals[i])
		if math.IsInf(v, 0) || math.Abs(v) > 30 {
			t.Fatalf("row %d (%s): log-odds %g, want a rate strictly inside (0, 1)", i+2, routes[i], v)
		}
		if routes[i] == "R-NEVER" {
			n := 3000 - inFold[folds[i]]
			if want := math.Log(0.5/(n+1)) - math.Log1p(-0.5/(n+1)); !near(v, want, 1e-9) {
				t.Errorf("row %d: log-odds %.12g, want logit(0.5/(%g+1)) = %.12g", i+2, v, n, want)
			}
		}
	}
	app := filepath.Join(dir, "app.csv")
	mustRun(t, "apply", in, "--tables", tables, "--out", app)
	for i, s := range readTable(t, app).col(t, "route_tmean") {
		if v := parseF(t, s); math.Abs(v) > 30 {
			t.Fatalf("applied row %d: log-odds %g, want a rate strictly inside (0, 1)", i+2, v)
		}
	}
}

// TestHierarchicalM: with target:eb:prior=prefix2 a postcode is pulled towards
// its region's value, so its empirical-Bayes m must measure how postcodes
// spread around their region, not around the global mean. The manifest's m
// is checked against the method-of-moments estimator of the nested
// classification recomputed here from the rows by two passes over level
// and region means: sigma2 = SSW/(N - L), tau2 = (SSB - (L - P) sigma2) /
// sum_p (N_p - sum_{i in p} n_i^2 / N_p), with SSB = sum_i n_i (ybar_i -
// ybar_p(i))^2 (Searle, Casella and McCulloch, Variance Components, 1992,
// from memory; see smooth.NestedMoments). The regions' spread (sd 3) is
// far larger than the postcodes' within a region (sd 0.5), so the old
// estimate around the global mean was about 40 times smaller.
func TestHierarchicalM(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 2))
	const regions, perRegion, rows = 8, 25, 4000
	region := make([]float64, regions)
	code := make([]float64, regions*perRegion)
	for i := range region {
		region[i] = 3 * rng.NormFloat64()
	}
	for i := range code {
		code[i] = region[i/perRegion] + 0.5*rng.NormFloat64()
	}
	var b strings.Builder
	b.WriteString("postcode,cost\n")
	type lev struct{ n, sum float64 }
	ys := map[string][]float64{}
	for i := 0; i < rows; i++ {
		l := rng.IntN(len(code))
		y := math.Round((code[l]+rng.NormFloat64())*1024) / 1024
		pc := fmt.Sprintf("%02d%03d", l/perRegion, l%perRegion)
		ys[pc] = append(ys[pc], y)
		fmt.Fprintf(&b, "%s,%s\n", pc, strconv.FormatFloat(y, 'g', -1, 64))
	}
	dir := t.TempDir()
	in := writeFile(t, dir, "cost.csv", b.String())
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", in, "--target", "cost", "--columns", "postcode", "--methods", "target:eb:prior=prefix2", "--scheme", "none",
		"--out", filepath.Join(dir, "enc.csv"), "--tables", tables)
	mf := readManifest(t, tables)
	enc := mf["columns"].([]any)[0].(map[string]any)["encodings"].([]any)[0].(map[string]any)
	if enc["encoding"] != "target:eb:prior=prefix2" {
		t.Fatalf("manifest columns[0].encodings[0] is %v, want target:eb:prior=prefix2", enc["encoding"])
	}
	got := enc["fit"].(map[string]any)["m"].([]any)[0].(float64)

	// The recomputation, level means first, then sums of squares.
	var N, L, ssw float64
	means := map[string]float64{}
	byRegion := map[string][]string{}
	for pc, v := range ys {
		var s float64
		for _, y := range v {
			s += y
		}
		means[pc] = s / float64(len(v))
		for _, y := range v {
			ssw += (y - means[pc]) * (y - means[pc])
		}
		N += float64(len(v))
		L++
		byRegion[pc[:2]] = append(byRegion[pc[:2]], pc)
	}
	var ssb, coef, df float64
	for _, pcs := range byRegion {
		var np, sp, sq float64
		for _, pc := range pcs {
			n := float64(len(ys[pc]))
			np += n
			sp += n * means[pc]
			sq += n * n
		}
		mp := sp / np
		for _, pc := range pcs {
			ssb += float64(len(ys[pc])) * (means[pc] - mp) * (means[pc] - mp)
		}
		coef += np - sq/np
		df += float64(len(pcs) - 1)
	}
	sigma2 := ssw / (N - L)
	want := sigma2 / ((ssb - df*sigma2) / coef)
	if math.Abs(got-want) > 1e-9*want {
		t.Errorf("manifest m = %.12g, the nested estimator gives %.12g", got, want)
	}
}

// TestLatin1LevelsInTables: a CSV in Latin-1 encodes to CSV (bytes kept as
// they are), and its mapping tables keep the levels' bytes too: a table
// whose levels are not all valid UTF-8 stores them as plain BYTE_ARRAY
// without the STRING annotation, which promises UTF-8 (the Parquet format
// specification, LogicalTypes.md), while a table of valid levels keeps it.
// apply then finds the Latin-1 level again.
func TestLatin1LevelsInTables(t *testing.T) {
	dir := t.TempDir()
	in := writeFile(t, dir, "latin1.csv", "city,route,late\nK\xf6ln,R1,1\nK\xf6ln,R1,0\nBonn,R2,1\nBonn,R2,0\nK\xf6ln,R2,1\n")
	tables := filepath.Join(dir, "tables")
	mustRun(t, "encode", in, "--target", "late", "--columns", "city,route", "--methods", "target:eb+freq", "--folds", "2",
		"--out", filepath.Join(dir, "enc.csv"), "--tables", tables)
	for _, c := range []struct {
		file string
		utf8 bool
	}{{"01-city.parquet", false}, {"02-route.parquet", true}} {
		md := footer(t, filepath.Join(tables, c.file))
		e := md.Schema[1] // the level column
		if e.Name != "level" {
			t.Fatalf("%s: first column %q", c.file, e.Name)
		}
		_, converted := e.ConvertedType.Get()
		annotated := e.LogicalType.Value != nil || converted
		if annotated != c.utf8 {
			t.Errorf("%s: level column annotated as UTF-8 text: %v, want %v", c.file, annotated, c.utf8)
		}
	}
	app := filepath.Join(dir, "app.csv")
	mustRun(t, "apply", in, "--tables", tables, "--out", app)
	tt := readTable(t, app)
	for i, f := range tt.col(t, "city_freq") {
		if want := map[bool]string{true: "3", false: "2"}[i != 2 && i != 3]; f != want {
			t.Errorf("applied row %d: city_freq %s, want %s", i+2, f, want)
		}
	}
}
