package linear

import (
	"fmt"
	"testing"
)

// BenchmarkFitLogistic1M fits a logistic regression on 1e6 rows of 3 dense
// standardised features and 3 categorical columns of 1000 levels each
// (3000 indicator columns, one active per column per row), generated
// before the timed loop. It reports the solver's iterations and objective
// evaluations per fit.
//
//	go test ./internal/evaluate/linear -run '^$' -bench FitLogistic1M -benchtime 1x
func BenchmarkFitLogistic1M(b *testing.B) {
	d, z := standardised(1, 1_000_000, 3, []int{1000, 1000, 1000})
	y := binaryTargets(1, z)
	for _, lambda := range []float64{1e-3, 1e-4, 1e-5} {
		b.Run(fmt.Sprintf("lambda=%g", lambda), func(b *testing.B) {
			var res result
			for b.Loop() {
				var err error
				if _, res, err = fitLogistic(d, y, lambda, Options{}); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(res.iters), "iters")
			b.ReportMetric(float64(res.evals), "evals")
		})
	}
}
