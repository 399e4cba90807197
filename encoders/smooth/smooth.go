// Package smooth holds the shrinkage formulas behind manyfold's smoothed
// target means: the m-estimate, the sigmoid blend, an empirical-Bayes
// estimate of the shrinkage strength, and the log-odds transform.
//
// Every function works on sufficient statistics of one level (rows n, sum of
// the target) and a prior (the mean target of the rows the statistics were
// fitted on). None of them panics; NaN arguments propagate to a NaN result
// unless a documented edge case returns the prior first.
package smooth

import (
	"math"

	"manyfold/encoders/exactsum"
)

// MEstimate returns the m-estimate (sum + m*prior) / (n + m) of a level with n
// rows whose targets add up to sum: the level mean shrunk towards prior with
// the weight of m pseudo-rows (Cestnik, "Estimating probabilities: a crucial
// task in machine learning", ECAI 1990).
//
// Edge cases: n+m == 0 (an unseen level with m = 0) gives prior; m = +Inf
// (for instance from EstimateM when the levels show no between-level
// variance) gives prior for every level, including n = 0; otherwise NaN in
// any argument gives NaN. m is meant to be >= 0.
func MEstimate(sum, n, m, prior float64) float64 {
	if math.IsInf(m, 1) || n+m == 0 {
		return prior
	}
	return (sum + m*prior) / (n + m)
}

// BlendWeight returns the weight lambda(n) = 1 / (1 + exp(-(n-k)/f)) that the
// sigmoid blend gives to the mean of a level with n rows (Micci-Barreca, "A
// preprocessing scheme for high-cardinality categorical attributes in
// classification and prediction problems", SIGKDD Explorations 3(1), 2001).
// k is the row count at which the level mean and the prior weigh equally and
// f how gradually the weight moves from 0 to 1.
//
// Edge cases: f <= 0 is the limit f -> 0+, a step function: 1 when n > k, 0
// when n < k and 1/2 when n == k. f = +Inf gives 1/2 for finite n and k. NaN
// in any argument gives NaN.
func BlendWeight(n, k, f float64) float64 {
	if math.IsNaN(n) || math.IsNaN(k) || math.IsNaN(f) {
		return math.NaN()
	}
	if f <= 0 {
		switch {
		case n > k:
			return 1
		case n < k:
			return 0
		default:
			return 0.5
		}
	}
	// exp overflows to +Inf for very negative (n-k)/f, giving weight 0.
	return 1 / (1 + math.Exp(-(n-k)/f))
}

// Blend returns lambda*sum/n + (1-lambda)*prior with lambda = BlendWeight(n,
// k, f): the sigmoid blend of a level's mean with the prior (Micci-Barreca,
// SIGKDD Explorations 3(1), 2001).
//
// Edge cases: n == 0 (an unseen level) gives prior; a weight of exactly 0 or 1
// gives prior or the level mean alone (so the other term cannot turn the
// result into NaN through 0*Inf); otherwise NaN in any argument gives NaN.
func Blend(sum, n, k, f, prior float64) float64 {
	if n == 0 {
		return prior
	}
	lambda := BlendWeight(n, k, f)
	switch lambda {
	case 0:
		return prior
	case 1:
		return sum / n
	}
	return lambda*(sum/n) + (1-lambda)*prior
}

// LevelStats are the sufficient statistics of one level: N rows, Sum of the
// target and SumSq, the sum of the squared target. For a binary 0/1 target
// SumSq == Sum.
type LevelStats struct{ N, Sum, SumSq float64 }

// FallbackM is the shrinkage EstimateM returns when the data cannot separate
// the within-level from the between-level variance: fewer than two levels
// with rows, or no level with two rows or more. m = 1 is the value at which
// one row of a level and the prior weigh equally, which is what the
// Normal-Normal model gives when sigma2 == tau2, the neutral guess when the
// split of the total variance between the two is unidentified. With a single
// level the choice does not change that level's encoding (its mean is the
// prior), and unseen levels get the prior whatever m is.
const FallbackM = 1.0

