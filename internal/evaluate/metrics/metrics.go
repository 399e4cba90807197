// Package metrics scores predictions for manyfold's compare command: binary
// log loss, Brier score and ROC AUC; RMSE, MAE and R² for a numeric target;
// multi-class log loss, accuracy and one-vs-rest AUC; and the mean and
// standard deviation of per-fold scores. AUCCounts and SquaredErrors score
// rows that are not held at once (the drift report of manyfold apply).
//
// Common edge cases, unless a function's comment says otherwise: empty
// input, or two slices of different lengths, gives NaN; a NaN anywhere in the
// input gives NaN. No function panics and none modifies its arguments.
package metrics

import (
	"math"
	"slices"
)

// Eps is the clipping bound of LogLoss and MultiLogLoss: a probability p is
// replaced by min(max(p, Eps), 1-Eps) before its logarithm is taken, so a
// confident wrong prediction costs at most -ln(1e-15) ≈ 34.5 instead of +Inf.
const Eps = 1e-15

// clip bounds p to [Eps, 1-Eps]; NaN stays NaN.
func clip(p float64) float64 {
	if p < Eps {
		return Eps
	}
	if p > 1-Eps {
		return 1 - Eps
	}
	return p
}

// LogLoss returns the binary log loss (cross-entropy)
//
//	-(1/N) Σ [ y_i ln p_i + (1-y_i) ln(1-p_i) ]
//
// of probabilities p of the positive class against labels y in {0, 1}, with
// each p_i clipped to [Eps, 1-Eps] first. The formula is applied as written,
// so a y_i strictly between 0 and 1 is scored as a soft label.
//
// Edge cases: empty input or different lengths give NaN; NaN in y or p gives
// NaN.
func LogLoss(y []float64, p []float64) float64 {
	if len(y) == 0 || len(y) != len(p) {
		return math.NaN()
	}
	var s float64
	for i, yi := range y {
		pi := clip(p[i])
		s += yi*math.Log(pi) + (1-yi)*math.Log(1-pi)
	}
	return -s / float64(len(y))
}

// Brier returns the Brier score (1/N) Σ (p_i - y_i)² of probabilities p of
// the positive class against labels y in {0, 1} (Brier, "Verification of
// forecasts expressed in terms of probability", Monthly Weather Review 78(1),
// 1950; the binary form). p is not clipped.
//
// Edge cases: empty input or different lengths give NaN; NaN gives NaN.
func Brier(y, p []float64) float64 {
	if len(y) == 0 || len(y) != len(p) {
		return math.NaN()
	}
	var s float64
	for i, yi := range y {
		d := p[i] - yi
		s += d * d
	}
	return s / float64(len(y))
}

// scored is one row of an AUC computation: its score and whether it is a
// positive.
type scored struct {
	s   float64
	pos bool
}

// AUC returns the area under the ROC curve of scores against labels y in
// {0, 1}, in the Mann-Whitney form
//
//	AUC = (1/(P·N)) Σ_{i positive} Σ_{j negative} [ 1 if s_i > s_j, 1/2 if s_i = s_j ]
//
// with P positives and N negatives: the probability that a random positive
// outscores a random negative, ties counted one half (Hanley & McNeil, "The
// meaning and use of the area under a receiver operating characteristic
// (ROC) curve", Radiology 143, 1982). It equals the trapezoidal area under
// the empirical ROC curve. The rows are sorted by score once, so the cost is
// O(n log n); the result does not depend on the order of the rows.
//
// Edge cases: NaN when a class is absent (all labels equal, or empty input),
// when the lengths differ, when a label is neither 0 nor 1, or when a score
// or label is NaN. Infinite scores are ordinary values.
func AUC(y, score []float64) float64 {
	if len(y) != len(score) {
		return math.NaN()
	}
	rows := make([]scored, len(y))
	for i, yi := range y {
		if (yi != 0 && yi != 1) || math.IsNaN(score[i]) {
			return math.NaN()
		}
		rows[i] = scored{score[i], yi == 1}
	}
	return aucSorted(rows)
}

// aucSorted sorts rows by score and returns the Mann-Whitney AUC; NaN when a
// class is absent.
func aucSorted(rows []scored) float64 {
	slices.SortFunc(rows, func(a, b scored) int {
		switch {
		case a.s < b.s:
			return -1
		case a.s > b.s:
			return 1
		}
		return 0
	})
	var w mannWhitney
	for i := 0; i < len(rows); {
		j := i
		var p, n float64
		for ; j < len(rows) && rows[j].s == rows[i].s; j++ {
			if rows[j].pos {
				p++
			} else {
				n++
			}
		}
		w.add(p, n)
		i = j
	}
	return w.auc()
}

