package pipeline

import (
	"errors"
	"fmt"
	"slices"
	"sync"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/internal/guard"
	"manyfold/internal/hugemem"
	"manyfold/internal/param"
	"manyfold/io/csvio"
	"manyfold/io/table"
	"manyfold/io/tableio"
)

// Model is a fitted encoding job: the statistics of every column and the
// values derived from them.
type Model struct {
	Spec    Spec
	Input   []table.Field // the input columns as read at fit time
	Task    colstats.Task
	Classes []string // classification: labels in sorted order; the positive class is the last of two
	Pos     int      // binary: slot of the positive class
	Rows    int64    // rows fitted
	Missing int64    // rows whose target was unknown (encoded, not counted)
	// Origin is, for a regression target, the first known target value in
	// file order: every column's sums are taken about it (Stats.Origin).
	Origin float64
	Cols   []*Col

	threads int // FitOptions.Threads: mapping tables written at once
	// exact: loading keeps a regression target's exact sums from the
	// tables (LoadTables, for Merge); apply reads the rounded ones only.
	exact bool
}

// Col is the fitted state of one encoded column.
type Col struct {
	Name  string
	Kind  table.Kind
	Index int // position in the input schema
	St    *colstats.Stats
	Keep  []bool // per slot: counted as seen (min-level-rows, nulls unseen)

	// Fits are the column's encodings, fitted (or loaded from its mapping
	// table), in the spec's order.
	Fits []method.Fitted
	// info is what the encodings see of the column.
	info *method.Column
	// supervised: the column's statistics hold the target (an encoding of
	// it reads the target); otherwise they hold row counts only.
	supervised bool

	Order   []uint32  // slots in canonical order (Stats.Sorted), once order has run
	ordered sync.Once // guards Order
	total   float64   // rows of all levels, for frequency shares

	// Hierarchical prior: the parent levels and, with a prefix prior, each
	// slot's parent. With a column prior the parent is the row's value of
	// that column, shared by every column with that prior, and ParentOf is
	// nil.
	Parent   *Col
	ParentOf []int32
	// parentAt is, with a column prior, the parent's position among the
	// columns the fit gathers (see Fit).
	parentAt int
	// nest, with a column prior, records for each level the parent of its
	// rows: the slot of the parent level all of them had, noParent before
	// the first, or mixedParents when they had several (see
	// Stats.Parents).
	nest []int32
	// rowSlots, for a column loaded from a mapping table, is the slot of
	// each of the table's rows.
	rowSlots []int32

	// replay holds the slots of the fit's rows for the encode pass over
	// the same table, for a column whose levels are nearly all distinct.
	replay *replay
}

// FitOptions carries what Fit needs beyond the Spec.
type FitOptions struct {
	File      string // for error messages
	TotalRows int64  // rows in the table, when known (needed for the fold rule ordered)
	Threads   int    // columns processed at once; below 2 means one at a time
	Progress  func(rows int64)
	// Tables says that the caller writes the mapping tables, which list
	// each column's levels in canonical order: with two threads or more,
	// Fit starts sorting them while it derives the columns' values, on
	// the core the derivation leaves idle (most of its time goes to the
	// column with the most levels, on one core).
	Tables bool
}

// presizeRows is how many rows Fit reads before it decides whether a
// column is nearly unique (see Levels.Reserve).
const presizeRows = 50000

// Fit reads every batch of r (the first pass) and gathers the statistics of
// the spec's columns, in three stages: newFitter finds the columns it
// reads, pass counts every row, and finish settles the target's classes,
// the hierarchical priors and each encoding's fit. It does not close r.
func Fit(r table.Reader, sp Spec, opt FitOptions) (*Model, error) {
	if err := sp.Validate(); err != nil {
		return nil, err
	}
	f, err := newFitter(r.Schema(), sp, opt)
	if err != nil {
		return nil, err
	}
	if err := f.pass(r); err != nil {
		return nil, err
	}
	return f.finish()
}

