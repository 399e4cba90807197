package pipeline

import (
	"bytes"
	"encoding/gob"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"

	"manyfold/encoders/colstats"
	"manyfold/encoders/exactsum"
	"manyfold/encoders/method"
	"manyfold/internal/evaluate/metrics"
	"manyfold/internal/strictjson"
	"manyfold/io/table"
)

// Score is how well a column's target encoding follows the target over the
// rows of a pass whose target is known: for a binary target the AUC of the
// encoded value <column>_tmean (the Mann-Whitney form, ties counted one
// half: Hanley and McNeil, Radiology 143, 1982; metrics.AUCCounts), for a
// regression target its root mean squared error sqrt((1/N) Σ (tmean_i -
// y_i)²), the sum of squares exact (package exactsum) and rounded once, so
// that it does not depend on the order of the rows (parts of a table
// merge into the whole table's score: MergeScores). A multi-class target
// is not scored.
type Score struct {
	Metric string  // "auc" or "rmse"
	Value  float64 // NaN when it could not be computed (no row, one class)
	Rows   int64   // rows with a known target (of a fitted class)
}

// The metrics of a Score.
const (
	MetricAUC  = "auc"
	MetricRMSE = "rmse"
)

// maxScoreValues bounds the distinct encoded values counted for one
// column's AUC, so that memory does not grow with the rows: the target
// mean of the training pass takes one value per level and fold (k-fold;
// a level the other folds lack gets the fold's prior), at most two per
// level (leave-one-out), but one per row for a level's rows in file order
// (scheme ordered). A column that passes it gets no score. A variable
// only so that a test can lower it.
var maxScoreValues = 1 << 20

// metricOf returns the metric that scores a target encoding of task, or
// "" for none.
func metricOf(task colstats.Task) string {
	switch task {
	case colstats.Binary:
		return MetricAUC
	case colstats.Regression:
		return MetricRMSE
	}
	return ""
}

// scoreAcc accumulates one column's Score over the batches of a pass: for
// AUC the rows of each class counted by the encoded value (its bits), for
// RMSE the squared errors.
type scoreAcc struct {
	at      int // position of the target mean among the pass's output columns; -1: not scored
	metric  string
	pos     int32 // binary: the positive class
	index   map[uint64]int32
	vals    []float64
	npos    []float64
	nneg    []float64
	last    uint64 // the last value's bits and index: runs of one value skip the map
	lastAt  int32
	over    bool         // more than maxScoreValues distinct values
	sq      exactsum.Sum // RMSE: Σ (v_i - y_i)², exactly
	inf     bool         // RMSE: a square overflowed
	classes int          // rows of another class than the fitted ones are skipped
	rows    int64
}

// newScoreAcc returns the accumulator of a column whose target mean is the
// output column at (-1: not scored), for task.
func newScoreAcc(at int, task colstats.Task, pos, classes int) scoreAcc {
	a := scoreAcc{at: at, metric: metricOf(task), pos: int32(pos), classes: classes, lastAt: -1}
	if a.metric == "" {
		a.at = -1
	}
	if a.metric == MetricAUC && a.at >= 0 {
		a.index = map[uint64]int32{}
	}
	return a
}

// targetMeanAt returns the position of column ci's target mean among the
// outputs (at: each encoding's first output), or -1 when the column has no
// target encoding.
func (m *Model) targetMeanAt(ci int, at []int) int {
	for ei, e := range m.Spec.EncodingsOf(ci) {
		if e.Method().Name() == "target" {
			return at[ei]
		}
	}
	return -1
}

// add counts the rows of a batch: v the encoded values, cls the classes
// (-1 unknown) or vals the targets (NaN unknown).
func (a *scoreAcc) add(v []float64, cls []int32, vals []float64) {
	if a.at < 0 {
		return
	}
	if a.metric == MetricRMSE {
		for i, y := range vals {
			if math.IsNaN(y) {
				continue
			}
			a.rows++
			d := v[i] - y
			p, e := exactsum.TwoProduct(d, d) // d² = p + e exactly
			if math.IsInf(p, 0) || math.IsNaN(p) {
				a.inf = true
				continue
			}
			a.sq.Add(p)
			a.sq.Add(e)
		}
		return
	}
	if a.over {
		return
	}
	for i, c := range cls {
		if c < 0 || int(c) >= a.classes {
			continue
		}
		a.rows++
		k := math.Float64bits(v[i])
		j := a.lastAt
		if k != a.last || j < 0 {
			if j = a.slot(v[i]); j < 0 {
				return
			}
			a.last, a.lastAt = k, j
		}
		if c == a.pos {
			a.npos[j]++
		} else {
			a.nneg[j]++
		}
	}
}

