// Package linear fits the deterministic linear models behind manyfold's
// compare command: L2-regularised binary logistic regression, multinomial
// (softmax) regression and ridge regression, on a design of a few dense,
// standardised features plus many sparse one-hot indicator columns.
//
// Every fit minimises
//
//	(1/n) Σ_i loss_i(w, b) + (λ/2) ||w||²
//
// over the feature weights w and the unpenalised intercept b, starting from
// zero, with the L-BFGS solver of this package (see Options). The fits use
// one goroutine and a fixed order of every sum, so the same design, targets
// and options give bit-identical weights on every run (on one platform: the
// standard library's exp may be assembly on one architecture and Go code on
// another, and differ in the last bit).
package linear

import (
	"fmt"
	"math"
)

// Design is a feature matrix of Rows rows: NDense dense features stored
// row-major in Dense (row r is Dense[r*NDense : (r+1)*NDense]), and NInd
// indicator columns stored in compressed-row form, each active indicator
// having the value 1: row r's active columns are IndCol[IndPtr[r]:IndPtr[r+1]],
// each in [0, NInd). IndPtr is either nil (no active indicator at all) or
// has Rows+1 non-decreasing entries from 0 to len(IndCol). A column listed
// twice in a row counts twice.
type Design struct {
	Rows, NDense, NInd int
	Dense              []float64
	IndPtr             []int
	IndCol             []int32
}

// Validate reports the first inconsistency of d's shape: a length of Dense
// other than Rows*NDense, a malformed IndPtr, or an indicator column outside
// [0, NInd). It does not look at the dense values.
func (d *Design) Validate() error {
	if d.Rows < 0 || d.NDense < 0 || d.NInd < 0 {
		return fmt.Errorf("linear: design has negative size (rows %d, dense %d, indicators %d)", d.Rows, d.NDense, d.NInd)
	}
	if len(d.Dense) != d.Rows*d.NDense {
		return fmt.Errorf("linear: design has %d dense values, want rows*dense = %d*%d", len(d.Dense), d.Rows, d.NDense)
	}
	if d.IndPtr == nil {
		if len(d.IndCol) != 0 {
			return fmt.Errorf("linear: design has %d indicator entries but no IndPtr", len(d.IndCol))
		}
		return nil
	}
	if len(d.IndPtr) != d.Rows+1 {
		return fmt.Errorf("linear: design IndPtr has %d entries, want rows+1 = %d", len(d.IndPtr), d.Rows+1)
	}
	if d.IndPtr[0] != 0 || d.IndPtr[d.Rows] != len(d.IndCol) {
		return fmt.Errorf("linear: design IndPtr runs from %d to %d, want 0 to %d", d.IndPtr[0], d.IndPtr[d.Rows], len(d.IndCol))
	}
	for r := range d.Rows {
		if d.IndPtr[r+1] < d.IndPtr[r] {
			return fmt.Errorf("linear: design row %d: IndPtr decreases from %d to %d", r, d.IndPtr[r], d.IndPtr[r+1])
		}
		for _, c := range d.IndCol[d.IndPtr[r]:d.IndPtr[r+1]] {
			if c < 0 || int(c) >= d.NInd {
				return fmt.Errorf("linear: design row %d: indicator column %d outside [0, %d)", r, c, d.NInd)
			}
		}
	}
	return nil
}

// dense returns row r's dense features.
func (d *Design) dense(r int) []float64 {
	return d.Dense[r*d.NDense : (r+1)*d.NDense]
}

// ind returns row r's active indicator columns.
func (d *Design) ind(r int) []int32 {
	if d.IndPtr == nil {
		return nil
	}
	return d.IndCol[d.IndPtr[r]:d.IndPtr[r+1]]
}

// checkFinite returns an error naming the first non-finite dense value.
func (d *Design) checkFinite() error {
	for i, v := range d.Dense {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("linear: design row %d: dense feature %d is %v", i/d.NDense, i%d.NDense, v)
		}
	}
	return nil
}

// Standardizer centres and scales the dense features of a design:
// x -> (x - Mean[j]) / Std[j] for feature j. Indicator columns are left as
// they are.
type Standardizer struct{ Mean, Std []float64 }

// FitStandardizer returns the mean and population standard deviation
// sqrt((1/n) Σ (x - mean)²) of each dense feature of d, meant to be fitted on
// training rows and applied to both training and held-out rows. The mean is
// computed as x_0 + (1/n) Σ (x_i - x_0), so a constant column gets exactly
// its value as mean and a standard deviation of exactly 0.
//
// Edge cases: a feature with standard deviation 0 (a constant column, or a
// single row) gets Std 1, so applying the standardizer maps it to 0 rather
// than dividing by zero; a design of no rows gives Mean 0 and Std 1 for
// every feature; a NaN or infinite value gives that feature a NaN Mean and
// Std, which Apply then spreads to every row (and a Fit rejects).
func FitStandardizer(d *Design) Standardizer {
	s := Standardizer{Mean: make([]float64, d.NDense), Std: make([]float64, d.NDense)}
	n := float64(d.Rows)
	for j := range d.NDense {
		if d.Rows == 0 {
			s.Std[j] = 1
			continue
		}
		x0 := d.Dense[j]
		var sum float64
		for r := range d.Rows {
			sum += d.Dense[r*d.NDense+j] - x0
		}
		mean := x0 + sum/n
		var ss float64
		for r := range d.Rows {
			v := d.Dense[r*d.NDense+j] - mean
			ss += v * v
		}
		std := math.Sqrt(ss / n)
		if math.IsInf(x0, 0) || math.IsInf(std, 0) || math.IsNaN(std) {
			mean, std = math.NaN(), math.NaN()
		}
		if std == 0 {
			std = 1
		}
		s.Mean[j], s.Std[j] = mean, std
	}
	return s
}

// Apply standardises d's dense features in place. It panics if d.NDense
// differs from the number of features s was fitted on, a programming error.
func (s Standardizer) Apply(d *Design) {
	if d.NDense != len(s.Mean) || d.NDense != len(s.Std) {
		panic(fmt.Sprintf("linear: standardizer fitted on %d features applied to a design of %d", len(s.Mean), d.NDense))
	}
	for r := range d.Rows {
		x := d.dense(r)
		for j := range x {
			x[j] = (x[j] - s.Mean[j]) / s.Std[j]
		}
	}
}
