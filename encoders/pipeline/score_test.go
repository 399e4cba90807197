package pipeline

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// scoreCSV is a table of n rows whose target late leans on pc (nulls among
// them), with a regression target weight and a three-class grade.
func scoreCSV(n int) string {
	var b strings.Builder
	b.WriteString("pc,sender,late,weight,grade\n")
	for i := 0; i < n; i++ {
		k := (i*i + i/7) % 41
		pc := fmt.Sprintf("P%02d", k)
		if i%13 == 6 {
			pc = ""
		}
		late := 0
		if (k%5 == 0 && i%3 != 0) || i%7 == 1 {
			late = 1
		}
		fmt.Fprintf(&b, "%s,S%d,%d,%d.%d,%c\n", pc, (i*11)%97, late, k+i%9, i%4, 'A'+(i+k)%3)
	}
	return b.String()
}

// column is a table read whole as text, by column name ("" for null).
type textCols map[string][]string

// captureWriter keeps the text of every value of the batches written.
type captureWriter struct {
	names []string
	cols  textCols
}

func (w *captureWriter) Write(b *table.Batch) error {
	for j, n := range w.names {
		for i := 0; i < b.Rows; i++ {
			w.cols[n] = append(w.cols[n], string(b.Cols[j].AppendText(nil, i)))
		}
	}
	return nil
}

func (w *captureWriter) Close() error { return nil }

