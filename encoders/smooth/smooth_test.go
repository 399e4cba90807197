package smooth

import (
	"math"
	"testing"
)

// close reports whether got is within tol of want (absolute, or relative for
// large values); NaN matches NaN and infinities match themselves.
func close(got, want, tol float64) bool {
	if math.IsNaN(want) {
		return math.IsNaN(got)
	}
	if math.IsInf(want, 0) {
		return got == want
	}
	return math.Abs(got-want) <= tol*math.Max(1, math.Abs(want))
}

func TestMEstimate(t *testing.T) {
	tests := []struct {
		name             string
		sum, n, m, prior float64
		want             float64
	}{
		// Cestnik, ECAI 1990, (s + m*p)/(n + m); values computed from the formula.
		{"s3 n4 m2 p0.5", 3, 4, 2, 0.5, 2.0 / 3},
		{"s1 n1 m10 p0.2", 1, 1, 10, 0.2, 3.0 / 11},
		{"s3 n4 m1 p0.5", 3, 4, 1, 0.5, 0.7},
		// Edge cases of the doc comment.
		{"unseen level m0", 0, 0, 0, 0.3, 0.3},
		{"unseen level m2", 0, 0, 2, 0.3, 0.3},
		{"m0 is the raw mean", 3, 4, 0, 0.5, 0.75},
		{"m inf gives prior", 3, 4, math.Inf(1), 0.5, 0.5},
		{"m inf prior 0", 3, 4, math.Inf(1), 0, 0},
		{"m inf unseen", 0, 0, math.Inf(1), 0.25, 0.25},
		{"NaN sum", math.NaN(), 4, 1, 0.5, math.NaN()},
		{"NaN prior", 3, 4, 1, math.NaN(), math.NaN()},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := MEstimate(tc.sum, tc.n, tc.m, tc.prior); !close(got, tc.want, 1e-15) {
				t.Fatalf("MEstimate(%v, %v, %v, %v) = %v, want %v", tc.sum, tc.n, tc.m, tc.prior, got, tc.want)
			}
		})
	}
}

// TestEmpiricalBayesLambda checks that MEstimate with m = sigma2/tau2 is the
// Normal-Normal posterior mean lambda*mean + (1-lambda)*prior with
// lambda = n*tau2/(n*tau2 + sigma2) (Micci-Barreca, SIGKDD Explorations 3(1),
// 2001; lambda values computed from the formula).
func TestEmpiricalBayesLambda(t *testing.T) {
	tests := []struct {
		name            string
		n, sigma2, tau2 float64
		wantLambda      float64
	}{
		{"n4", 4, 0.1875, 0.05, 16.0 / 31},
		{"n1", 1, 0.25, 0.05, 1.0 / 6},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			lambda := tc.n * tc.tau2 / (tc.n*tc.tau2 + tc.sigma2)
			if !close(lambda, tc.wantLambda, 1e-15) {
				t.Fatalf("lambda = %v, want %v", lambda, tc.wantLambda)
			}
			m := tc.sigma2 / tc.tau2
			// Check at several level means and priors: the m-estimate's weight on
			// the level mean must be the check lambda.
			for _, c := range []struct{ mean, prior float64 }{{0.75, 0.5}, {1, 0}, {0, 0.2}, {0.3, 0.9}} {
				got := MEstimate(c.mean*tc.n, tc.n, m, c.prior)
				want := tc.wantLambda*c.mean + (1-tc.wantLambda)*c.prior
				if !close(got, want, 1e-14) {
					t.Fatalf("MEstimate(mean %v, n %v, m %v, prior %v) = %v, want %v", c.mean, tc.n, m, c.prior, got, want)
				}
			}
		})
	}
}

