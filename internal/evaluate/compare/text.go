package compare

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"
)

// metricLabel is the display name of a metric.
func metricLabel(name string) string {
	switch name {
	case "auc":
		return "AUC"
	case "log_loss":
		return "log loss"
	case "brier":
		return "Brier"
	case "rmse":
		return "RMSE"
	case "mae":
		return "MAE"
	case "r2":
		return "R2"
	case "accuracy":
		return "accuracy"
	case "mean_ovr_auc":
		return "OvR AUC"
	}
	return name
}

// num formats a metric value with four decimals ("n/a" when not finite).
func num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "n/a"
	}
	return fmt.Sprintf("%.4f", v)
}

// WriteText writes the result as manyfold's comparison table: a header,
// then per column one line per candidate, best first, the winner marked,
// and the column's reading.
func WriteText(w io.Writer, r *Result) error {
	bw := bufio.NewWriter(w)
	dir := "lower is better"
	if r.HigherBetter {
		dir = "higher is better"
	}
	fmt.Fprintf(bw, "manyfold compare: %s, target %s (%s; ranked by held-out %s, %s)\n", r.File, r.Target, r.Task, metricLabel(r.Metric), dir)
	fmt.Fprintf(bw, "nested cross-validation: %d outer x %d inner folds (fold rule %s), seed %d; statistics over %d rows, models on %d of them; L2 lambda %g\n",
		r.Folds, r.InnerFolds, r.FoldBy, r.Seed, r.Rows, r.ModelRows, r.Lambda)
	if r.DroppedRows > 0 {
		fmt.Fprintf(bw, "%d rows with an empty target left out\n", r.DroppedRows)
	}
	if len(r.With) > 0 {
		fmt.Fprintf(bw, "every model also sees: %s\n", strings.Join(r.With, ", "))
	}
	for _, c := range r.Columns {
		fmt.Fprintf(bw, "\n== %s: %d levels ==\n", c.Column, c.Levels)
		nameW := len("candidate")
		for _, k := range c.Candidates {
			nameW = max(nameW, len(k.Name)+len(" (baseline)"))
		}
		primW := max(17, len(metricLabel(r.Metric)+" mean ± sd")-1) // ± is two bytes, one column
		trainW := max(9, len("train "+metricLabel(r.Metric)))
		var head strings.Builder
		fmt.Fprintf(&head, " rank  %-*s  %-*s", nameW, "candidate", primW, metricLabel(r.Metric)+" mean ± sd")
		if len(c.Candidates) > 0 {
			for _, m := range c.Candidates[0].Metrics[1:] {
				fmt.Fprintf(&head, "  %9s", metricLabel(m.Name))
			}
		}
		fmt.Fprintf(&head, "  %*s  %6s  %6s  %6s", trainW, "train "+metricLabel(r.Metric), "secs", "cols", "unseen")
		fmt.Fprintln(bw, strings.TrimRight(head.String(), " "))
		for i, k := range c.Candidates {
			name := k.Name
			if k.Baseline {
				name += " (baseline)"
			}
			var line strings.Builder
			fmt.Fprintf(&line, " %4d  %-*s  %-*s", i+1, nameW, name, primW, num(k.Primary.Mean)+" ± "+num(k.Primary.Std))
			for _, m := range k.Metrics[1:] {
				fmt.Fprintf(&line, "  %9s", num(m.Mean))
			}
			secs := "-"
			if k.FitSeconds > 0 {
				secs = fmt.Sprintf("%.2f", k.FitSeconds)
			}
			fmt.Fprintf(&line, "  %*s  %6s  %6d  %5.1f%%", trainW, num(k.TrainPrimary.Mean), secs, k.OutputColumns, 100*k.UnseenShare)
			if k.Winner {
				line.WriteString("  <- winner")
			}
			fmt.Fprintln(bw, line.String())
		}
		fmt.Fprintf(bw, "reading: %s\n", c.Reading)
	}
	if r.EncodeCommand != "" {
		fmt.Fprintf(bw, "\nto encode each column by its winner:\n  %s\n", r.EncodeCommand)
	}
	return bw.Flush()
}