// EstimateM estimates the empirical-Bayes shrinkage m = sigma2/tau2 from the
// per-level statistics of one column. With it, MEstimate(sum, n, m, prior)
// is the Normal-Normal posterior mean lambda*mean + (1-lambda)*prior with
// lambda = n*tau2 / (n*tau2 + sigma2), where sigma2 is the within-level
// variance of the target and tau2 the variance of the true level means
// (Micci-Barreca, SIGKDD Explorations 3(1), 2001, empirical-Bayes section).
//
// Estimator: the method of moments (ANOVA estimator) for the unbalanced
// one-way random-effects model. With L levels holding N rows in all, level
// sizes n_i, level means ybar_i and grand mean ybar:
//
//	SSW    = sum_i (SumSq_i - Sum_i^2/n_i)       (within-level sum of squares)
//	SSB    = sum_i n_i (ybar_i - ybar)^2         (between-level sum of squares)
//	sigma2 = SSW / (N - L)
//	tau2   = (SSB - (L-1)*sigma2) / (N - sum_i n_i^2 / N)
//
// Levels with N <= 0 (or NaN N) are ignored; a level's within sum of squares
// is clamped at 0 against rounding. The returned tau2 is the raw moment
// estimate, which can be negative.
//
// Edge cases:
//   - tau2 <= 0 (level means vary no more than noise): m = +Inf, every level
//     gets the prior; this takes precedence over sigma2 == 0.
//   - sigma2 == 0 and tau2 > 0 (every level constant): m = 0, every level
//     gets its own mean.
//   - fewer than 2 levels, or N <= L (no level has two rows): m = FallbackM;
//     tau2 is NaN, and sigma2 is NaN too unless there is one level with at
//     least two rows (then it is that level's variance SSW/(N-1)).
//   - NaN in Sum or SumSq: sigma2, tau2 and m are NaN.
func EstimateM(levels []LevelStats) (m, sigma2, tau2 float64) {
	var mo Moments
	for _, s := range levels {
		mo.Add(s)
	}
	return mo.Estimate()
}

// Moments accumulates, level by level, the sums EstimateM needs, so that m
// can be estimated in one pass without holding the levels. It is
// NestedMoments with every level under one parent, whose estimator is then
// EstimateM's. Its zero value is empty.
type Moments struct{ nm NestedMoments }

// Add counts one level; a level with N <= 0 (or NaN N) is ignored.
func (mo *Moments) Add(s LevelStats) { mo.nm.Add(s, 0) }

// Estimate returns m, sigma2 and tau2 for the levels added, as EstimateM
// documents.
func (mo *Moments) Estimate() (m, sigma2, tau2 float64) { return mo.nm.Estimate() }

// NestedMoments accumulates what its Estimate needs: levels grouped
// under parents (a postcode under its region), for a shrinkage m that pulls
// a level towards its parent's mean rather than the global one. Its zero
// value is empty.
type NestedMoments struct {
	l      int
	n, ssw float64 // rows and within-level sum of squares of every level
	groups []groupMoments
}

// groupMoments are the sums of the levels of one parent.
type groupMoments struct {
	l                 int
	n, sum            float64 // rows, sum of targets
	sumSqN, sumMeanSq float64 // sum of n_i^2, sum of Sum_i^2/n_i
}

// Add counts one level under parent (a non-negative index; the slice of
// groups grows to it). A level with parent < 0 (its rows fall under several
// parents) counts towards the within-level variance only. A level with N
// <= 0 (or NaN N) is ignored.
func (nm *NestedMoments) Add(s LevelStats, parent int) {
	if !(s.N > 0) {
		return
	}
	nm.l++
	nm.n += s.N
	between := s.Sum * s.Sum / s.N
	if w := s.SumSq - between; w > 0 || math.IsNaN(w) {
		nm.ssw += w
	}
	if parent < 0 {
		return
	}
	for parent >= len(nm.groups) {
		nm.groups = append(nm.groups, groupMoments{})
	}
	g := &nm.groups[parent]
	g.l++
	g.n += s.N
	g.sum += s.Sum
	g.sumSqN += s.N * s.N
	g.sumMeanSq += between
}