func TestBlendWeight(t *testing.T) {
	tests := []struct {
		name    string
		n, k, f float64
		want    float64
	}{
		// Micci-Barreca, SIGKDD Explorations 3(1), 2001, 1/(1+exp(-(n-k)/f));
		// values computed from the formula.
		{"n10 k5 f1", 10, 5, 1, 0.993307149075715},
		{"n1 k5 f1", 1, 5, 1, 0.0179862099620916},
		{"n equals k", 5, 5, 3, 0.5},
		// Edge cases of the doc comment.
		{"step above", 6, 5, 0, 1},
		{"step below", 4, 5, 0, 0},
		{"step at k", 5, 5, 0, 0.5},
		{"negative f is a step", 6, 5, -1, 1},
		{"f inf", 100, 5, math.Inf(1), 0.5},
		{"far below underflows to 0", 0, 1e6, 1, 0},
		{"far above is 1", 1e6, 0, 1, 1},
		{"NaN n", math.NaN(), 5, 1, math.NaN()},
		{"NaN f", 3, 5, math.NaN(), math.NaN()},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := BlendWeight(tc.n, tc.k, tc.f); !close(got, tc.want, 1e-14) {
				t.Fatalf("BlendWeight(%v, %v, %v) = %v, want %v", tc.n, tc.k, tc.f, got, tc.want)
			}
		})
	}
}

func TestBlend(t *testing.T) {
	tests := []struct {
		name                string
		sum, n, k, f, prior float64
		want                float64
	}{
		// Micci-Barreca, SIGKDD Explorations 3(1), 2001: levels with targets
		// {1,1,1,0}, {1,0,0,0,0}, {1}, prior 0.5, k=2, f=1; computed from the formula.
		{"y=1110", 3, 4, 2, 1, 0.5, 0.720199269494471},
		{"y=10000", 1, 5, 2, 1, 0.5, 0.21422776195327},
		{"y=1", 1, 1, 2, 1, 0.5, 0.634470710684998},
		// Edge cases of the doc comment.
		{"unseen level", 0, 0, 2, 1, 0.4, 0.4},
		{"step weight 1", 3, 4, 2, 0, 0.5, 0.75},
		{"step weight 0", 3, 4, 10, 0, 0.5, 0.5},
		{"weight 0 ignores inf mean", math.Inf(1), 1, 1e6, 1, 0.5, 0.5},
		{"NaN prior", 3, 4, 2, 1, math.NaN(), math.NaN()},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := Blend(tc.sum, tc.n, tc.k, tc.f, tc.prior); !close(got, tc.want, 1e-14) {
				t.Fatalf("Blend(%v, %v, %v, %v, %v) = %v, want %v", tc.sum, tc.n, tc.k, tc.f, tc.prior, got, tc.want)
			}
		})
	}
}

// stats builds the LevelStats of each level's target values.
func stats(levels ...[]float64) []LevelStats {
	out := make([]LevelStats, len(levels))
	for i, ys := range levels {
		for _, y := range ys {
			out[i].N++
			out[i].Sum += y
			out[i].SumSq += y * y
		}
	}
	return out
}

