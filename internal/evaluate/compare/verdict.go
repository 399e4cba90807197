package compare

import (
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strings"

	"manyfold/internal/evaluate/ttest"
)

// Level is the two-sided level of compare's tests: a candidate beats
// another when the 95% interval of its gain, by the corrected resampled
// t-test over the outer folds, lies above 0.
const Level = 0.05

// testName says which test the verdict uses.
const testName = "corrected resampled t-test (Nadeau and Bengio, Machine Learning 52, 2003) over the outer folds, 95% intervals; the winner is the simplest candidate the test cannot tell from the best, when it beats the prior"

// Gain is one candidate's gain over another over the outer folds, in the
// primary metric, positive when it is better (higher AUC, lower RMSE).
type Gain struct {
	Over      string  `json:"over"`
	Mean      float64 `json:"mean"`
	Low       float64 `json:"low"`  // the 95% interval of the mean gain
	High      float64 `json:"high"` //
	P         float64 `json:"p_value"`
	Identical bool    `json:"identical"` // the same score on every fold: a tie
}

// Verdict is what a column's comparison concludes.
type Verdict struct {
	Test  string  `json:"test"`
	Level float64 `json:"level"`
	// Winner is the choice when it beats the prior by the test; null
	// otherwise ("no clear winner").
	Winner   *string `json:"winner"`
	Best     string  `json:"best"` // the best candidate that is not a baseline ("" when none was scored)
	BestMean float64 `json:"best_mean"`
	// Equivalent lists the candidates the test cannot tell from the best
	// (the 95% interval of the best's gain over them reaches 0), and
	// Choice is the simplest of the best and those: the one with the
	// fewest model columns, so that an encoding that adds nothing
	// measurable (target:eb+freq beside target:eb) is not chosen. It is
	// the best itself when the best beats every other candidate.
	Equivalent   []string `json:"equivalent"`
	Choice       string   `json:"choice"`
	OverPrior    *Gain    `json:"over_prior"`     // the choice against the prior baseline
	OverRunnerUp *Gain    `json:"over_runner_up"` // the best against the next candidate
	Ties         []string `json:"ties"`           // candidates with the best's score on every fold
	// The in-sample baseline's score on its own training rows and held
	// out, which shows how far the leaky mean flatters itself.
	InSampleTrain   *float64 `json:"insample_train,omitempty"`
	InSampleHeldOut *float64 `json:"insample_held_out,omitempty"`
}

// judge ranks the candidates (those that are not baselines first, best
// first by the primary mean, ties by the secondary metrics; the baselines
// after them, prior first), marks ties, and returns the verdict. testShare
// is the ratio of held-out to training rows of an outer fold.
func judge(cs []CandidateResult, higher bool, testShare float64) Verdict {
	better := func(a, b float64, higher bool) int {
		switch {
		case math.IsNaN(a) && math.IsNaN(b):
			return 0
		case math.IsNaN(b):
			return -1
		case math.IsNaN(a):
			return 1
		case a == b:
			return 0
		case (a > b) == higher:
			return -1
		}
		return 1
	}
	slices.SortStableFunc(cs, func(x, y CandidateResult) int {
		if x.Baseline != y.Baseline {
			if x.Baseline {
				return 1
			}
			return -1
		}
		if x.Baseline {
			if (x.Name == "prior") != (y.Name == "prior") {
				if x.Name == "prior" {
					return -1
				}
				return 1
			}
			return 0
		}
		if c := better(x.Primary.Mean, y.Primary.Mean, higher); c != 0 {
			return c
		}
		for m := 1; m < len(x.Metrics) && m < len(y.Metrics); m++ {
			if c := better(x.Metrics[m].Mean, y.Metrics[m].Mean, higherBetter(x.Metrics[m].Name)); c != 0 {
				return c
			}
		}
		return 0
	})
	v := Verdict{Test: testName, Level: Level, Equivalent: []string{}, Ties: []string{}} // [] in the JSON, not null
	gain := func(a, b *CandidateResult) *Gain {
		x, y := a.PerFold, b.PerFold
		if !higher {
			x, y = y, x
		}
		r := ttest.Corrected(x, y, testShare, Level)
		return &Gain{Over: b.Name, Mean: r.Diff, Low: r.Low, High: r.Hi, P: r.P, Identical: r.Identical}
	}
	var best, prior, insample *CandidateResult
	for i := range cs {
		c := &cs[i]
		c.Winner, c.Tie = false, false
		switch {
		case c.Baseline && c.Name == "prior":
			prior = c
		case c.Baseline:
			insample = c
		case best == nil && !math.IsNaN(c.Primary.Mean):
			best = c
		}
	}
	if insample != nil {
		tr, ho := insample.TrainPrimary.Mean, insample.Primary.Mean
		v.InSampleTrain, v.InSampleHeldOut = &tr, &ho
	}
	if best == nil {
		return v
	}
	v.Best, v.BestMean = best.Name, best.Primary.Mean
	for i := range cs {
		c := &cs[i]
		if c.Baseline || c == best || math.IsNaN(c.Primary.Mean) {
			continue
		}
		if slices.Equal(c.PerFold, best.PerFold) {
			c.Tie = true
			v.Ties = append(v.Ties, c.Name)
			continue
		}
		if v.OverRunnerUp == nil {
			v.OverRunnerUp = gain(best, c)
		}
	}
	if len(v.Ties) > 0 {
		v.OverRunnerUp = gain(best, &cs[slices.IndexFunc(cs, func(c CandidateResult) bool { return c.Name == v.Ties[0] })])
	}
	// The candidates the test cannot tell from the best (exact ties
	// included); the choice is the simplest of them, the one with the
	// fewest model columns (then the better ranked).
	choice := best
	for i := range cs {
		c := &cs[i]
		if c.Baseline || c == best || math.IsNaN(c.Primary.Mean) {
			continue
		}
		if g := gain(best, c); g.Identical || !(g.Low > 0) {
			v.Equivalent = append(v.Equivalent, c.Name)
			if c.OutputColumns < choice.OutputColumns {
				choice = c
			}
		}
	}
	v.Choice = choice.Name
	if prior != nil {
		v.OverPrior = gain(choice, prior)
	}
	if prior != nil && v.OverPrior.Low > 0 && !v.OverPrior.Identical {
		name := choice.Name
		v.Winner = &name
		choice.Winner = true
	}
	return v
}