// slot returns the index of value v (by its bits) among the values
// counted, adding it; -1, the column being over from then on, when it
// would be one more than maxScoreValues.
func (a *scoreAcc) slot(v float64) int32 {
	k := math.Float64bits(v)
	if j, ok := a.index[k]; ok {
		return j
	}
	if len(a.vals) == maxScoreValues {
		a.over, a.index, a.vals, a.npos, a.nneg = true, nil, nil, nil, nil
		return -1
	}
	j := int32(len(a.vals))
	a.index[k] = j
	a.vals, a.npos, a.nneg = append(a.vals, v), append(a.npos, 0), append(a.nneg, 0)
	return j
}

// score returns the accumulated Score, nil when the column is not scored
// or passed maxScoreValues.
func (a *scoreAcc) score() *Score {
	switch {
	case a.at < 0 || a.over:
		return nil
	case a.metric == MetricRMSE:
		v := math.NaN()
		switch {
		case a.rows == 0:
		case a.inf:
			v = math.Inf(1)
		default:
			v = math.Sqrt(a.sq.Float64() / float64(a.rows))
		}
		return &Score{Metric: a.metric, Value: v, Rows: a.rows}
	}
	return &Score{Metric: a.metric, Value: metrics.AUCCounts(a.vals, a.npos, a.nneg), Rows: a.rows}
}

// observer sees every batch of an encoding pass once its columns are
// encoded: the training score of the training pass (trainingScores) or
// the drift of new rows (Drift). batch runs once per batch before the
// columns, column once per column, on the column's goroutine, and finish
// once after the last batch.
type observer interface {
	batch(b *table.Batch) error
	column(ci int, rw *method.Rows, out []table.Column)
	finish(sum *Summary)
}

// trainingScores scores the target mean of each column of the training
// pass against the target, from the out-of-fold values the pass writes.
type trainingScores struct{ cols []scoreAcc }

// newTrainingScores returns the observer of the training pass, or nil when
// no column is scored. at holds each column's encodings' output positions.
func (m *Model) newTrainingScores(at [][]int) observer {
	ts := &trainingScores{cols: make([]scoreAcc, len(m.Cols))}
	any := false
	for ci, c := range m.Cols {
		p := -1
		if c.supervised {
			p = m.targetMeanAt(ci, at[ci])
		}
		ts.cols[ci] = newScoreAcc(p, m.Task, m.Pos, len(m.Classes))
		any = any || ts.cols[ci].at >= 0
	}
	if !any {
		return nil
	}
	return ts
}

func (ts *trainingScores) batch(*table.Batch) error { return nil }

func (ts *trainingScores) column(ci int, rw *method.Rows, out []table.Column) {
	a := &ts.cols[ci]
	if a.at >= 0 {
		a.add(out[a.at].Floats[:rw.N], rw.Cls, rw.Vals)
	}
}

func (ts *trainingScores) finish(sum *Summary) {
	sum.Scores = make([]*Score, len(ts.cols))
	for ci := range ts.cols {
		sum.Scores[ci] = ts.cols[ci].score()
	}
	sum.scoring = ts
}

// scoreState is the gob form of a pass's score accumulators (ScoreState).
type scoreState struct{ Cols []colScore }

type colScore struct {
	At, Classes      int
	Metric           string
	Pos              int32
	Over, Inf        bool
	Rows             int64
	Vals, Npos, Nneg []float64
	Sq               []byte // exactsum's binary form
}

