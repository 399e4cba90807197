package compare

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"

	"manyfold/internal/jsonout"
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
	fmt.Fprintf(bw, "test: %s\n", testName)
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
		timed := hasTimings(&c)
		fmt.Fprintf(&head, "  %*s", trainW, "train "+metricLabel(r.Metric))
		if timed {
			fmt.Fprintf(&head, "  %6s", "secs")
		}
		fmt.Fprintf(&head, "  %6s  %6s", "cols", "unseen")
		fmt.Fprintln(bw, strings.TrimRight(head.String(), " "))
		for i, k := range c.Candidates {
			name := k.Name
			rank := fmt.Sprintf("%4d", i+1)
			if k.Baseline {
				if i == 0 || !c.Candidates[i-1].Baseline {
					fmt.Fprintln(bw, " baselines (not ranked):")
				}
				name += " (baseline)"
				rank = "   -"
			}
			var line strings.Builder
			fmt.Fprintf(&line, " %s  %-*s  %-*s", rank, nameW, name, primW, num(k.Primary.Mean)+" ± "+num(k.Primary.Std))
			for _, m := range k.Metrics[1:] {
				fmt.Fprintf(&line, "  %9s", num(m.Mean))
			}
			fmt.Fprintf(&line, "  %*s", trainW, num(k.TrainPrimary.Mean))
			if timed {
				fmt.Fprintf(&line, "  %6.2f", k.FitSeconds)
			}
			fmt.Fprintf(&line, "  %6d  %5.1f%%", k.OutputColumns, 100*k.UnseenShare)
			switch {
			case k.Winner:
				line.WriteString("  <- winner")
			case k.Tie:
				line.WriteString("  = tie with the best")
			}
			fmt.Fprintln(bw, line.String())
		}
		fmt.Fprintf(bw, "reading: %s\n", c.Reading)
	}
	if j := r.Joint; j != nil {
		fmt.Fprintf(bw, "\n== joint: one model over every column's winner ==\n")
		if len(j.Metrics) > 0 {
			fmt.Fprintf(bw, " %s: %s %s ± %s\n", j.Encodings, metricLabel(r.Metric), num(j.Primary.Mean), num(j.Primary.Std))
		}
		fmt.Fprintf(bw, "reading: %s\n", j.Reading)
	}
	if r.EncodeCommand != "" {
		fmt.Fprintf(bw, "\nto encode each column by its winner:\n  %s\n", r.EncodeCommand)
	} else if len(r.Columns) > 0 {
		fmt.Fprintf(bw, "\n%s\n", noCommand)
	}
	return bw.Flush()
}

// noCommand ends the text and the report when no column has a winner.
const noCommand = "no column has a clear winner: no encode command to run"

// WriteJSON writes the result as indented JSON (jsonout's form: delay>15
// as written); metrics that are not
// finite (an AUC on a fold with one class) are written as null.
func WriteJSON(w io.Writer, r *Result) error {
	b, err := jsonout.Marshal(r)
	if err != nil {
		return err
	}
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

// MarshalJSON writes the metric's name with its mean and std (non-finite
// as null): without it Stat's method, promoted through the embedding,
// would write the figures without the name.
func (m Metric) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Name string  `json:"name"`
		Mean jsonNum `json:"mean"`
		Std  jsonNum `json:"std"`
	}{m.Name, jsonNum(m.Mean), jsonNum(m.Std)})
}

// MarshalJSON writes non-finite per-fold values as null.
func (c CandidateResult) MarshalJSON() ([]byte, error) {
	type plain CandidateResult
	return json.Marshal(struct {
		plain
		PerFold []jsonNum `json:"per_fold"`
	}{plain(c), jsonNums(c.PerFold)})
}

// jsonNums converts per-fold values for MarshalJSON (non-finite as null).
func jsonNums(xs []float64) []jsonNum {
	out := make([]jsonNum, len(xs))
	for i, v := range xs {
		out[i] = jsonNum(v)
	}
	return out
}