// fitter is the state of a fit: the columns it gathers and, during the
// pass, the batch whose rows are still to be counted.
type fitter struct {
	m      *Model
	sp     *Spec
	opt    FitOptions
	schema *table.Schema
	// all holds the encoded columns, then the parent levels of column
	// priors (prior=column:COL), each gathered like an encoded column.
	all   []*Col
	slots []levelSlots
	tcol  int // the target's position, -1 when no encoding or fold rule reads it
	tr    *targetReader
	task  colstats.Task // Regression once a numeric target is detected (or given)
	fa    *foldAssigner
	order *orderCheck

	// The pass: the row count when known before reading, whether each
	// column's level table was sized, second slot buffers, the counts of
	// the last two batches, the class labels met so far.
	total     int64
	estimate  table.RowEstimator
	sized     []bool
	spare     [][]int32
	counts    [2]batchCounts
	pending   *batchCounts
	step      int
	decided   bool
	originSet bool
	classes   int
}

// newFitter finds every column the fit reads in schema, and the target
// reader and fold assigner.
func newFitter(schema *table.Schema, sp Spec, opt FitOptions) (*fitter, error) {
	f := &fitter{sp: &sp, opt: opt, schema: schema, tcol: -1}
	m := &Model{Spec: sp, Input: append([]table.Field(nil), schema.Fields...), threads: opt.Threads}
	f.m, f.sp = m, &m.Spec
	needTarget := sp.supervised() || sp.FoldBy.Needs().Class
	if sp.Target != "" {
		f.tcol = schema.Index(sp.Target)
		if f.tcol < 0 {
			return nil, &ColumnError{File: opt.File, Param: ParamTarget, Name: sp.Target, Have: schema.Names()}
		}
	}
	if !needTarget {
		f.tcol = -1
	}
	gcol := -1
	if g := sp.groupColumn(); g != "" {
		gcol = schema.Index(g)
		if gcol < 0 {
			return nil, &ColumnError{File: opt.File, Param: ParamGroup, Name: g, Have: schema.Names()}
		}
	}
	for _, name := range sp.Columns {
		i := schema.Index(name)
		if i < 0 {
			return nil, &ColumnError{File: opt.File, Param: ParamColumns, Name: name, Have: schema.Names()}
		}
		if i == f.tcol {
			return nil, usageErr("column %q is the target; it cannot be encoded", name)
		}
		m.Cols = append(m.Cols, &Col{Name: name, Kind: schema.Fields[i].Kind, Index: i, supervised: needTarget && sp.columnSupervised(len(m.Cols))})
	}
	if sp.OrderBy != "" {
		i := schema.Index(sp.OrderBy)
		if i < 0 {
			return nil, &ColumnError{File: opt.File, Param: ParamOrderBy, Name: sp.OrderBy, Have: schema.Names()}
		}
		k := schema.Fields[i].Kind
		f.order = &orderCheck{file: opt.File, name: sp.OrderBy, col: i, numeric: k == table.Int64 || k == table.Float64}
	}
	if sp.FoldBy.Needs().Total && sp.folds() > 1 && opt.TotalRows <= 0 {
		return nil, fmt.Errorf("the fold rule %s needs the row count of the input", sp.FoldBy)
	}
	if f.tcol >= 0 {
		f.tr = newTargetReader(opt.File, sp.Target, f.tcol, schema.Fields[f.tcol].Kind, sp.Task, nil)
		if sp.Task != "" {
			f.decided = true
			if f.tr.regress {
				f.task = colstats.Regression
			}
		}
	}
	f.fa = newFoldAssigner(f.sp, gcol, opt.TotalRows)
	f.all = m.Cols
	for _, c := range m.Cols {
		f.slots = append(f.slots, levelSlots{col: c.Index, nullSlot: 0, settle: true})
	}
	if f.tcol >= 0 {
		if err := f.addParents(); err != nil {
			return nil, err
		}
	}
	return f, nil
}