// ScoreState returns the accumulators of a training pass's scores (nil
// when no column is scored), to be merged with those of the table's other
// parts (MergeScores): the scores of a sharded run's shards, encoded each
// on its own, merge into the scores one pass over the table gives.
func (s *Summary) ScoreState() ([]byte, error) {
	if s.scoring == nil {
		return nil, nil
	}
	var st scoreState
	for _, a := range s.scoring.cols {
		st.Cols = append(st.Cols, colScore{At: a.at, Classes: a.classes, Metric: a.metric, Pos: a.pos, Over: a.over, Inf: a.inf,
			Rows: a.rows, Vals: a.vals, Npos: a.npos, Nneg: a.nneg, Sq: a.sq.AppendBinary(nil)})
	}
	var buf bytes.Buffer
	if err := gob.NewEncoder(&buf).Encode(st); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// MergeScores merges the score states of the parts of a table (ScoreState,
// in any order; nil ones are skipped) into each column's Score: an AUC
// from the union of the parts' rows by value, an RMSE from the sum of
// their exact sums. nil when no part scored a column.
func MergeScores(states [][]byte) ([]*Score, error) {
	var sm ScoreMerger
	for _, b := range states {
		if err := sm.Add(b); err != nil {
			return nil, err
		}
	}
	return sm.Scores(), nil
}

// ScoreMerger merges score states one at a time (MergeScores), so that
// only the merged accumulators stay in memory. The zero value is ready.
type ScoreMerger struct {
	cols  []scoreAcc
	parts int
}

// Add merges the state of one more part (nil: a part that scored nothing).
func (sm *ScoreMerger) Add(b []byte) error {
	sm.parts++
	if b == nil {
		return nil
	}
	var st scoreState
	if err := gob.NewDecoder(bytes.NewReader(b)).Decode(&st); err != nil {
		return fmt.Errorf("the scores of part %d: %w", sm.parts, err)
	}
	if sm.cols == nil {
		sm.cols = make([]scoreAcc, len(st.Cols))
		for ci, c := range st.Cols {
			sm.cols[ci] = scoreAcc{at: c.At, metric: c.Metric, pos: c.Pos, classes: c.Classes, lastAt: -1, index: map[uint64]int32{}}
		}
	}
	if len(st.Cols) != len(sm.cols) {
		return fmt.Errorf("the scores of part %d: %d columns, not %d", sm.parts, len(st.Cols), len(sm.cols))
	}
	for ci, c := range st.Cols {
		if err := sm.cols[ci].merge(c); err != nil {
			return fmt.Errorf("the scores of part %d, column %d: %w", sm.parts, ci+1, err)
		}
	}
	return nil
}

// Scores returns each column's merged Score, nil when no part scored a
// column.
func (sm *ScoreMerger) Scores() []*Score {
	if sm.cols == nil {
		return nil
	}
	out := make([]*Score, len(sm.cols))
	for ci := range sm.cols {
		out[ci] = sm.cols[ci].score()
	}
	return out
}

// merge adds a part's accumulator to a.
func (a *scoreAcc) merge(c colScore) error {
	if c.At != a.at || c.Metric != a.metric || len(c.Npos) != len(c.Vals) || len(c.Nneg) != len(c.Vals) {
		return errors.New("not the scores of the same columns")
	}
	if a.at < 0 {
		return nil
	}
	a.rows += c.Rows
	if a.metric == MetricRMSE {
		var sq exactsum.Sum
		if err := sq.Decode(c.Sq); err != nil {
			return err
		}
		a.sq.AddSum(&sq)
		a.inf = a.inf || c.Inf
		return nil
	}
	if c.Over {
		a.over, a.index, a.vals, a.npos, a.nneg = true, nil, nil, nil, nil
	}
	if a.over {
		return nil
	}
	for i, v := range c.Vals {
		j := a.slot(v)
		if j < 0 {
			return nil
		}
		a.npos[j] += c.Npos[i]
		a.nneg[j] += c.Nneg[i]
	}
	return nil
}

// RecordScores records the training pass's scores (Summary.Scores, one per
// column, nil for none) in the staged manifest as each column's
// training_score, for apply's drift report. A score that could not be
// computed (NaN) is not recorded; nil scores record nothing. It rewrites
// the manifest before the tables are committed.
func (s *StagedTables) RecordScores(scores []*Score) error {
	if scores == nil { // no column scored
		return nil
	}
	path := filepath.Join(s.Name(), ManifestName)
	data, err := os.ReadFile(path)
	if err != nil {
		return fmt.Errorf("tables: %w", err)
	}
	var mf Manifest
	if err := strictjson.Decode(data, &mf); err != nil {
		return fmt.Errorf("tables: %s: %w", path, err)
	}
	if len(scores) != len(mf.Columns) {
		return fmt.Errorf("tables: %d scores for %d columns", len(scores), len(mf.Columns))
	}
	for i, sc := range scores {
		if sc != nil && !math.IsNaN(sc.Value) {
			v := sc.Value
			mf.Columns[i].TrainingScore = &v
		}
	}
	return writeManifest(path, &mf)
}

// newObserver returns the observer of a pass over batches of schema: the
// training scores of a training pass, the drift of new rows when asked
// for, or nil. at holds each column's encodings' output positions.
func (m *Model) newObserver(schema *table.Schema, opt EncodeOptions, at [][]int) (observer, error) {
	switch {
	case opt.Use == Training:
		return m.newTrainingScores(at), nil
	case opt.Drift != nil:
		return opt.Drift.start(m, schema, opt.File, at)
	}
	return nil, nil
}