func TestEstimateM(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	tests := []struct {
		name                    string
		levels                  []LevelStats
		wantM, wantS2, wantTau2 float64
	}{
		// Delivery cost per route, three routes; ANOVA estimator of the
		// doc comment, worked out by hand (computed from the formula):
		//   A = {1,2,3}: n=3, mean 2, within SS 2
		//   B = {4,6}:   n=2, mean 5, within SS 2
		//   C = {5,7,9,11}: n=4, mean 8, within SS 20
		//   N = 9, L = 3, SSW = 24, sigma2 = 24/(9-3) = 4
		//   grand mean 48/9 = 16/3; SSB = 3*(10/3)^2 + 2*(1/3)^2 + 4*(8/3)^2 = 558/9 = 62
		//   sum n_i^2 = 29; tau2 = (62 - 2*4) / (9 - 29/9) = 54/(52/9) = 243/26
		//   m = sigma2/tau2 = 4*26/243 = 104/243
		{"three routes", stats([]float64{1, 2, 3}, []float64{4, 6}, []float64{5, 7, 9, 11}), 104.0 / 243, 4, 243.0 / 26},
		// Late delivery (binary, SumSq == Sum), by hand (computed from the formula):
		//   A = {1,1,1,0}: n=4 s=3 within SS 3-9/4 = 0.75
		//   B = {0,0,0,0}: n=4 s=0 within SS 0
		//   N = 8, L = 2, sigma2 = 0.75/6 = 0.125
		//   SSB = 9/4 + 0 - 9/8 = 1.125; sum n_i^2 = 32
		//   tau2 = (1.125 - 0.125)/(8 - 4) = 0.25, m = 0.5
		{"binary two postcodes", []LevelStats{{4, 3, 3}, {4, 0, 0}}, 0.5, 0.125, 0.25},
		// Edge cases of the doc comment.
		// {1,0},{1,0}: SSW = 1, sigma2 = 1/2, SSB = 0, tau2 = (0 - 1/2)/(4 - 8/4) = -1/4.
		{"equal means: tau2 < 0 gives +Inf", stats([]float64{1, 0}, []float64{1, 0}), inf, 0.5, -0.25},
		{"all identical: tau2 = 0 wins over sigma2 = 0", stats([]float64{1, 1}, []float64{1, 1, 1}), inf, 0, 0},
		// {1,1},{0,0}: SSW = 0, SSB = 2*(1/2)^2 + 2*(1/2)^2 = 1, tau2 = 1/(4 - 8/4) = 1/2.
		{"constant levels: sigma2 = 0 gives 0", stats([]float64{1, 1}, []float64{0, 0}), 0, 0, 0.5},
		{"no levels", nil, FallbackM, nan, nan},
		{"one level", stats([]float64{1, 0, 1}), FallbackM, 1.0 / 3, nan},
		{"one level one row", stats([]float64{1}), FallbackM, nan, nan},
		{"one row per level", stats([]float64{1}, []float64{0}, []float64{1}), FallbackM, nan, nan},
		{"empty levels ignored", append(stats([]float64{1, 2, 3}, []float64{4, 6}, []float64{5, 7, 9, 11}), LevelStats{}, LevelStats{N: -1}, LevelStats{N: nan}), 104.0 / 243, 4, 243.0 / 26},
		{"NaN sum", []LevelStats{{2, nan, 1}, {2, 1, 1}}, nan, nan, nan},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			m, s2, tau2 := EstimateM(tc.levels)
			if !close(m, tc.wantM, 1e-12) || !close(s2, tc.wantS2, 1e-12) || !close(tau2, tc.wantTau2, 1e-12) {
				t.Fatalf("EstimateM = (m %v, sigma2 %v, tau2 %v), want (%v, %v, %v)", m, s2, tau2, tc.wantM, tc.wantS2, tc.wantTau2)
			}
		})
	}
}

// TestEstimateMRecoversVariances draws levels from the random-effects model
// with known sigma2 and tau2 and checks that the estimator lands near them
// (a deterministic linear congruential stream, so the test cannot flake).
func TestEstimateMRecoversVariances(t *testing.T) {
	const (
		trueSigma2 = 4.0
		trueTau2   = 1.0
		levels     = 2000
	)
	state := uint64(12345)
	uniform := func() float64 {
		state = state*6364136223846793005 + 1442695040888963407
		return (float64(state>>11) + 0.5) / (1 << 53)
	}
	normal := func() float64 { // Box-Muller
		return math.Sqrt(-2*math.Log(uniform())) * math.Cos(2*math.Pi*uniform())
	}
	ls := make([]LevelStats, levels)
	for i := range ls {
		mu := 10 + math.Sqrt(trueTau2)*normal()
		rows := 2 + i%9 // unbalanced: 2..10 rows per level
		for r := 0; r < rows; r++ {
			y := mu + math.Sqrt(trueSigma2)*normal()
			ls[i].N++
			ls[i].Sum += y
			ls[i].SumSq += y * y
		}
	}
	m, s2, tau2 := EstimateM(ls)
	if math.Abs(s2-trueSigma2) > 0.3 || math.Abs(tau2-trueTau2) > 0.25 || math.Abs(m-trueSigma2/trueTau2) > 1.2 {
		t.Fatalf("EstimateM = (m %v, sigma2 %v, tau2 %v), want near (4, 4, 1)", m, s2, tau2)
	}
}