// addParents adds the parent levels of every column prior
// (prior=column:COL): that column's values, gathered like an encoded
// column's and shared by every column with that prior.
func (f *fitter) addParents() error {
	m, sp := f.m, f.sp
	for _, name := range sp.priorColumns() {
		i := f.schema.Index(name)
		if i < 0 {
			return &ColumnError{File: f.opt.File, By: "prior=column:" + name, Name: name, Have: f.schema.Names()}
		}
		if i == f.tcol {
			return usageErr("prior=column:%s is the target", name)
		}
		parent := &Col{Name: name, Kind: f.schema.Fields[i].Kind, Index: i, supervised: true}
		at := len(f.all)
		for ci, c := range m.Cols {
			if sp.prior(ci).Column == name {
				c.Parent, c.parentAt, c.nest = parent, at, []int32{}
			}
		}
		f.all = append(f.all[:len(f.all):len(f.all)], parent)
		f.slots = append(f.slots, levelSlots{col: i, settle: true})
	}
	return nil
}

// pass reads every batch of r and counts its rows.
func (f *fitter) pass(r table.Reader) error {
	// The row count, when a reader knows it before reading (Parquet), or
	// its estimate part way through (CSV), for sizing the level table of
	// a nearly unique column at once (intern): found under the readers
	// that wrap the file's (ReadAhead, derived columns).
	f.total = f.opt.TotalRows
	if f.total <= 0 {
		f.total = table.RowCount(r)
	}
	f.estimate, _ = table.Find[table.RowEstimator](r)
	if f.tr != nil && !f.decided {
		var p *TaskProbe
		p, r = probeTask(r, f.tcol, f.schema.Fields[f.tcol].Kind)
		f.decided = true
		if p.Regression() {
			f.task = colstats.Regression
		}
	}
	n := len(f.all)
	f.sized, f.spare = make([]bool, n), make([][]int32, n)
	f.counts = [2]batchCounts{newBatchCounts(n), newBatchCounts(n)}
	if err := table.ForEach(r, f.batch); err != nil {
		return err
	}
	if f.pending != nil {
		each(len(f.all), f.opt.Threads, func(ci int) { f.count(ci, f.pending) })
	}
	return nil
}

// batch takes one batch of the pass: its targets and folds, the levels of
// its rows, and the counting of the batch before.
func (f *fitter) batch(b *table.Batch) error {
	m := f.m
	if f.order != nil {
		if err := f.order.check(b); err != nil {
			return err
		}
	}
	if m.Cols[0].St == nil {
		f.newStats()
	}
	cls, vals, labels, err := f.targets(b)
	if err != nil {
		return err
	}
	fold, err := f.fa.assign(b, cls, labels)
	if err != nil {
		return err
	}
	seen := m.Rows + int64(b.Rows)
	// Stage 1 of this batch (interning its levels) runs beside stage 2
	// of the last one (counting its rows), column by column: the two
	// touch different parts of a column's statistics (Stats.InternBatch),
	// so that an id column's interning, the longest task, need not
	// wait for anything else. Every column still sees its batches in
	// file order, so the result does not depend on the threads.
	next := &f.counts[f.step%2]
	f.step++
	next.take(b.Rows, cls, vals, fold)
	tasks := make([]func(), 0, 2*len(f.all))
	for _, ci := range byLevels(f.all) {
		tasks = append(tasks, func() { f.intern(ci, b, next, seen) })
	}
	if last := f.pending; last != nil {
		for ci := range f.all {
			tasks = append(tasks, func() { f.count(ci, last) })
		}
	}
	each(len(tasks), f.opt.Threads, func(i int) { tasks[i]() })
	f.pending = next
	m.Rows += int64(b.Rows)
	if f.opt.Progress != nil {
		f.opt.Progress(m.Rows)
	}
	return nil
}

// newStats creates every column's statistics, once the task is known:
// row counts only for a column whose encodings do not read the target.
func (f *fitter) newStats() {
	for _, c := range f.all {
		task := f.task
		if !c.supervised {
			task = colstats.Binary // row counts only
		}
		c.St = colstats.New(task, f.sp.folds(), 0, 1024)
		if f.originSet && c.supervised {
			c.St.Origin = f.m.Origin // a shard's, from its plan
		}
	}
	for _, c := range f.m.Cols {
		c.replay = newReplay(c.St.NumLevels())
	}
}

