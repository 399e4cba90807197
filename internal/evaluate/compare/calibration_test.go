package compare

import (
	"fmt"
	"math"
	"strings"
	"testing"
)

// TestVerdictCalibration: on columns of pure noise the verdict names a
// winner over the prior no more often than the test's level allows, and
// on columns with real level effects it names the right winner.
//
// Noise: 100 columns against a target drawn independently of them, half
// unique ids, half of 500 levels. Declaring a winner needs the best
// candidate's 95% interval of its gain over the prior above 0; under the
// null that happens at most at the level, 0.05, for one comparison (the
// correction is conservative, and the best of several candidates is also
// tested against the runner-up). Allowed: 0.05 plus twice its sampling
// error over 100 columns, 2 sqrt(0.05 * 0.95 / 100) = 0.044, so at most 9.
func TestVerdictCalibration(t *testing.T) {
	if testing.Short() {
		t.Skip("100 columns")
	}
	const rows, cols = 2000, 100
	rng := splitmix64(42)
	var b strings.Builder
	b.WriteString("late")
	for c := 0; c < cols; c++ {
		fmt.Fprintf(&b, ",c%03d", c)
	}
	b.WriteString("\n")
	for i := 0; i < rows; i++ {
		late := 0
		if rng.next()%10 < 3 {
			late = 1
		}
		fmt.Fprintf(&b, "%d", late)
		for c := 0; c < cols; c++ {
			if c%2 == 0 {
				fmt.Fprintf(&b, ",id%d", rng.next()) // unique per row
			} else {
				fmt.Fprintf(&b, ",L%d", rng.next()%500)
			}
		}
		b.WriteString("\n")
	}
	var names []string
	for c := 0; c < cols; c++ {
		names = append(names, fmt.Sprintf("c%03d", c))
	}
	cands, _ := ParseCandidates("prior,target:eb,freq,topk:100,hash:64")
	res, err := Run(csvReader(t, b.String()), Options{Target: "late", Columns: names, Candidates: cands, Folds: 5, InnerFolds: 5, Seed: 1, NoTimings: true, Threads: 2})
	if err != nil {
		t.Fatal(err)
	}
	winners := 0
	for _, c := range res.Columns {
		if c.Winner != nil {
			winners++
			t.Logf("%s: %s", c.Column, c.Reading)
		}
	}
	t.Logf("noise: %d of %d columns with a winner", winners, cols)
	if bound := 0.05 + 2*math.Sqrt(0.05*0.95/cols); float64(winners)/cols > bound {
		t.Errorf("%d of %d noise columns have a winner; the test's level allows %.3f", winners, cols, bound)
	}
}

// TestVerdictFindsEffects: a column of 50 levels whose log-odds of the
// target are drawn from N(0, 1) around a base rate of 0.3, 3000 rows; the
// candidates are the target mean, the frequency (which carries nothing
// here: every level is about as common) and 4 hash buckets (which merge
// the levels a dozen to a bucket). The verdict must name target:eb the
// winner in at least 90% of 20 seeds.
func TestVerdictFindsEffects(t *testing.T) {
	if testing.Short() {
		t.Skip("20 seeds")
	}
	const seeds = 20
	found := 0
	for seed := uint64(1); seed <= seeds; seed++ {
		rng := splitmix64(seed * 7919)
		effect := make([]float64, 50)
		for l := range effect {
			// A standard normal draw by Box-Muller.
			u1 := (float64(rng.next()>>11) + 0.5) / (1 << 53)
			u2 := float64(rng.next()>>11) / (1 << 53)
			effect[l] = math.Sqrt(-2*math.Log(u1)) * math.Cos(2*math.Pi*u2)
		}
		base := math.Log(0.3 / 0.7)
		var b strings.Builder
		b.WriteString("late,level\n")
		for i := 0; i < 3000; i++ {
			l := int(rng.next() % 50)
			p := 1 / (1 + math.Exp(-(base + effect[l])))
			late := 0
			if float64(rng.next()>>11)/(1<<53) < p {
				late = 1
			}
			fmt.Fprintf(&b, "%d,L%02d\n", late, l)
		}
		cands, _ := ParseCandidates("prior,target:eb,freq,hash:4")
		res, err := Run(csvReader(t, b.String()), Options{Target: "late", Columns: []string{"level"}, Candidates: cands, Folds: 5, InnerFolds: 5, Seed: seed, NoTimings: true})
		if err != nil {
			t.Fatal(err)
		}
		c := res.Columns[0]
		if c.Winner != nil && *c.Winner == "target:eb" {
			found++
		} else {
			t.Logf("seed %d: %s", seed, c.Reading)
		}
	}
	t.Logf("target:eb named the winner in %d of %d seeds", found, seeds)
	if found < seeds*9/10 {
		t.Errorf("target:eb named the winner in %d of %d seeds, want at least 90%%", found, seeds)
	}
}
