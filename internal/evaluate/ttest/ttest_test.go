package ttest

import (
	"fmt"
	"math"
	"testing"
)

// TestCDF checks Student's t distribution against closed forms and
// published table values.
func TestCDF(t *testing.T) {
	cases := []struct {
		t    float64
		df   int
		want float64
		tol  float64
		src  string
	}{
		// df = 1 is the Cauchy distribution: CDF(t) = 1/2 + atan(t)/pi.
		{1, 1, 0.75, 1e-13, "Cauchy closed form"},
		{-3, 1, 0.5 + math.Atan(-3)/math.Pi, 1e-13, "Cauchy closed form"},
		// df = 2: CDF(t) = 1/2 + t / (2 sqrt(t^2 + 2)).
		{1.5, 2, 0.5 + 1.5/(2*math.Sqrt(1.5*1.5+2)), 1e-13, "df = 2 closed form"},
		// Upper critical values of Student's t (two-sided 0.05, so
		// CDF = 0.975), as printed in standard tables (from memory; also
		// Abramowitz and Stegun, table 26.10): df 4: 2.776, df 9: 2.262,
		// df 29: 2.045; one-sided 0.05 at df 4: 2.132.
		{2.776445, 4, 0.975, 1e-6, "t table"},
		{2.262157, 9, 0.975, 1e-6, "t table"},
		{2.045230, 29, 0.975, 1e-6, "t table"},
		{2.131847, 4, 0.95, 1e-6, "t table"},
		{0, 7, 0.5, 1e-15, "symmetry"},
	}
	for _, c := range cases {
		if got := CDF(c.t, c.df); math.Abs(got-c.want) > c.tol {
			t.Errorf("CDF(%g, %d) = %.15g, want %.15g (%s)", c.t, c.df, got, c.want, c.src)
		}
	}
	if q := Quantile(0.975, 4); math.Abs(q-2.776445) > 1e-5 {
		t.Errorf("Quantile(0.975, 4) = %g, want 2.776445 (t table)", q)
	}
	if q := Quantile(0.025, 4); math.Abs(q+2.776445) > 1e-5 {
		t.Errorf("Quantile(0.025, 4) = %g, want -2.776445", q)
	}
}

// TestCorrected checks the statistic on a worked example computed by hand
// from the formula: d = (1, 2, 3, 4, 5), J = 5, testShare 1/4 (5-fold):
// mean 3, s^2 = 10/4 = 2.5, SE = sqrt((1/5 + 1/4) * 2.5) = sqrt(1.125) =
// 1.0606601717798212, t = 3/1.0606601717798212 = 2.8284271247461903,
// df 4.
func TestCorrected(t *testing.T) {
	a := []float64{2, 4, 6, 8, 10}
	b := []float64{1, 2, 3, 4, 5}
	r := Corrected(a, b, 0.25, 0.05)
	if math.Abs(r.Diff-3) > 1e-15 || math.Abs(r.SE-1.0606601717798212) > 1e-15 || math.Abs(r.T-2.8284271247461903) > 1e-14 || r.DF != 4 {
		t.Errorf("got %+v", r)
	}
	// p = 2 (1 - CDF(2.828, 4)), between the table's 0.05 (t 2.776) and
	// 0.04; the interval 3 ± 2.776445 * 1.06066.
	if !(r.P < 0.05 && r.P > 0.04) {
		t.Errorf("p = %g, want between 0.04 and 0.05", r.P)
	}
	if math.Abs(r.Low-(3-2.776445*1.0606601717798212)) > 1e-5 || math.Abs(r.Hi-(3+2.776445*1.0606601717798212)) > 1e-5 {
		t.Errorf("interval [%g, %g]", r.Low, r.Hi)
	}
	for _, c := range []struct {
		name  string
		a, b  []float64
		check func(Result) bool
	}{
		{"identical", []float64{1, 2}, []float64{1, 2}, func(r Result) bool { return r.Identical && r.P == 1 && r.T == 0 }},
		{"constant gain", []float64{2, 3, 4}, []float64{1, 2, 3}, func(r Result) bool { return !r.Identical && r.P == 0 && math.IsInf(r.T, 1) }},
		{"one fold", []float64{1}, []float64{0}, func(r Result) bool { return math.IsNaN(r.P) }},
		{"NaN left out", []float64{1, math.NaN(), 3, 5}, []float64{0, 0, 1, 2}, func(r Result) bool { return r.DF == 2 }},
	} {
		if r := Corrected(c.a, c.b, 0.25, 0.05); !c.check(r) {
			t.Errorf("%s: %+v", c.name, r)
		}
	}
}

func ExampleCorrected() {
	// Held-out AUC of two encodings on the same five outer folds. By hand:
	// d = (0.01, 0, 0.02, 0.01, 0.01), mean 0.01, s^2 = 0.0002/4 =
	// 0.00005, SE = sqrt((1/5 + 1/4) * 0.00005) = 0.004743, t = 2.108,
	// just under the one-sided 5% point of t with 4 degrees of freedom
	// (2.132), so a two-sided p just above 0.10; the interval 0.01 ±
	// 2.776 * 0.004743.
	a := []float64{0.71, 0.69, 0.72, 0.70, 0.71}
	b := []float64{0.70, 0.69, 0.70, 0.69, 0.70}
	r := Corrected(a, b, 1.0/4, 0.05)
	fmt.Printf("gain %.3f, 95%% interval [%.3f, %.3f], p %.2f\n", r.Diff, r.Low, r.Hi, r.P)
	// Output: gain 0.010, 95% interval [-0.003, 0.023], p 0.10
}