// targets reads the batch's target: class numbers or values (nil without a
// target), and the class labels met so far. It takes the first known
// value of a numeric target as every column's origin, and widens the
// columns' class counts as new classes appear.
func (f *fitter) targets(b *table.Batch) (cls []int32, vals []float64, labels []string, err error) {
	tr := f.tr
	if tr == nil {
		return nil, nil, nil, nil
	}
	tr.regress = f.task == colstats.Regression
	if err := tr.read(b); err != nil {
		return nil, nil, nil, err
	}
	if tr.regress {
		if !f.originSet {
			for _, y := range tr.vals {
				if y == y { // the first known target
					f.originSet = true
					f.m.Origin = y
					for _, c := range f.all {
						c.St.Origin = y
					}
					break
				}
			}
		}
		return nil, tr.vals, tr.order, nil
	}
	if n := len(tr.order); n > f.classes {
		f.classes = n
		for _, c := range f.all {
			if c.supervised {
				c.St.AddClasses(n)
			}
		}
	}
	return tr.cls, nil, tr.order, nil
}

// intern maps the rows of column ci in b to level slots (stage 1 of a
// batch), and sizes the level table of a column whose levels are nearly
// all distinct so far (an id) for every row, rather than doubling it again
// and again.
func (f *fitter) intern(ci int, b *table.Batch, next *batchCounts, seen int64) {
	st := f.all[ci].St
	next.slots[ci] = f.slots[ci].fill(b, st, true)
	next.levels[ci] = st.Levels.Len()
	// The next fill writes other memory.
	f.slots[ci].slots, f.spare[ci] = f.spare[ci], next.slots[ci][:cap(next.slots[ci])]
	if !f.sized[ci] && (seen >= presizeRows || seen == f.total) {
		f.sized[ci] = true
		want := f.total
		if want <= 0 && f.estimate != nil {
			want = f.estimate.EstimateRows() * 21 / 20
		}
		if want > 0 && float64(st.Levels.Len()) >= 0.9*float64(seen) {
			st.Levels.Reserve(int(want) + 1)
		}
	}
}

// finish settles what the pass leaves: the row and target counts, the
// task and its classes (in sorted order), the hierarchical priors, and
// each column's seen flags and encodings' fits.
func (f *fitter) finish() (*Model, error) {
	m, sp, opt, tr, all := f.m, f.sp, f.opt, f.tr, f.all
	if m.Rows == 0 || m.Cols[0].St == nil {
		return nil, &table.DataError{File: opt.File, Err: errors.New("the table has no rows")}
	}
	if tr != nil {
		m.Missing = tr.missing
		if m.Missing == m.Rows {
			return nil, &table.DataError{File: opt.File, Column: sp.Target, Err: errors.New("target is null in every row")}
		}
	}
	if sp.folds() > 1 && m.Rows < int64(sp.folds()) {
		return nil, usageErr("%s %d is more than the %d rows of %s", ParamFolds, sp.folds(), m.Rows, opt.File)
	}
	switch {
	case tr == nil:
		m.Task = colstats.Binary // no target: only unsupervised methods
	case f.task == colstats.Regression:
		m.Task = colstats.Regression
		each(len(all), opt.Threads, func(i int) {
			if all[i].supervised {
				all[i].St.Seal() // the exact cell sums rounded, once
			}
		})
	default:
		labels, pos := sortedClasses(tr.order, tr.numeric)
		m.Classes = labels
		if len(labels) < 2 {
			return nil, &table.DataError{File: opt.File, Column: sp.Target, Err: fmt.Errorf("target has a single class %q; there is nothing to learn", labels[0])}
		}
		each(len(all), opt.Threads, func(i int) {
			if all[i].supervised {
				all[i].St.PermuteClasses(pos)
			}
		})
		m.Task = colstats.Binary
		if len(labels) > 2 {
			m.Task = colstats.Multiclass
		}
		if sp.Task == "binary" && len(labels) > 2 {
			return nil, &table.DataError{File: opt.File, Column: sp.Target, Err: param.Errorf("%s binary but the target has %d classes", ParamTask, len(labels))}
		}
		m.Pos = len(labels) - 1
	}
	for _, c := range all {
		if c.supervised {
			c.St.Task = m.Task
		}
	}
	for ci, c := range m.Cols {
		if c.nest != nil {
			for l, p := range c.nest {
				if p == noParent {
					c.nest[l] = mixedParents
				}
			}
			c.St.Parents = c.nest
		}
		if n := sp.prior(ci).Prefix; n > 0 && tr != nil {
			c.rollup(n)
		}
	}
	if opt.Tables && opt.Threads >= 2 {
		// order is safe beside derive: both only read the statistics,
		// and the first call of order sorts while later ones wait. A
		// panic here stops every commit (guard.Go).
		guard.Go(func() {
			for _, i := range byLevels(m.Cols) {
				m.Cols[i].order()
			}
		})
	}
	if err := m.checkTask(); err != nil {
		return nil, usageErr("%s: %v", opt.File, err)
	}
	m.deriveAll(opt.Threads)
	return m, nil
}