// reading is the one-line summary of a column's ranked candidates.
func reading(cs []CandidateResult, metric string, higher bool) string {
	label := metricLabel(metric)
	w := -1
	for i := range cs {
		if cs[i].Winner {
			w = i
			break
		}
	}
	if w < 0 {
		return "no candidate could be scored on the held-out rows"
	}
	win := &cs[w]
	gain := func(a, b float64) float64 { // how much a is better than b
		if higher {
			return a - b
		}
		return b - a
	}
	// paired compares the winner with o fold by fold: the mean gain and
	// the standard deviation of the per-fold gains.
	paired := func(o *CandidateResult) (float64, float64) {
		var d []float64
		for f := range win.PerFold {
			if f < len(o.PerFold) {
				d = append(d, gain(win.PerFold[f], o.PerFold[f]))
			}
		}
		return foldMeanStd(d)
	}
	var parts []string
	var prior, insample *CandidateResult
	for i := range cs {
		switch {
		case cs[i].Baseline && cs[i].Name == "prior":
			prior = &cs[i]
		case cs[i].Baseline && cs[i].Name == "target:insample":
			insample = &cs[i]
		}
	}
	if prior != nil && !math.IsNaN(prior.Primary.Mean) {
		if g, sd := paired(prior); !(g > 2*sd && g > 0) {
			parts = append(parts, fmt.Sprintf("no encoding clearly beats the prior alone (best: %s, %s %s against %s): the column carries little signal a linear model can use",
				win.Name, label, num(win.Primary.Mean), num(prior.Primary.Mean)))
		}
	}
	var next *CandidateResult
	for i := w + 1; i < len(cs); i++ {
		if !cs[i].Baseline && !math.IsNaN(cs[i].Primary.Mean) {
			next = &cs[i]
			break
		}
	}
	if len(parts) == 0 {
		switch {
		case next == nil:
			parts = append(parts, fmt.Sprintf("%s is the only encoding scored", win.Name))
		default:
			g, sd := paired(next)
			if sd > 0 && g < 2*sd {
				parts = append(parts, fmt.Sprintf("%s and %s are within the fold-to-fold spread (%.4f %s apart, spread %.4f): either will do",
					win.Name, next.Name, g, label, sd))
			} else if sd > 0 {
				parts = append(parts, fmt.Sprintf("%s beats %s by %.4f %s, %.1f times the fold-to-fold spread", win.Name, next.Name, g, label, g/sd))
			} else {
				parts = append(parts, fmt.Sprintf("%s beats %s by %.4f %s on every fold alike", win.Name, next.Name, g, label))
			}
		}
		if prior != nil {
			g, _ := paired(prior)
			parts = append(parts, fmt.Sprintf("%.4f %s better than the prior alone", g, label))
		}
	}
	if insample != nil && !math.IsNaN(insample.TrainPrimary.Mean) {
		parts = append(parts, fmt.Sprintf("the in-sample mean scores %s on its own training rows but %s held out (never use it)",
			num(insample.TrainPrimary.Mean), num(insample.Primary.Mean)))
	}
	return strings.Join(parts, "; ")
}

// WriteJSON writes the result as indented JSON; metrics that are not
// finite (an AUC on a fold with one class) are written as null.
func WriteJSON(w io.Writer, r *Result) error {
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return err
	}
	b = append(b, '\n')
	_, err = w.Write(b)
	return err
}

// jsonNum is a float64 that encodes as null when not finite.
type jsonNum float64

// MarshalJSON implements json.Marshaler.
func (v jsonNum) MarshalJSON() ([]byte, error) {
	f := float64(v)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(f)
}

// MarshalJSON writes a non-finite mean or std as null.
func (s Stat) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Mean jsonNum `json:"mean"`
		Std  jsonNum `json:"std"`
	}{jsonNum(s.Mean), jsonNum(s.Std)})
}

// MarshalJSON writes non-finite per-fold values as null.
func (c CandidateResult) MarshalJSON() ([]byte, error) {
	type plain CandidateResult
	per := make([]jsonNum, len(c.PerFold))
	for i, v := range c.PerFold {
		per[i] = jsonNum(v)
	}
	return json.Marshal(struct {
		plain
		PerFold []jsonNum `json:"per_fold"`
	}{plain(c), per})
}