// mannWhitney counts the wins of AUC's Mann-Whitney form over groups of
// tied scores taken from the lowest score up: each positive of a group
// beats every negative below it and ties half of the group's.
type mannWhitney struct{ wins, below, negs, poss float64 }

// add counts the next group: p positives and n negatives of one score.
func (w *mannWhitney) add(p, n float64) {
	w.wins += p*w.below + 0.5*p*n
	w.below += n
	w.negs += n
	w.poss += p
}

// auc returns the AUC of the groups added; NaN when a class is absent.
func (w *mannWhitney) auc() float64 {
	if w.poss == 0 || w.negs == 0 {
		return math.NaN()
	}
	return w.wins / (w.poss * w.negs)
}

// AUCCounts returns the AUC of AUC for rows given by their distinct
// scores: score[i] is held by pos[i] positive and neg[i] negative rows. It
// equals AUC over the rows themselves, and costs O(k log k) for k
// distinct scores whatever the number of rows, so a caller can count the
// rows of a pass by score and keep only the counts. Equal scores given
// more than once are one group. The counts are exact while the products
// of positives and negatives stay below 2^52.
//
// Edge cases: NaN when the lengths differ, a count is negative or NaN, a
// score is NaN, or a class has no rows.
func AUCCounts(score, pos, neg []float64) float64 {
	if len(score) != len(pos) || len(score) != len(neg) {
		return math.NaN()
	}
	idx := make([]int, len(score))
	for i := range idx {
		if math.IsNaN(score[i]) || !(pos[i] >= 0) || !(neg[i] >= 0) {
			return math.NaN()
		}
		idx[i] = i
	}
	slices.SortFunc(idx, func(a, b int) int {
		switch {
		case score[a] < score[b]:
			return -1
		case score[a] > score[b]:
			return 1
		}
		return 0
	})
	var w mannWhitney
	for i := 0; i < len(idx); {
		j := i
		var p, n float64
		for ; j < len(idx) && score[idx[j]] == score[idx[i]]; j++ {
			p += pos[idx[j]]
			n += neg[idx[j]]
		}
		w.add(p, n)
		i = j
	}
	return w.auc()
}

// RMSE returns the root mean squared error sqrt((1/N) Σ (yhat_i - y_i)²).
//
// Edge cases: empty input or different lengths give NaN; NaN gives NaN.
func RMSE(y, yhat []float64) float64 {
	if len(y) == 0 || len(y) != len(yhat) {
		return math.NaN()
	}
	var s SquaredErrors
	for i, yi := range y {
		s.Add(yi, yhat[i])
	}
	return s.RMSE()
}

// SquaredErrors accumulates the squared errors of RMSE one row at a time,
// for rows that are not held at once (a pass over a file): RMSE returns
// what RMSE over the rows added, in the order added, returns.
type SquaredErrors struct {
	Sum float64 // Σ (yhat_i - y_i)²
	N   int64   // rows added
}

// Add adds the row of target y and prediction yhat.
func (s *SquaredErrors) Add(y, yhat float64) {
	d := yhat - y
	s.Sum += d * d
	s.N++
}

// RMSE returns sqrt(Sum / N); NaN when no row was added.
func (s *SquaredErrors) RMSE() float64 {
	if s.N == 0 {
		return math.NaN()
	}
	return math.Sqrt(s.Sum / float64(s.N))
}

// MAE returns the mean absolute error (1/N) Σ |yhat_i - y_i|.
//
// Edge cases: empty input or different lengths give NaN; NaN gives NaN.
func MAE(y, yhat []float64) float64 {
	if len(y) == 0 || len(y) != len(yhat) {
		return math.NaN()
	}
	var s float64
	for i, yi := range y {
		s += math.Abs(yhat[i] - yi)
	}
	return s / float64(len(y))
}