// checkTask reports an encoding that cannot serve the fitted target.
func (m *Model) checkTask() error {
	if m.Cols[0].St.Task == colstats.Binary && m.Classes == nil {
		return nil // no target
	}
	for i, c := range m.Cols {
		for _, e := range m.Spec.EncodingsOf(i) {
			if err := e.Check(m.Task, len(m.Classes)); err != nil {
				return fmt.Errorf("column %q: %w", c.Name, err)
			}
		}
	}
	return nil
}

// rollup makes the parent levels of a prefix prior: the first n bytes of
// each level.
func (c *Col) rollup(n int) {
	ps, of := c.St.Rollup(func(b []byte) []byte {
		if len(b) > n {
			return b[:n]
		}
		return b
	})
	c.Parent = &Col{Name: c.Name + " prefix", St: ps, supervised: c.supervised}
	c.ParentOf = of
	c.St.Parents = of
}

// batchCounts is what counting a batch's rows needs once the batch itself
// is gone: each column's level slots and the rows' classes or target
// values and folds.
type batchCounts struct {
	rows   int
	slots  [][]int32 // per column
	levels []int     // per column: its levels once the batch was interned
	cls    []int32
	vals   []float64
	fold   []int32
}

func newBatchCounts(cols int) batchCounts {
	return batchCounts{slots: make([][]int32, cols), levels: make([]int, cols)}
}

// take copies a batch's classes, values and folds (nil stays nil).
func (bc *batchCounts) take(rows int, cls []int32, vals []float64, fold []int32) {
	bc.rows = rows
	keep := func(dst, src []int32) []int32 {
		if src == nil {
			return nil
		}
		return append(dst[:0], src...)
	}
	bc.cls, bc.fold = keep(bc.cls, cls), keep(bc.fold, fold)
	bc.vals = nil
	if vals != nil {
		bc.vals = append(bc.vals[:0], vals...)
	}
}

// noParent and mixedParents mark a level in Col.nest with no row yet, and
// one whose rows have had several parent levels.
const (
	noParent     = -2
	mixedParents = -1
)

// count adds the rows of a batch to the statistics of column ci: stage 2
// of a batch (see batch), after its levels were interned.
func (f *fitter) count(ci int, bc *batchCounts) {
	c := f.all[ci]
	st := c.St
	st.Settle(bc.levels[ci])
	ls := bc.slots[ci]
	if c.nest != nil {
		// With a column prior the parent's slots are its column's.
		ps := bc.slots[c.parentAt]
		for len(c.nest) < st.NumLevels() {
			c.nest = append(c.nest, noParent)
		}
		for i, l := range ls {
			switch cur := c.nest[l]; cur {
			case ps[i], mixedParents:
			case noParent:
				c.nest[l] = ps[i]
			default:
				c.nest[l] = mixedParents
			}
		}
	}
	if c.replay != nil && !c.replay.record(ls) {
		c.replay = nil
	}
	switch {
	case f.tr == nil || !c.supervised:
		for _, l := range ls {
			st.AddRow(int(l))
		}
	case f.task == colstats.Regression:
		for i, l := range ls {
			if y := bc.vals[i]; y == y {
				st.AddValue(int(l), int(bc.fold[i]), y)
			} else {
				st.AddRow(int(l))
			}
		}
	default:
		for i, l := range ls {
			if k := bc.cls[i]; k >= 0 {
				st.AddClass(int(l), int(bc.fold[i]), int(k))
			} else {
				st.AddRow(int(l))
			}
		}
	}
}