// encodeCSV fits sp on the CSV text (a file in a new directory), runs the
// training pass, and returns the model, the pass's summary and its output.
func encodeCSV(t *testing.T, text string, sp Spec) (*Model, Summary, textCols, string) {
	t.Helper()
	dir := t.TempDir()
	in := filepath.Join(dir, "train.csv")
	if err := os.WriteFile(in, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	open := func() table.Reader {
		r, err := tableio.Open(in, tableio.ReadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { r.Close() })
		return r
	}
	r := open()
	m, err := Fit(r, sp, FitOptions{File: in, Tables: true})
	if err != nil {
		t.Fatal(err)
	}
	r = open()
	s, _, _, err := m.OutputSchema(in, r.Schema(), Training)
	if err != nil {
		t.Fatal(err)
	}
	w := &captureWriter{names: s.Names(), cols: textCols{}}
	sum, err := m.Encode(r, w, EncodeOptions{File: in})
	if err != nil {
		t.Fatal(err)
	}
	return m, sum, w.cols, dir
}

// floats parses the values of a column.
func floats(t *testing.T, vals []string) []float64 {
	t.Helper()
	out := make([]float64, len(vals))
	for i, v := range vals {
		f, err := strconv.ParseFloat(v, 64)
		if err != nil {
			t.Fatalf("value %d %q: %v", i, v, err)
		}
		out[i] = f
	}
	return out
}

// mannWhitney is the AUC of score against the rows whose label is pos,
// counted pair by pair: each positive against each negative, 1 for a win,
// 1/2 for a tie (Hanley and McNeil, 1982).
func mannWhitney(score []float64, label []string, pos string) float64 {
	var wins, pairs float64
	for i := range score {
		if label[i] != pos {
			continue
		}
		for j := range score {
			if label[j] == pos {
				continue
			}
			pairs++
			switch {
			case score[i] > score[j]:
				wins++
			case score[i] == score[j]:
				wins += 0.5
			}
		}
	}
	return wins / pairs
}

// rmseOf is sqrt(mean((yhat - y)^2)) over the rows, y parsed from text.
func rmseOf(t *testing.T, yhat []float64, y []string) float64 {
	var s float64
	for i, v := range floats(t, y) {
		s += (yhat[i] - v) * (yhat[i] - v)
	}
	return math.Sqrt(s / float64(len(y)))
}

// TestTrainingScores checks each column's training score against the
// AUC of its written target mean, counted pair by pair, or its RMSE, for
// the training schemes; a multi-class target and a column without a
// target encoding get none, and a column of more distinct values than
// maxScoreValues none either.
func TestTrainingScores(t *testing.T) {
	text := scoreCSV(1500)
	for _, c := range []struct {
		target, task, scheme string
	}{
		{"late", "binary", "kfold"}, {"late", "binary", "loo"}, {"late", "binary", "ordered"}, {"late", "binary", "none"},
		{"weight", "regression", "kfold"}, {"weight", "regression", "ordered"},
		{"grade", "multiclass", "kfold"},
	} {
		t.Run(c.target+" "+c.scheme, func(t *testing.T) {
			sp := planSpec(t, "pc=target:eb+freq,sender=target:m=5,late=freq")
			if c.target == "late" {
				sp.Encodings = mustPlan(t, "pc=target:eb+freq,sender=target:m=5,grade=freq")
			}
			sp.Columns = nil
			sp.Target, sp.Task, sp.Scheme = c.target, c.task, mustScheme(t, c.scheme)
			sp.Folds = 3
			_, sum, out, _ := encodeCSV(t, text, sp)
			if c.task == "multiclass" {
				if sum.Scores != nil {
					t.Fatalf("multi-class target: scores %v, want none", sum.Scores)
				}
				return
			}
			if len(sum.Scores) != 3 || sum.Scores[2] != nil {
				t.Fatalf("scores %v: want 3, the third (freq only) nil", sum.Scores)
			}
			for i, col := range []string{"pc", "sender"} {
				sc := sum.Scores[i]
				v := floats(t, out[col+"_tmean"])
				var want float64
				if c.task == "binary" {
					want = mannWhitney(v, out["late"], "1")
				} else {
					want = rmseOf(t, v, out["weight"])
				}
				if sc == nil || sc.Metric != metricOf(mustTask(t, c.task)) || sc.Rows != 1500 || !(math.Abs(sc.Value-want) <= 1e-12) {
					t.Errorf("%s: score %+v, want %s %.17g over 1500 rows", col, sc, metricOf(mustTask(t, c.task)), want)
				}
			}
		})
	}
	t.Run("too many distinct values", func(t *testing.T) {
		defer func(n int) { maxScoreValues = n }(maxScoreValues)
		maxScoreValues = 50 // the ordered scheme gives pc's rows more
		sp := planSpec(t, "target:eb")
		sp.Columns, sp.Target, sp.Scheme = []string{"pc"}, "late", mustScheme(t, "ordered")
		_, sum, _, _ := encodeCSV(t, text, sp)
		if len(sum.Scores) != 1 || sum.Scores[0] != nil {
			t.Errorf("scores %v, want one nil", sum.Scores)
		}
	})
}

func mustScheme(t *testing.T, s string) method.Pass {
	t.Helper()
	p, ok := method.ParseScheme(s)
	if !ok {
		t.Fatalf("scheme %q", s)
	}
	return p
}

func mustTask(t *testing.T, s string) colstats.Task {
	t.Helper()
	task, err := colstats.ParseTask(s)
	if err != nil {
		t.Fatal(err)
	}
	return task
}

// TestRecordScores: the staged manifest gains each column's training_score
// and nothing else (the manifest without it is byte for byte the one
// written before), LoadTablesManifest returns it, and nil scores leave the
// manifest as it was.
func TestRecordScores(t *testing.T) {
	sp := planSpec(t, "pc=target:eb+freq,sender=freq")
	sp.Columns, sp.Target = nil, "late"
	m, sum, _, dir := encodeCSV(t, scoreCSV(800), sp)
	tables := filepath.Join(dir, "tables")
	st, err := m.StageTables(tables)
	if err != nil {
		t.Fatal(err)
	}
	before, err := os.ReadFile(filepath.Join(st.Name(), ManifestName))
	if err != nil {
		t.Fatal(err)
	}
	if err := st.RecordScores(nil); err != nil {
		t.Fatal(err)
	}
	if again, _ := os.ReadFile(filepath.Join(st.Name(), ManifestName)); string(again) != string(before) {
		t.Errorf("nil scores changed the manifest")
	}
	if err := st.RecordScores(sum.Scores); err != nil {
		t.Fatal(err)
	}
	if err := st.Commit(); err != nil {
		t.Fatal(err)
	}
	after, err := os.ReadFile(filepath.Join(tables, ManifestName))
	if err != nil {
		t.Fatal(err)
	}
	stripped := regexp.MustCompile(`,\n\s*"training_score": [^\n]*`).ReplaceAllString(string(after), "")
	if stripped != string(before) {
		t.Errorf("the manifest changed beyond training_score:\n%s\nwas\n%s", after, before)
	}
	_, mf, err := LoadTablesManifest(tables)
	if err != nil {
		t.Fatal(err)
	}
	if got := mf.Columns[0].TrainingScore; got == nil || *got != sum.Scores[0].Value {
		t.Errorf("pc's training_score %v, want %v", got, sum.Scores[0].Value)
	}
	if got := mf.Columns[1].TrainingScore; got != nil {
		t.Errorf("sender (freq only) has training_score %v", *got)
	}
}

// TestLoadTrainingScore: a training_score out of its domain, or on a
// column that cannot have one, is refused naming the field.
func TestLoadTrainingScore(t *testing.T) {
	multi := func(tb testing.TB) Spec { sp := loadSpec(tb); sp.Target = "grade"; return sp }
	regression := func(tb testing.TB) Spec { sp := loadSpec(tb); sp.Target = "weight"; sp.Task = "regression"; return sp }
	freqOnly := func(tb testing.TB) Spec { return planSpec(tb, "freq") }
	const at = "columns[0].training_score"
	runLoadCases(t, []loadCase{
		{"AUC above 1", nil, setCol("training_score", 1.5), []string{at + " 1.5", "AUC within [0, 1]"}},
		{"AUC negative", nil, setCol("training_score", -0.25), []string{at + " -0.25", "AUC"}},
		{"RMSE negative", regression, setCol("training_score", -1), []string{at + " -1", "RMSE of at least 0"}},
		{"multi-class", multi, setCol("training_score", 0.5), []string{at, "binary or regression"}},
		{"no target encoding", freqOnly, setCol("training_score", 0.5), []string{at, "no target encoding"}},
		{"not a number", nil, setCol("training_score", "high"), []string{"training_score"}},
	})
}
