// Package ttest compares two learners scored on the same cross-validation
// folds: the corrected resampled t-test of Nadeau and Bengio ("Inference for
// the Generalization Error", Machine Learning 52(3), 239-281, 2003), and the
// Student t distribution it needs.
//
// The folds' scores are not independent (every training set shares most of
// its rows with the others), so the plain paired t-test, which divides the
// variance of the differences by the number of folds J, is far too
// confident. Nadeau and Bengio's correction replaces 1/J by 1/J + n2/n1,
// n2 and n1 the held-out and training rows of a fold (1/(k-1) for k-fold
// cross-validation): the statistic t = mean(d) / sqrt((1/J + n2/n1) s^2),
// s^2 the sample variance of the J differences, is referred to Student's t
// with J - 1 degrees of freedom.
package ttest

import (
	"math"
)

// Result is a paired comparison of A against B over J folds.
type Result struct {
	Diff      float64 // mean of the differences d_j = a_j - b_j
	SE        float64 // corrected standard error sqrt((1/J + n2/n1) s^2)
	DF        int     // J - 1
	T         float64 // Diff / SE (±Inf when SE is 0 and Diff is not; 0 when both are)
	P         float64 // two-sided p-value: 2 P(T_df > |t|)
	Low, Hi   float64 // the two-sided (1 - level) interval of the mean difference
	Identical bool    // every d_j is 0: the two learners scored the same on every fold
}

// Corrected returns the corrected resampled t-test of a against b (paired
// scores over the same folds; a larger difference means A is larger),
// with testShare the ratio n2/n1 of held-out to training rows of a fold
// and level the interval's two-sided level (0.05 for a 95% interval).
//
// Edge cases: fewer than two folds give a NaN statistic, p-value and
// interval; differences that are all equal and not 0 have s^2 = 0, an
// infinite t and p = 0 (the interval is the point Diff); all 0 is
// Identical, t = 0 and p = 1. NaN scores are left out in pairs.
func Corrected(a, b []float64, testShare, level float64) Result {
	var d []float64
	for j := range a {
		if j < len(b) && !math.IsNaN(a[j]) && !math.IsNaN(b[j]) {
			d = append(d, a[j]-b[j])
		}
	}
	r := Result{DF: len(d) - 1}
	if len(d) < 2 {
		r.Diff, r.SE, r.T, r.P, r.Low, r.Hi = math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()
		return r
	}
	J := float64(len(d))
	for _, x := range d {
		r.Diff += x
	}
	r.Diff /= J
	var ss float64
	r.Identical = true
	for _, x := range d {
		ss += (x - r.Diff) * (x - r.Diff)
		if x != 0 {
			r.Identical = false
		}
	}
	s2 := ss / (J - 1)
	r.SE = math.Sqrt((1/J + testShare) * s2)
	switch {
	case r.SE > 0:
		r.T = r.Diff / r.SE
		r.P = 2 * (1 - CDF(math.Abs(r.T), r.DF))
	case r.Diff == 0:
		r.T, r.P = 0, 1
	default:
		r.T, r.P = math.Inf(int(math.Copysign(1, r.Diff))), 0
	}
	q := Quantile(1-level/2, r.DF)
	r.Low, r.Hi = r.Diff-q*r.SE, r.Diff+q*r.SE
	return r
}

// CDF returns P(T <= t) for Student's t with df degrees of freedom: for
// t >= 0, 1 - I_x(df/2, 1/2)/2 with x = df/(df + t^2), I the regularized
// incomplete beta function (Abramowitz and Stegun, Handbook of
// Mathematical Functions, 26.7.1 and 26.5.27); by symmetry below 0.
func CDF(t float64, df int) float64 {
	if math.IsNaN(t) || df < 1 {
		return math.NaN()
	}
	if math.IsInf(t, 0) {
		if t > 0 {
			return 1
		}
		return 0
	}
	v := float64(df)
	tail := 0.5 * betaReg(v/(v+t*t), v/2, 0.5)
	if t >= 0 {
		return 1 - tail
	}
	return tail
}

// Quantile returns the t with CDF(t, df) = p, by bisection (to 1e-12).
func Quantile(p float64, df int) float64 {
	if !(p > 0 && p < 1) || df < 1 {
		return math.NaN()
	}
	if p < 0.5 {
		return -Quantile(1-p, df)
	}
	lo, hi := 0.0, 1.0
	for CDF(hi, df) < p {
		hi *= 2
	}
	for hi-lo > 1e-12*math.Max(1, hi) {
		mid := (lo + hi) / 2
		if CDF(mid, df) < p {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

// betaReg is the regularized incomplete beta function I_x(a, b), by its
// continued fraction (Abramowitz and Stegun 26.5.8) evaluated with the
// modified Lentz method, on the side where it converges fast (x below
// (a+1)/(a+b+2), else through I_x(a,b) = 1 - I_{1-x}(b,a)).
func betaReg(x, a, b float64) float64 {
	switch {
	case x <= 0:
		return 0
	case x >= 1:
		return 1
	}
	lbeta, _ := math.Lgamma(a)
	lb, _ := math.Lgamma(b)
	lab, _ := math.Lgamma(a + b)
	front := math.Exp(math.Log(x)*a + math.Log(1-x)*b - (lbeta + lb - lab))
	if x > (a+1)/(a+b+2) {
		return 1 - front*betaCF(1-x, b, a)/b
	}
	return front * betaCF(x, a, b) / a
}

// betaCF is the continued fraction of the incomplete beta function.
func betaCF(x, a, b float64) float64 {
	const tiny = 1e-300
	c, d := 1.0, 1-(a+b)*x/(a+1)
	if math.Abs(d) < tiny {
		d = tiny
	}
	d = 1 / d
	h := d
	// step takes one term num of the fraction and returns the factor it
	// multiplies h by.
	step := func(num float64) float64 {
		d = 1 + num*d
		if math.Abs(d) < tiny {
			d = tiny
		}
		c = 1 + num/c
		if math.Abs(c) < tiny {
			c = tiny
		}
		d = 1 / d
		return d * c
	}
	for m := 1; m <= 300; m++ {
		fm := float64(m)
		h *= step(fm * (b - fm) * x / ((a + 2*fm - 1) * (a + 2*fm)))              // even term
		del := step(-(a + fm) * (a + b + fm) * x / ((a + 2*fm) * (a + 2*fm + 1))) // odd term
		h *= del
		if math.Abs(del-1) < 1e-15 {
			break
		}
	}
	return h
}