// byLevels returns the positions of cols, the columns with the most levels
// first: the order in which their interning is started, so that the
// longest runs from the start.
func byLevels(cols []*Col) []int {
	idx := make([]int, len(cols))
	for i := range idx {
		idx[i] = i
	}
	slices.SortStableFunc(idx, func(a, b int) int { return cols[b].St.Levels.Len() - cols[a].St.Levels.Len() })
	return idx
}

// deriveAll derives every column, threads at a time: the parents that
// several columns may share (column priors) first, then the columns, each
// of which writes only its own Col, so the result does not depend on the
// number of threads.
func (m *Model) deriveAll(threads int) {
	for _, c := range m.Cols {
		if c.Parent != nil && c.Parent.info == nil {
			m.describe(c.Parent, nil)
		}
	}
	each(len(m.Cols), threads, func(i int) { m.derive(i, m.Cols[i]) })
}

// derive computes the seen flags of column i and fits its encodings.
func (m *Model) derive(i int, c *Col) {
	if c.Parent != nil && c.Parent.info == nil {
		m.describe(c.Parent, nil)
	}
	m.describe(c, c.Parent)
	c.Fits = make([]method.Fitted, 0, len(m.Spec.EncodingsOf(i)))
	for _, e := range m.Spec.EncodingsOf(i) {
		c.Fits = append(c.Fits, e.Fit(c.info))
	}
}

// describe computes the seen flags and row total of c and what the
// encodings see of it.
func (m *Model) describe(c *Col, parent *Col) {
	sp := &m.Spec
	st := c.St
	n := st.NumLevels()
	c.Keep = hugemem.Make[bool](n)
	// Row counts are integers: their float sum is exact (below 2^53)
	// whatever the order, so it is taken in slot order.
	c.total = 0
	var buf [4096]uint64
	for from := 0; from < n; from += len(buf) {
		rows := buf[:min(len(buf), n-from)]
		st.RowCounts(from, rows)
		keep := c.Keep[from : from+len(rows)]
		for i, rc := range rows {
			keep[i] = rc > 0 && rc >= sp.MinLevelRows
			c.total += float64(rc)
		}
	}
	if sp.NullsUnseen {
		c.Keep[0] = false
	}
	m.setInfo(c, parent)
}

// setInfo sets what the encodings see of c.
func (m *Model) setInfo(c *Col, parent *Col) {
	c.info = &method.Column{Name: c.Name, St: c.St, Keep: c.Keep, Total: c.total, Distinct: c.distinct(),
		Supervised: c.supervised, Task: m.Task, Classes: m.Classes, Pos: m.Pos, ParentOf: c.ParentOf, Order: c.order}
	if parent != nil {
		c.info.Parent = parent.info
	}
}

// distinct returns the number of levels with rows, the null level
// included when it has rows.
func (c *Col) distinct() int {
	n := c.St.Levels.Len()
	if c.St.RowCount(0) > 0 {
		n++
	}
	return n
}

// OutputNames returns the names of the encoded columns in output order.
func (m *Model) OutputNames() []string {
	var out []string
	for ci, c := range m.Cols {
		for ei := range c.Fits {
			out = append(out, m.EncodingOutputs(ci, ei)...)
		}
	}
	return out
}

// Levels returns the number of distinct levels of column i seen in the fit,
// the null level included when it has rows.
func (m *Model) Levels(i int) int { return m.Cols[i].distinct() }

