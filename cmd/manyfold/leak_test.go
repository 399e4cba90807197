package main

import (
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"manyfold/encoders/metrics"
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
		"--folds", strconv.Itoa(k), "--smoothing", "m=1", "--fold-column", "fold", "--seed", "3",
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