// Estimate returns m = sigma2/tau2 for levels nested in parents, by the
// method of moments of the two-stage nested classification with parents
// as fixed effects (the ANOVA estimator of the unbalanced nested model;
// Searle, Casella and McCulloch, "Variance Components", Wiley 1992, the
// 2-way nested classification, from memory): with parent p holding L_p
// levels and N_p rows, level sizes n_i and level sums S_i,
//
//	SSW    = sum_i (SumSq_i - S_i^2/n_i)                   (within levels)
//	SSB    = sum_p (sum_{i in p} S_i^2/n_i - S_p^2/N_p)    (levels around their parent)
//	sigma2 = SSW / (N - L)
//	tau2   = (SSB - sum_p (L_p - 1) sigma2) / sum_p (N_p - sum_{i in p} n_i^2/N_p)
//
// since E[SSB] = sum_p (L_p - 1) sigma2 + tau2 sum_p (N_p - sum n_i^2/N_p):
// each parent is the one-way layout of EstimateM, and their sums add. tau2
// is then the variance of the true level means around their parent's, the
// spread that m must shrink over when the prior is the parent's mean. With
// one parent holding every level it is EstimateM's estimator.
//
// Edge cases, as EstimateM: tau2 <= 0 gives m = +Inf (every level gets its
// parent's value); sigma2 == 0 and tau2 > 0 gives m = 0; no level with two
// rows (N <= L), or no parent with two levels (the denominator is 0), gives
// m = FallbackM with tau2 NaN; NaN sums give NaN.
func (nm *NestedMoments) Estimate() (m, sigma2, tau2 float64) {
	// The parents' terms are summed exactly, so that the estimate does
	// not depend on how the parents are numbered (the order in which
	// their levels were met, or a sharded fit's merge).
	var ssbX, coefX exactsum.Sum
	var df float64
	for _, g := range nm.groups {
		if g.l == 0 {
			continue
		}
		b := g.sumMeanSq - g.sum*g.sum/g.n
		if b < 0 {
			b = 0 // rounding: a sum of squares
		}
		ssbX.Add(b)
		df += float64(g.l - 1)
		coefX.Add(g.n - g.sumSqN/g.n)
	}
	ssb, coef := ssbX.Float64(), coefX.Float64()
	if nm.n <= float64(nm.l) || df == 0 || !(coef > 0) {
		sigma2 = math.NaN()
		if nm.n > float64(nm.l) {
			sigma2 = nm.ssw / (nm.n - float64(nm.l))
		}
		return FallbackM, sigma2, math.NaN()
	}
	sigma2 = nm.ssw / (nm.n - float64(nm.l))
	tau2 = (ssb - df*sigma2) / coef
	switch {
	case math.IsNaN(sigma2) || math.IsNaN(tau2):
		return math.NaN(), sigma2, tau2
	case tau2 <= 0:
		return math.Inf(1), sigma2, tau2
	case sigma2 == 0:
		return 0, sigma2, tau2
	}
	return sigma2 / tau2, sigma2, tau2
}

// LogOddsEps is the clipping bound of LogOdds: p is held to [LogOddsEps,
// 1-LogOddsEps] so that rates of exactly 0 or 1 give finite values (about
// -34.5 and +34.5) instead of -Inf and +Inf.
const LogOddsEps = 1e-15

// LogOdds returns log(p/(1-p)), the log-odds of a smoothed rate p of a binary
// target, with p clipped to [LogOddsEps, 1-LogOddsEps]. NaN gives NaN.
func LogOdds(p float64) float64 {
	switch {
	case math.IsNaN(p):
		return p
	case p < LogOddsEps:
		p = LogOddsEps
	case p > 1-LogOddsEps:
		p = 1 - LogOddsEps
	}
	return math.Log(p) - math.Log1p(-p)
}
