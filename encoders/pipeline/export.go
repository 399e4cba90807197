package pipeline

import (
	"errors"

	"manyfold/encoders/colstats"
	"manyfold/io/table"
)

// LevelSlots maps the rows of one column of each batch to level slots of a
// colstats.Stats, as the fit does: a dictionary column is looked up once per
// dictionary entry; null rows get slot 0.
type LevelSlots struct{ ls levelSlots }

// NewLevelSlots returns a LevelSlots for the column at position col of the
// batches.
func NewLevelSlots(col int) *LevelSlots { return &LevelSlots{ls: levelSlots{col: col}} }

// Fill returns the slot of every row of b, adding new levels to st. The
// slice is reused by the next call.
func (l *LevelSlots) Fill(b *table.Batch, st *colstats.Stats) []int32 {
	return l.ls.fill(b, st, true)
}

// Targets reads the target column of each batch as the fit does: the task
// is decided from the first rows unless given (TaskProbe: a numeric target
// with at most 10 distinct integer values is a classification target), and
// class labels are numbered in order of appearance.
type Targets struct {
	tr      targetReader
	kind    table.Kind
	decided bool
}

// NewTargets returns a reader of the target column name at position col of
// kind kind; task is "" (detect), binary, multiclass or regression. file
// names the input in errors.
func NewTargets(file, name string, col int, kind table.Kind, task string) *Targets {
	t := &Targets{kind: kind, tr: *newTargetReader(file, name, col, kind, task, nil)}
	t.decided = task != ""
	return t
}

// Decide decides the task, when it was not given, from the first rows of
// r, and returns the reader whose batches to Read: r's, from the first.
// It reads ahead until the task is decided and keeps copies of the
// batches before, so it is called before the first batch is read.
func (t *Targets) Decide(r table.Reader) table.Reader {
	if t.decided {
		return r
	}
	t.decided = true
	p, r := probeTask(r, t.tr.col, t.kind)
	t.tr.regress = p.Regression()
	return r
}

// Read returns the class index of every row of b (classification; -1 for an
// empty target) or its value (regression; NaN for an empty target). Only
// one of the two slices is set; both are reused by the next call. The
// batches are those of the reader Decide returned.
func (t *Targets) Read(b *table.Batch) (cls []int32, vals []float64, err error) {
	if !t.decided {
		return nil, nil, errors.New("pipeline: Targets.Read before Decide")
	}
	if err := t.tr.read(b); err != nil {
		return nil, nil, err
	}
	if t.tr.regress {
		return nil, t.tr.vals, nil
	}
	return t.tr.cls, nil, nil
}

// Regression reports whether the target is read as numeric.
func (t *Targets) Regression() bool { return t.tr.regress }

// NumClasses returns the number of class labels seen so far.
func (t *Targets) NumClasses() int { return len(t.tr.order) }

// Labels returns the class labels seen so far, by class index (order of
// appearance): the label of each class number Read returns. The slice is
// the reader's own; the caller does not change it.
func (t *Targets) Labels() []string { return t.tr.order }

// Missing returns the number of rows read whose target was empty.
func (t *Targets) Missing() int64 { return t.tr.missing }

// Classes returns the class labels in sorted order (numerically for a
// numeric target) and, for each appearance index, its sorted position.
func (t *Targets) Classes() (labels []string, pos []int) {
	return sortedClasses(t.tr.order, t.tr.numeric)
}
