package main

import (
	"math"
	"os"
	"time"

	"manyfold/encoders/pipeline"
	"manyfold/internal/jsonout"
	"manyfold/io/derive"
	"manyfold/io/tableio"
)

// runJSON is the document that encode --json and apply --json print on
// standard output after a run that wrote its output: what the summary line
// on standard error says, as data. The README's encode section lists the
// fields.
type runJSON struct {
	Input   string   `json:"input"`
	Output  string   `json:"output"`
	Tables  string   `json:"tables"`
	Reports []string `json:"reports,omitempty"` // apply --report
	Rows    int64    `json:"rows"`
	// TargetMissingRows (encode) counts the rows whose target is empty:
	// encoded, not counted in the statistics.
	TargetMissingRows *int64  `json:"target_missing_rows,omitempty"`
	ElapsedSeconds    float64 `json:"elapsed_seconds"`
	// Task is binary, multiclass, regression, or none when nothing reads
	// the target.
	Task             string      `json:"task"`
	Target           *string     `json:"target"`
	TargetExpression *targetExpr `json:"target_expression"`
	PositiveClass    *string     `json:"positive_class"`
	// Classes (encode) are the target's classes in sorted order, empty
	// for a regression target or none.
	Classes  *[]pipeline.ClassRows `json:"classes,omitempty"`
	Columns  []columnJSON          `json:"columns"`
	Warnings []string              `json:"warnings"`
	// Failed (apply) holds the drift figures over their --fail-on
	// thresholds.
	Failed *[]pipeline.Breach `json:"failed,omitempty"`
}

// targetExpr is a derived target (delay>15) taken apart: its positive
// class, 1, is the rows where the condition holds.
type targetExpr struct {
	Column   string `json:"column"`
	Operator string `json:"operator"`
	Value    string `json:"value"` // as written
}

// columnJSON is one encoded column.
type columnJSON struct {
	Column      string         `json:"column"`
	Levels      *int           `json:"levels,omitempty"` // encode: distinct levels fitted
	Encodings   []encodingJSON `json:"encodings"`
	UnseenRows  *int64         `json:"unseen_rows,omitempty"`  // apply
	UnseenShare *float64       `json:"unseen_share,omitempty"` // apply
}

// encodingJSON is one encoding of a column, in the --methods grammar, and
// the output columns it wrote.
type encodingJSON struct {
	Encoding string   `json:"encoding"`
	Outputs  []string `json:"outputs"`
}

// newRunJSON returns what encode's and apply's documents share: the paths,
// the rows, the elapsed time, the target and task of model m, and each
// column's encodings with their output columns.
func newRunJSON(m *pipeline.Model, input, output, tables string, rows int64, elapsed time.Duration) *runJSON {
	d := &runJSON{Input: input, Output: output, Tables: tables, Rows: rows, Task: "none", Warnings: []string{},
		ElapsedSeconds: math.Round(elapsed.Seconds()*1000) / 1000}
	if t := m.Spec.Target; t != "" {
		d.Target = &t
		d.TargetExpression = derivedTarget(m)
	}
	if m.TargetUsed() {
		d.Task = m.Task.String()
		if d.Task == "binary" && m.Pos < len(m.Classes) {
			d.PositiveClass = &m.Classes[m.Pos]
		}
	}
	for ci, c := range m.Cols {
		cj := columnJSON{Column: c.Name}
		for ei, e := range m.Spec.EncodingsOf(ci) {
			cj.Encodings = append(cj.Encodings, encodingJSON{Encoding: e.String(), Outputs: m.EncodingOutputs(ci, ei)})
		}
		d.Columns = append(d.Columns, cj)
	}
	return d
}

// derivedTarget returns the condition of a derived target (delay>15: a
// condition on a column of the input), or nil for a column of the file.
func derivedTarget(m *pipeline.Model) *targetExpr {
	col, op, val, ok := derive.SplitCondition(m.Spec.Target)
	if !ok {
		return nil
	}
	for _, f := range m.Input {
		if f.Name == col {
			return &targetExpr{Column: col, Operator: op, Value: val}
		}
	}
	return nil
}

// checkJSONFlag refuses --json with an output on standard output, which
// the document would be mixed into.
func checkJSONFlag(on bool, out string) error {
	if on && out == tableio.Stdout {
		return usagef("--json and --out - both write to standard output; give --out a file")
	}
	return nil
}

// print writes the document to standard output.
func (d *runJSON) print() error {
	b, err := jsonout.Marshal(d)
	if err != nil {
		return err
	}
	_, err = os.Stdout.Write(b)
	return err
}
