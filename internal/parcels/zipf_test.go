package parcels

import (
	"fmt"
	"math"
	"testing"
)

// chiSquare compares counts with the sampler's probabilities over bins of
// ranks [edges[j], edges[j+1]) and returns the statistic and its degrees of
// freedom.
func chiSquare(z *zipf, counts []int64, draws int64, edges []int) (stat float64, df int) {
	for j := 0; j+1 < len(edges); j++ {
		var p float64
		var c int64
		for i := edges[j]; i < edges[j+1]; i++ {
			p += z.prob(i)
			c += counts[i]
		}
		e := p * float64(draws)
		stat += (float64(c) - e) * (float64(c) - e) / e
		df++
	}
	return stat, df - 1
}

func TestZipfMatchesFormula(t *testing.T) {
	for _, tc := range []struct {
		n, head int
		s       float64
	}{
		{1, 1, 1.1},
		{7, 16, 0},      // uniform, table only
		{200, 256, 0.6}, // the route sampler
		{1000, 1, 1.1},  // tail from rank 1 on, where the hat is loosest (rank 1: hat 2.5% above the mass)
		{1000, 4, 1.1},  // tail from rank 4 on
		{1000, 4, 1.0},  // exponent 1 uses the logarithmic integral
		{50000, 64, 1.05},
		{50000, 100, 1.1}, // tail from rank 100 on, accepted through the squeeze
		{50000, 50000, 1.1},
	} {
		t.Run(fmt.Sprintf("n%d_head%d_s%v", tc.n, tc.head, tc.s), func(t *testing.T) {
			z := newZipfHead(tc.n, tc.s, tc.head)
			// The probabilities are (i+1)^-s normalised (computed from the
			// formula): they sum to 1 and fall with the rank.
			sum := 0.0
			for i := range tc.n {
				sum += z.prob(i)
				if i > 0 && z.prob(i) > z.prob(i-1)*(1+1e-12) {
					t.Fatalf("prob(%d) > prob(%d)", i, i-1)
				}
			}
			if math.Abs(sum-1) > 1e-9 {
				t.Fatalf("probabilities sum to %v", sum)
			}
			if tc.n > 1 {
				if r, want := z.prob(0)/z.prob(1), math.Pow(2, tc.s); math.Abs(r-want) > 1e-9*want {
					t.Errorf("prob(0)/prob(1) = %v, want 2^s = %v", r, want)
				}
			}
			const draws = 1_000_000
			counts := make([]int64, tc.n)
			st := stream{12345}
			for range draws {
				k := z.sample(st.next())
				if k < 0 || k >= tc.n {
					t.Fatalf("rank %d out of range", k)
				}
				counts[k]++
			}
			// Bins: consecutive ranks grouped until a bin expects at least
			// 200 draws (the last bin may expect fewer).
			edges := []int{0}
			acc := 0.0
			for i := range tc.n {
				acc += z.prob(i) * draws
				if acc >= 200 || i == tc.n-1 {
					edges = append(edges, i+1)
					acc = 0
				}
			}
			// Each of the first ranks on its own: within 4.5 binomial sd.
			for i := range min(tc.n, 10) {
				e := z.prob(i) * draws
				if sd := math.Sqrt(e * (1 - z.prob(i))); math.Abs(float64(counts[i])-e) > 4.5*sd+1e-9 {
					t.Errorf("rank %d drawn %d times, expected %.0f ± %.0f", i, counts[i], e, sd)
				}
			}
			stat, df := chiSquare(z, counts, draws, edges)
			// Mean df, sd sqrt(2 df): allow 5 sd.
			if limit := float64(df) + 5*math.Sqrt(2*float64(max(df, 1))); stat > limit {
				t.Errorf("chi-square %.1f with %d df exceeds %.1f", stat, df, limit)
			}
			t.Logf("chi-square %.1f, %d df", stat, df)
		})
	}
}

// TestSumWeights compares the Euler-Maclaurin normalising sum with the
// plain sum of the terms.
func TestSumWeights(t *testing.T) {
	for _, s := range []float64{0, 0.6, 1, 1.05, 1.1} {
		for _, n := range []int{1, exactTerms, exactTerms + 1, exactTerms + 2, 300_000, 2_000_000} {
			z := &zipf{s: s, oneMinusS: 1 - s}
			plain := 0.0
			for i := n - 1; i >= 0; i-- {
				plain += z.weight(i)
			}
			if got := z.sumWeights(n); math.Abs(got-plain) > 1e-12*plain {
				t.Errorf("s %v n %d: sum %.17g, plain sum %.17g", s, n, got, plain)
			}
		}
	}
}

// TestSqueezeIsSafe checks the squeeze bound against the rejected width
// computed directly, for ranks small enough that the direct computation is
// accurate.
func TestSqueezeIsSafe(t *testing.T) {
	for _, s := range []float64{0.6, 1, 1.05, 1.1, 2} {
		z := &zipf{s: s, oneMinusS: 1 - s}
		c := squeezeWidth(s, 100)
		for k := 100; k < 2000; k++ {
			fk := float64(k)
			// The x at which acceptance starts: H^-1(H(k+1/2) - k^-s).
			start := z.bigHInv(z.bigH(fk+0.5) - math.Pow(fk, -s))
			if w := start - (fk - 0.5); w > c || w < -1e-9 {
				t.Fatalf("s %v k %d: rejected width %g, squeeze %g", s, k, w, c)
			}
		}
	}
	if squeezeWidth(1.1, 99) != 1 {
		t.Errorf("a squeeze below rank 100")
	}
}