func TestLogOdds(t *testing.T) {
	tests := []struct {
		name string
		p    float64
		want float64
		tol  float64
	}{
		// Kuhn & Johnson, Feature Engineering and Selection (2019), section 5.4,
		// Table 5.2: raw log-odds to 3 decimals.
		{"3/35", 3.0 / 35, -2.367, 5e-4},
		{"436/2676", 436.0 / 2676, -1.637, 5e-4},
		{"18/197", 18.0 / 197, -2.297, 5e-4},
		// Computed from the formula log(p/(1-p)).
		{"half", 0.5, 0, 0},
		{"0.75", 0.75, math.Log(3), 1e-15},
		// Edge cases of the doc comment: clipping at 1e-15.
		{"zero clips", 0, math.Log(1e-15 / (1 - 1e-15)), 1e-12},
		{"negative clips", -3, math.Log(1e-15 / (1 - 1e-15)), 1e-12},
		{"one clips", 1, -math.Log(1e-15 / (1 - 1e-15)), 1e-3},
		{"NaN", math.NaN(), math.NaN(), 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := LogOdds(tc.p)
			if math.IsNaN(tc.want) {
				if !math.IsNaN(got) {
					t.Fatalf("LogOdds(%v) = %v, want NaN", tc.p, got)
				}
				return
			}
			if math.IsInf(got, 0) || math.Abs(got-tc.want) > tc.tol {
				t.Fatalf("LogOdds(%v) = %v, want %v ± %v", tc.p, got, tc.want, tc.tol)
			}
		})
	}
	if lo, hi := LogOdds(0), LogOdds(1); !(lo < -34 && hi > 34 && lo > -35 && hi < 35) {
		t.Fatalf("clipped log-odds = %v, %v, want about ±34.5", lo, hi)
	}
}

// TestNestedMoments: with every level under one parent the nested
// estimator is the one-way estimator (EstimateM); moving every level of a
// parent by the same amount (a parent effect) leaves it unchanged, since
// only the spread of levels around their own parent counts, while the
// one-way estimate sees the parents' spread as between-level variance and
// shrinks less (a smaller m).
func TestNestedMoments(t *testing.T) {
	levels := []LevelStats{
		{N: 4, Sum: 2, SumSq: 1.5}, {N: 3, Sum: 2.4, SumSq: 2.1}, {N: 5, Sum: 1, SumSq: 0.9},
		{N: 2, Sum: 1.6, SumSq: 1.4}, {N: 6, Sum: 3.3, SumSq: 2.2}, {N: 3, Sum: 0.6, SumSq: 0.5},
	}
	var one NestedMoments
	for _, s := range levels {
		one.Add(s, 0)
	}
	m1, s1, t1 := one.Estimate()
	m0, s0, t0 := EstimateM(levels)
	if math.Abs(m1-m0) > 1e-12*m0 || math.Abs(s1-s0) > 1e-12 || math.Abs(t1-t0) > 1e-12 {
		t.Errorf("one parent: m, sigma2, tau2 = %g, %g, %g; EstimateM gives %g, %g, %g", m1, s1, t1, m0, s0, t0)
	}
	// Parents 0 and 1; parent 1's levels moved by +5 (y -> y + 5 adds 5n
	// to the sum and 10 Sum + 25 n to the sum of squares).
	shift := func(s LevelStats, d float64) LevelStats {
		return LevelStats{N: s.N, Sum: s.Sum + d*s.N, SumSq: s.SumSq + 2*d*s.Sum + d*d*s.N}
	}
	var a, b NestedMoments
	var flat []LevelStats
	for i, s := range levels {
		a.Add(s, i%2)
		moved := s
		if i%2 == 1 {
			moved = shift(s, 5)
		}
		b.Add(moved, i%2)
		flat = append(flat, moved)
	}
	ma, _, _ := a.Estimate()
	mb, _, _ := b.Estimate()
	if math.Abs(ma-mb) > 1e-9*math.Abs(ma) {
		t.Errorf("a parent effect changed the nested m: %g, then %g", ma, mb)
	}
	if mflat, _, _ := EstimateM(flat); !(mflat < mb) {
		t.Errorf("one-way m %g with the parents' spread, nested m %g: want the one-way one smaller", mflat, mb)
	}
	// No parent with two levels: nothing to estimate within parents.
	var lone NestedMoments
	lone.Add(levels[0], 0)
	lone.Add(levels[1], 1)
	if m, _, tau2 := lone.Estimate(); m != FallbackM || !math.IsNaN(tau2) {
		t.Errorf("one level per parent: m %g, tau2 %g; want FallbackM and NaN", m, tau2)
	}
}