// R2 returns the coefficient of determination 1 - SS_res/SS_tot, with
// SS_res = Σ (y_i - yhat_i)² and SS_tot = Σ (y_i - ȳ)², ȳ the mean of y.
// It is negative when yhat does worse than predicting ȳ.
//
// Edge cases: NaN when SS_tot == 0 (a constant y, including a single row),
// for empty input or different lengths, and for NaN in the input.
func R2(y, yhat []float64) float64 {
	if len(y) == 0 || len(y) != len(yhat) {
		return math.NaN()
	}
	mean, _ := MeanStd(y)
	var res, tot float64
	for i, yi := range y {
		d := yi - yhat[i]
		res += d * d
		e := yi - mean
		tot += e * e
	}
	if tot == 0 || math.IsNaN(tot) || math.IsNaN(res) {
		return math.NaN()
	}
	return 1 - res/tot
}

// checkMulti reports whether y and p are a well-formed multi-class input:
// equal non-zero lengths, every p[i] of the same length K >= 1, every label
// in [0, K). It returns K.
func checkMulti(y []int, p [][]float64) (int, bool) {
	if len(y) == 0 || len(y) != len(p) {
		return 0, false
	}
	k := len(p[0])
	if k == 0 {
		return 0, false
	}
	for i, yi := range y {
		if len(p[i]) != k || yi < 0 || yi >= k {
			return 0, false
		}
	}
	return k, true
}

// MultiLogLoss returns the multi-class log loss -(1/N) Σ ln p[i][y_i] of
// class probabilities p[i][c] against labels y_i in [0, K), each
// probability clipped to [Eps, 1-Eps] first. The rows of p are not
// renormalised.
//
// Edge cases: NaN for empty input, different lengths, rows of p of unequal
// or zero length, a label outside [0, K), or a NaN probability of a true
// class.
func MultiLogLoss(y []int, p [][]float64) float64 {
	if _, ok := checkMulti(y, p); !ok {
		return math.NaN()
	}
	var s float64
	for i, yi := range y {
		s += math.Log(clip(p[i][yi]))
	}
	return -s / float64(len(y))
}

// Accuracy returns the share of rows whose most probable class, argmax_c
// p[i][c], equals y_i; a tie goes to the lowest class index.
//
// Edge cases: NaN for empty input, different lengths, rows of p of unequal
// or zero length, a label outside [0, K), or any NaN probability.
func Accuracy(y []int, p [][]float64) float64 {
	if _, ok := checkMulti(y, p); !ok {
		return math.NaN()
	}
	var hits int
	for i, yi := range y {
		best := 0
		for c, v := range p[i] {
			if math.IsNaN(v) {
				return math.NaN()
			}
			if v > p[i][best] {
				best = c
			}
		}
		if best == yi {
			hits++
		}
	}
	return float64(hits) / float64(len(y))
}

// MeanOvRAUC returns the unweighted mean, over the classes c present in y,
// of the one-vs-rest AUC of score p[i][c] for "y_i == c" against "y_i != c"
// (each the Mann-Whitney AUC of AUC). Classes that no row has are skipped.
//
// Edge cases: NaN when fewer than two classes are present (the one-vs-rest
// AUC of the only class has no negatives), for empty input, different
// lengths, rows of p of unequal or zero length, a label outside [0, K), or a
// NaN probability.
func MeanOvRAUC(y []int, p [][]float64) float64 {
	k, ok := checkMulti(y, p)
	if !ok {
		return math.NaN()
	}
	count := make([]int, k)
	for _, yi := range y {
		count[yi]++
	}
	rows := make([]scored, len(y))
	var sum float64
	var present int
	for c := range k {
		if count[c] == 0 {
			continue
		}
		for i, yi := range y {
			v := p[i][c]
			if math.IsNaN(v) {
				return math.NaN()
			}
			rows[i] = scored{v, yi == c}
		}
		sum += aucSorted(rows)
		present++
	}
	if present < 2 {
		return math.NaN()
	}
	return sum / float64(present)
}

// MeanStd returns the mean (1/n) Σ x_i and the sample standard deviation
// sqrt(Σ (x_i - mean)² / (n-1)) of xs, computed in two passes.
//
// Edge cases: empty input gives (NaN, NaN); a single value x gives (x, 0);
// NaN in xs gives NaN for both.
func MeanStd(xs []float64) (mean, std float64) {
	n := len(xs)
	if n == 0 {
		return math.NaN(), math.NaN()
	}
	for _, x := range xs {
		mean += x
	}
	mean /= float64(n)
	if n == 1 {
		if math.IsNaN(mean) {
			return mean, mean
		}
		return mean, 0
	}
	var ss float64
	for _, x := range xs {
		d := x - mean
		ss += d * d
	}
	return mean, math.Sqrt(ss / float64(n-1))
}