// reading is the one-line summary of a column's verdict; every figure in
// it is in the verdict (the JSON).
func (v *Verdict) reading(metric string) string {
	label := metricLabel(metric)
	if v.Best == "" {
		return "no candidate could be scored on the held-out rows"
	}
	g := func(x *Gain) string {
		if x.Identical {
			return fmt.Sprintf("ties with %s on every fold", x.Over)
		}
		return fmt.Sprintf("%s %s by %s %s (95%% interval %s to %s, p %s)", verb(x.Mean), x.Over, num(math.Abs(x.Mean)), label, num(x.Low), num(x.High), pval(x.P))
	}
	var parts []string
	switch {
	case v.Winner != nil && len(v.Equivalent) == 0:
		parts = append(parts, "winner "+*v.Winner)
	case v.Winner != nil:
		parts = append(parts, fmt.Sprintf("winner %s, the simplest of the %d candidates the test cannot tell from the best (%s)", *v.Winner, len(v.Equivalent)+1, strings.Join(append([]string{v.Best}, v.Equivalent...), ", ")))
	default:
		parts = append(parts, "no clear winner (best "+v.Best+")")
	}
	if v.OverPrior != nil {
		parts = append(parts, v.Choice+" "+g(v.OverPrior))
	}
	if v.OverRunnerUp != nil {
		parts = append(parts, v.Best+" "+g(v.OverRunnerUp))
	}
	if v.Winner == nil && v.OverPrior != nil && !(v.OverPrior.Low > 0) {
		parts = append(parts, "the column carries little signal a linear model can use")
	}
	if v.InSampleTrain != nil {
		parts = append(parts, fmt.Sprintf("the in-sample mean scores %s on its own training rows but %s held out (never use it)", num(*v.InSampleTrain), num(*v.InSampleHeldOut)))
	}
	return strings.Join(parts, "; ")
}

// verb says whether a gain is a win or a loss.
func verb(gain float64) string {
	if gain >= 0 {
		return "beats"
	}
	return "trails"
}

// pval prints a p-value with two significant digits (below 0.0001 as such).
func pval(p float64) string {
	switch {
	case math.IsNaN(p):
		return "n/a"
	case p < 0.0001:
		return "< 0.0001"
	}
	return fmt.Sprintf("%.2g", p)
}

// MarshalJSON writes a gain's figures that are not finite as null.
func (g Gain) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Over      string  `json:"over"`
		Mean      jsonNum `json:"mean"`
		Low       jsonNum `json:"low"`
		High      jsonNum `json:"high"`
		P         jsonNum `json:"p_value"`
		Identical bool    `json:"identical"`
	}{g.Over, jsonNum(g.Mean), jsonNum(g.Low), jsonNum(g.High), jsonNum(g.P), g.Identical})
}

// MarshalJSON writes the verdict's figures that are not finite as null.
func (v Verdict) MarshalJSON() ([]byte, error) {
	type plain Verdict
	opt := func(p *float64) *jsonNum {
		if p == nil {
			return nil
		}
		n := jsonNum(*p)
		return &n
	}
	return json.Marshal(struct {
		plain
		BestMean        jsonNum  `json:"best_mean"`
		InSampleTrain   *jsonNum `json:"insample_train,omitempty"`
		InSampleHeldOut *jsonNum `json:"insample_held_out,omitempty"`
	}{plain(v), jsonNum(v.BestMean), opt(v.InSampleTrain), opt(v.InSampleHeldOut)})
}
