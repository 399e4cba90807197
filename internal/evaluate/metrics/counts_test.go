package metrics

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestAUCCounts checks AUCCounts against AUC over the rows the counts
// stand for: the reference check of encoding-math.md (ratings 1..5 with
// negatives 30,19,8,2,1 and positives 5,6,5,12,22: 1291/1500, Hanley and
// McNeil's example) and random counts with repeated and signed-zero
// scores, which are one group.
func TestAUCCounts(t *testing.T) {
	score := []float64{1, 2, 3, 4, 5}
	pos := []float64{5, 6, 5, 12, 22}
	neg := []float64{30, 19, 8, 2, 1}
	if got, want := AUCCounts(score, pos, neg), 1291.0/1500; math.Abs(got-want) > 1e-15 {
		t.Errorf("ratings example: AUCCounts %.17g, want %.17g", got, want)
	}
	r := rand.New(rand.NewPCG(3, 5))
	for trial := range 100 {
		k := 1 + r.IntN(12)
		var sc, p, n, y, s []float64
		for range k {
			v := float64(r.IntN(6)) / 2
			if v == 0 && r.IntN(2) == 0 {
				v = math.Copysign(0, -1)
			}
			pi, ni := float64(r.IntN(4)), float64(r.IntN(4))
			sc, p, n = append(sc, v), append(p, pi), append(n, ni)
			for range int(pi) {
				y, s = append(y, 1), append(s, v)
			}
			for range int(ni) {
				y, s = append(y, 0), append(s, v)
			}
		}
		got, want := AUCCounts(sc, p, n), AUC(y, s)
		if !(math.Abs(got-want) <= 1e-12) && !(math.IsNaN(got) && math.IsNaN(want)) {
			t.Fatalf("trial %d: AUCCounts %.17g, AUC over the rows %.17g", trial, got, want)
		}
	}
	for name, c := range map[string][3][]float64{
		"lengths":   {{1, 2}, {1}, {1, 1}},
		"negative":  {{1, 2}, {1, -1}, {1, 1}},
		"NaN score": {{1, math.NaN()}, {1, 1}, {1, 1}},
		"one class": {{1, 2}, {1, 1}, {0, 0}},
		"empty":     {nil, nil, nil},
	} {
		if got := AUCCounts(c[0], c[1], c[2]); !math.IsNaN(got) {
			t.Errorf("%s: AUCCounts %g, want NaN", name, got)
		}
	}
}

// TestSquaredErrors checks the accumulator against RMSE and the reference
// check of encoding-math.md (y=[3,5,2.5], yhat=[2.5,5,4]).
func TestSquaredErrors(t *testing.T) {
	var s SquaredErrors
	if !math.IsNaN(s.RMSE()) {
		t.Errorf("no rows: RMSE %g, want NaN", s.RMSE())
	}
	y, yhat := []float64{3, 5, 2.5}, []float64{2.5, 5, 4}
	for i := range y {
		s.Add(y[i], yhat[i])
	}
	if got, want := s.RMSE(), 0.9128709291752769; got != want {
		t.Errorf("RMSE %.17g, want %.17g", got, want)
	}
	if got := RMSE(y, yhat); got != s.RMSE() {
		t.Errorf("RMSE over the slices %.17g, accumulated %.17g", got, s.RMSE())
	}
}
