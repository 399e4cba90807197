package compare

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"testing"

	"manyfold/folds"
)

// TestCombinationAgainstIndependentModel: the score of a combination
// candidate, target:m=5+freq (one model over both encodings' columns), is
// recomputed in the test from the raw rows with none of the package's
// encoding, design or model code: for each outer fold the two features are
// computed from the formulas (the m-estimate (s + m p)/(n + m) of a
// training row over the cells of neither its outer fold nor its inner
// fold, of a held-out row over every cell of the other outer folds; the
// level's row count among the outer training rows), standardised by the
// training rows' mean and population standard deviation, an L2 logistic
// regression fitted by Newton's method to the objective linear.FitLogistic
// states ((1/n) Σ log(1+e^z) - y z + (λ/2)||w||², the intercept free), and
// the held-out AUC computed by the Mann-Whitney statistic (ties counting
// one half). The folds are compare's (folds.Row of the row number, the
// inner ones with the salted seed): the design is the same, the code is
// not.
func TestCombinationAgainstIndependentModel(t *testing.T) {
	const rows, ko, ki, m = 900, 3, 3, 5.0
	rng := splitmix64(77)
	type row struct {
		level string
		y     float64
	}
	var data []row
	var b strings.Builder
	b.WriteString("late,route\n")
	for i := 0; i < rows; i++ {
		l := int(rng.next() % 25)
		p := 0.15 + 0.03*float64(l%10) // rates 0.15 to 0.42 by level
		y := 0.0
		if float64(rng.next()>>11)/(1<<53) < p {
			y = 1
		}
		data = append(data, row{fmt.Sprintf("R%02d", l), y})
		fmt.Fprintf(&b, "%d,R%02d\n", int(y), l)
	}
	const seed = 3
	cands, _ := ParseCandidates("prior,target:m=5+freq")
	res, err := Run(csvReader(t, b.String()), Options{Target: "late", Columns: []string{"route"}, Candidates: cands,
		Folds: ko, InnerFolds: ki, Seed: seed, NoTimings: true})
	if err != nil {
		t.Fatal(err)
	}
	got := find(t, res.Columns[0], "target:m=5+freq").PerFold

	outer := make([]int, rows)
	inner := make([]int, rows)
	for i := range data {
		outer[i] = folds.Row(seed, uint64(i), ko)
		inner[i] = folds.Row(seed^innerSalt, uint64(i), ki)
	}
	// mest is the m-estimate of level l over the rows with use(i).
	mest := func(l string, use func(i int) bool) float64 {
		var n, s, N, S float64
		for i, r := range data {
			if !use(i) {
				continue
			}
			N++
			S += r.y
			if r.level == l {
				n++
				s += r.y
			}
		}
		p := S / N
		return (s + m*p) / (n + m)
	}
	for f := 0; f < ko; f++ {
		var xtr, xte [][2]float64
		var ytr, yte []float64
		count := map[string]float64{}
		for i, r := range data {
			if outer[i] != f {
				count[r.level]++
			}
		}
		for i, r := range data {
			if outer[i] != f {
				g := inner[i]
				xtr = append(xtr, [2]float64{mest(r.level, func(k int) bool { return outer[k] != f && inner[k] != g }), count[r.level]})
				ytr = append(ytr, r.y)
			} else {
				xte = append(xte, [2]float64{mest(r.level, func(k int) bool { return outer[k] != f }), count[r.level]})
				yte = append(yte, r.y)
			}
		}
		// Standardise by the training rows (population sd).
		for j := 0; j < 2; j++ {
			var mean, ss float64
			for _, x := range xtr {
				mean += x[j]
			}
			mean /= float64(len(xtr))
			for _, x := range xtr {
				ss += (x[j] - mean) * (x[j] - mean)
			}
			sd := math.Sqrt(ss / float64(len(xtr)))
			for _, xs := range [][][2]float64{xtr, xte} {
				for k := range xs {
					xs[k][j] = (xs[k][j] - mean) / sd
				}
			}
		}
		w := newtonLogistic(xtr, ytr, DefaultLambda)
		score := make([]float64, len(xte))
		for k, x := range xte {
			score[k] = w[0] + w[1]*x[0] + w[2]*x[1]
		}
		want := mannWhitneyAUC(yte, score)
		if math.Abs(got[f]-want) > 1e-6 {
			t.Errorf("outer fold %d: compare's AUC %.6f, the independent model's %.6f", f+1, got[f], want)
		}
		t.Logf("outer fold %d: AUC %.6f (compare) %.6f (independent)", f+1, got[f], want)
	}
}

// newtonLogistic minimises (1/n) Σ log(1+e^z) - y z + (λ/2)(w1² + w2²),
// z = w0 + w1 x1 + w2 x2, by Newton's method on the 3x3 system.
func newtonLogistic(x [][2]float64, y []float64, lambda float64) [3]float64 {
	var w [3]float64
	n := float64(len(x))
	for iter := 0; iter < 100; iter++ {
		var g [3]float64
		var h [3][3]float64
		for i, xi := range x {
			v := [3]float64{1, xi[0], xi[1]}
			z := w[0] + w[1]*xi[0] + w[2]*xi[1]
			p := 1 / (1 + math.Exp(-z))
			for a := 0; a < 3; a++ {
				g[a] += (p - y[i]) * v[a] / n
				for c := 0; c < 3; c++ {
					h[a][c] += p * (1 - p) * v[a] * v[c] / n
				}
			}
		}
		for a := 1; a < 3; a++ {
			g[a] += lambda * w[a]
			h[a][a] += lambda
		}
		step := solve3(h, g)
		for a := range w {
			w[a] -= step[a]
		}
		if math.Abs(step[0])+math.Abs(step[1])+math.Abs(step[2]) < 1e-13 {
			break
		}
	}
	return w
}

// solve3 solves h s = g by Cramer's rule.
func solve3(h [3][3]float64, g [3]float64) [3]float64 {
	det := func(m [3][3]float64) float64 {
		return m[0][0]*(m[1][1]*m[2][2]-m[1][2]*m[2][1]) - m[0][1]*(m[1][0]*m[2][2]-m[1][2]*m[2][0]) + m[0][2]*(m[1][0]*m[2][1]-m[1][1]*m[2][0])
	}
	d := det(h)
	var s [3]float64
	for c := 0; c < 3; c++ {
		m := h
		for r := 0; r < 3; r++ {
			m[r][c] = g[r]
		}
		s[c] = det(m) / d
	}
	return s
}

// mannWhitneyAUC is the probability that a positive row scores above a
// negative one, ties counting one half.
func mannWhitneyAUC(y, score []float64) float64 {
	idx := make([]int, len(y))
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return score[idx[a]] < score[idx[b]] })
	var pos, neg, rankSum float64
	for k := 0; k < len(idx); {
		e := k
		for e < len(idx) && score[idx[e]] == score[idx[k]] {
			e++
		}
		avg := float64(k+e+1) / 2 // ranks k+1..e
		for _, i := range idx[k:e] {
			if y[i] == 1 {
				rankSum += avg
				pos++
			} else {
				neg++
			}
		}
		k = e
	}
	return (rankSum - pos*(pos+1)/2) / (pos * neg)
}
