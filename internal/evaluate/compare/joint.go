package compare

import (
	"encoding/json"
	"fmt"
	"math"
	"strings"

	"manyfold/internal/evaluate/ttest"
)

// JointResult is one model over every column's winning encodings at once,
// scored on the same outer folds as the columns one at a time: what the set
// of encodings buys beyond its best column alone.
type JointResult struct {
	Columns   []string  `json:"columns"`   // the columns with a winner, in the order given
	Encodings string    `json:"encodings"` // their winners, in encode's per-column grammar
	Primary   Stat      `json:"primary"`
	PerFold   []float64 `json:"per_fold"`
	Metrics   []Metric  `json:"metrics"`
	// BestColumn is the column whose winner alone scores best, and
	// OverBestColumn the joint model's gain over it by the verdict's test.
	BestColumn     string `json:"best_column"`
	OverBestColumn *Gain  `json:"over_best_column"`
	Reading        string `json:"reading"`
}

// MarshalJSON writes non-finite per-fold values as null; when no model
// was fitted (fewer than two winners) primary is null and the lists are
// empty, so that no score of 0 is read where there is none.
func (j JointResult) MarshalJSON() ([]byte, error) {
	var primary *Stat
	if len(j.Metrics) > 0 {
		primary = &j.Primary
	}
	return json.Marshal(struct {
		Columns        []string  `json:"columns"`
		Encodings      string    `json:"encodings"`
		Primary        *Stat     `json:"primary"`
		PerFold        []jsonNum `json:"per_fold"`
		Metrics        []Metric  `json:"metrics"`
		BestColumn     string    `json:"best_column"`
		OverBestColumn *Gain     `json:"over_best_column"`
		Reading        string    `json:"reading"`
	}{orEmpty(j.Columns), j.Encodings, primary, jsonNums(j.PerFold), orEmpty(j.Metrics), j.BestColumn, j.OverBestColumn, j.Reading})
}

// orEmpty returns xs, or an empty slice for nil, so that the JSON has []
// and not null.
func orEmpty[T any](xs []T) []T {
	if xs == nil {
		return []T{}
	}
	return xs
}

// joint fits, on each outer fold, one model over the winners of every
// column that has one (each encoding fitted on its own column's view of the
// fold, as alone), and compares it with the best of those columns alone.
// With fewer than two winners there is nothing to join: the reading says
// so and no model is fitted.
func (ev *evaluator) joint(res *Result) (*JointResult, error) {
	j := &JointResult{}
	var states []*colState
	var cands []Candidate
	var plan []string
	higher := res.HigherBetter
	for ci, c := range res.Columns {
		if c.Winner == nil {
			continue
		}
		cand, err := ParseCandidate(*c.Winner)
		if err != nil {
			return nil, err
		}
		states, cands = append(states, ev.states[ci]), append(cands, cand)
		j.Columns = append(j.Columns, c.Column)
		plan = append(plan, c.Column+"="+cand.Name)
	}
	j.Encodings = strings.Join(plan, ",")
	if len(states) < 2 {
		j.Reading = fmt.Sprintf("%d column(s) with a winner: nothing to join", len(states))
		return j, nil
	}
	names := metricNames(ev.task)
	scores := make([]foldScore, ev.ko)
	parallel(ev.ko, ev.opt.Threads, func(f int) {
		var sides [2]features
		for k, set := range ev.sets(Candidate{}, f) {
			for i, cs := range states {
				if err := ev.encodeSet(cs, cands[i], f, set.rows, set.pass, &sides[k]); err != nil {
					scores[f].err = err
					return
				}
			}
		}
		dtr := ev.design(ev.train[f], sides[0].dense, sides[0].ind, sides[0].nind)
		dte := ev.design(ev.test[f], sides[1].dense, sides[1].ind, sides[1].nind)
		scores[f].train, scores[f].test, scores[f].err = ev.score(dtr, dte, ev.train[f], ev.test[f])
	})
	per := make([][]float64, len(names))
	for f, s := range scores {
		if s.err != nil {
			return nil, fmt.Errorf("the joint model, outer fold %d: %w", f+1, s.err)
		}
		for m := range names {
			per[m] = append(per[m], s.test[m])
		}
	}
	for m, nm := range names {
		mean, std := foldMeanStd(per[m])
		j.Metrics = append(j.Metrics, Metric{Name: nm, Stat: Stat{mean, std}})
	}
	j.Primary, j.PerFold = j.Metrics[0].Stat, per[0]
	bc := &res.Columns[bestColumn(res.Columns, higher)]
	k := winnerOf(bc)
	j.BestColumn = bc.Column
	x, y := j.PerFold, k.PerFold
	if !higher {
		x, y = y, x
	}
	r := ttest.Corrected(x, y, ev.testShare(), Level)
	j.OverBestColumn = &Gain{Over: bc.Column + "=" + k.Name, Mean: r.Diff, Low: r.Low, High: r.Hi, P: r.P, Identical: r.Identical}
	g := j.OverBestColumn
	label := metricLabel(names[0])
	j.Reading = fmt.Sprintf("one model over %d columns' winners scores %s %s; it %s %s alone by %s %s (95%% interval %s to %s, p %s)",
		len(states), label, num(j.Primary.Mean), verb(g.Mean), g.Over, num(math.Abs(g.Mean)), label, num(g.Low), num(g.High), pval(g.P))
	return j, nil
}

// winnerOf returns the column's winning candidate, nil when it has none.
func winnerOf(c *ColumnResult) *CandidateResult {
	for i := range c.Candidates {
		if c.Candidates[i].Winner {
			return &c.Candidates[i]
		}
	}
	return nil
}

// bestColumn returns the index of the column whose winner scores best
// alone (the first of equals), -1 when no column has a winner. It is the
// winner's score that counts, not the column's best candidate's, as the
// joint model joins the winners.
func bestColumn(cols []ColumnResult, higher bool) int {
	best := -1
	var bestMean float64
	for i := range cols {
		w := winnerOf(&cols[i])
		if w == nil {
			continue
		}
		if best < 0 || better(w.Primary.Mean, bestMean, higher) {
			best, bestMean = i, w.Primary.Mean
		}
	}
	return best
}

// better reports whether a is a better value of a metric than b.
func better(a, b float64, higher bool) bool {
	if math.IsNaN(b) {
		return !math.IsNaN(a)
	}
	if higher {
		return a > b
	}
	return a < b
}