// ColumnError reports a column that a parameter of the job (or the
// mapping tables) names and the input does not have, with the closest
// names it does have.
type ColumnError struct {
	File  string
	Param param.Name // the parameter that names the column (ParamTarget, ParamColumns, ...), or ""
	By    string     // what names it when no parameter does: "the mapping tables in DIR", "prior=column:route"
	Name  string
	Have  []string
}

func (e *ColumnError) Error() string { return e.Spell(nil) }

// Spell returns the message with the parameter spelled by spell.
func (e *ColumnError) Spell(spell param.Speller) string {
	by := e.By
	if e.Param != "" {
		by = param.Spell(spell, e.Param)
	}
	msg := fmt.Sprintf("%s: %s names column %q, which the file does not have", e.File, by, e.Name)
	if near := Closest(e.Name, e.Have, 3); len(near) > 0 {
		msg += "; closest: " + joinQuoted(near)
	}
	if f := tableio.FormatOf(e.File); len(e.Have) == 1 && f != tableio.Parquet && f != tableio.Arrow {
		// A CSV header read as one column holding ; or a tab: the
		// delimiter was probably another.
		if d := csvio.GuessDelimiter(e.Have[0]); d != 0 {
			msg += " (its header is one column: " + csvio.DelimiterHint(d).Spell(spell) + ")"
		}
	}
	return msg
}

// order returns the slots in canonical order.
func (c *Col) order() []uint32 {
	c.ordered.Do(func() {
		if c.Order == nil {
			c.Order = c.St.Sorted()
		}
	})
	return c.Order
}

// orderCheck verifies that a column never decreases from row to row: by
// number for a numeric column, by bytes otherwise; nulls are passed over.
type orderCheck struct {
	file, name string
	col        int
	numeric    bool
	seen       bool
	lastNum    float64
	last, cur  []byte
	// The first value passed (when seen) and its row.
	first    []byte
	firstNum float64
	firstRow int64
}

// orderBefore reports whether value (text v, number vn) must not follow
// value last (text, number lastNum): it is smaller, by number for a
// numeric column, by bytes otherwise.
func orderBefore(v []byte, vn float64, last []byte, lastNum float64, numeric bool) bool {
	if numeric {
		return vn < lastNum
	}
	return string(v) < string(last)
}

func (oc *orderCheck) check(b *table.Batch) error {
	c := &b.Cols[oc.col]
	for i := 0; i < b.Rows; i++ {
		if c.IsNull(i) {
			continue
		}
		oc.cur = c.AppendText(oc.cur[:0], i)
		var v float64
		if oc.numeric {
			var err error
			if v, _, err = c.Float(i); err != nil {
				return &table.DataError{File: oc.file, Row: b.FirstRow + int64(i), Column: oc.name, Err: err}
			}
		}
		if !oc.seen {
			oc.first, oc.firstNum, oc.firstRow = append([]byte(nil), oc.cur...), v, b.FirstRow+int64(i)
		}
		if oc.seen && orderBefore(oc.cur, v, oc.last, oc.lastNum, oc.numeric) {
			e := &table.DataError{File: oc.file, Row: b.FirstRow + int64(i), Column: oc.name,
				Err: param.Errorf("the file is not sorted by this column (%s): %q comes after %q", ParamOrderBy, oc.cur, oc.last)}
			if b.Lines != nil {
				e.Line = b.Lines[i]
			}
			return e
		}
		oc.seen = true
		oc.lastNum = v
		oc.last, oc.cur = oc.cur, oc.last
	}
	return nil
}

// each calls f(0) ... f(n-1), at most threads at a time. Every call works
// on data of its own (one column), so the result does not depend on the
// number of threads.
func each(n, threads int, f func(i int)) {
	if threads < 2 || n < 2 {
		for i := 0; i < n; i++ {
			f(i)
		}
		return
	}
	// A panic of f reaches the caller's goroutine (guard.Group), where
	// the command turns it into one line and exit code 1.
	var g guard.Group
	sem := make(chan struct{}, threads)
	for i := 0; i < n; i++ {
		sem <- struct{}{}
		g.Go(func() {
			defer func() { <-sem }()
			f(i)
		})
	}
	g.Wait()
}
