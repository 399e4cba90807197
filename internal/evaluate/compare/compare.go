package compare

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"sync"
	"time"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/internal/cmdline"
	"manyfold/internal/guard"
	"manyfold/internal/param"
	"manyfold/io/table"
)

// Options configures a comparison.
type Options struct {
	File       string      // the input's name, for messages and the result
	Target     string      // target column
	Task       string      // "" detects; binary, multiclass or regression
	Columns    []string    // categorical columns, each compared on its own
	Candidates []Candidate // nil: DefaultCandidates; the prior is added when missing
	Folds      int         // outer folds (>= 2)
	InnerFolds int         // inner folds for the training rows' target statistics (>= 2)
	Seed       uint64      // fixes the outer, inner and sample assignments
	// FoldBy is the rule of the outer and inner folds (nil: rows). The
	// inner folds follow the same rule with a salted seed, so they are
	// drawn independently of the outer ones: with group=COL all rows of a
	// group share an outer and an inner fold. Rules that need the row
	// count before the pass (ordered) are refused, and stratified needs a
	// classification target.
	FoldBy folds.Rule
	With   []string // numeric columns added to every model (also to the prior baseline)
	// Sample bounds the rows the models are fitted and scored on: each row
	// is kept when a hash of its number and the seed falls below
	// Sample/TotalRows, so about Sample rows are kept. 0 or less keeps
	// every row. The statistics always use every row.
	Sample int64
	// TotalRows is the number of rows of the table; 0 takes it from a
	// reader with a NumRows method (Parquet) and otherwise keeps every
	// row for the models.
	TotalRows int64
	Lambda    float64 // L2 weight of the models; 0 means DefaultLambda
	Threads   int     // models fitted at once; the result does not depend on it
	NoTimings bool    // leave FitSeconds at 0, for byte-identical output
	// Joint also fits one model over every column's winning encodings
	// together, on the same folds (Result.Joint).
	Joint    bool
	Progress func(rows int64) // rows read so far, after each batch of the pass over the table
	// Models, when not nil, is called as the model phase goes: at the
	// start of each column, then after each model is fitted and scored
	// (one call at a time, from the goroutine that fitted it).
	Models func(ModelStep)
}

// ModelStep places the model phase of a comparison: the column whose
// candidates are being scored, the candidate under way and the models
// fitted so far, of every column (Options.Models). The joint model of
// Options.Joint is not counted.
type ModelStep struct {
	Column             string
	ColumnNum, Columns int // the column's place, from 1, among the columns compared
	Candidate          int // the candidate under way, from 1: one more than the candidates scored on every outer fold
	Candidates         int
	ModelsDone, Models int // models fitted, of columns x candidates x outer folds
}

// Parameters that the package's messages name (param.Name), besides
// pipeline's ParamTarget, ParamColumns, ParamTask, ParamFolds (the outer
// folds) and ParamGroup.
const (
	ParamInnerFolds param.Name = "inner folds"
	ParamLambda     param.Name = "lambda"
	ParamWith       param.Name = "with"
	ParamSample     param.Name = "sample"
	ParamCandidates param.Name = "candidates"
)

// DefaultLambda is the L2 weight of every model: small enough not to
// flatten real level effects on a few hundred thousand rows, large enough
// to keep the weights of separable indicators finite.
const DefaultLambda = 1e-4

// Salts of the inner-fold and sample hashes: each is XORed into the seed so
// that the three assignments are independent.
const (
	innerSalt  uint64 = 0x9e3779b97f4a7c15
	sampleSalt uint64 = 0xc2b2ae3d27d4eb4f
)

// sampleSpan is the range of the sample hash: folds.Row(…, sampleSpan) is
// a uniform 62-bit number.
const sampleSpan = 1 << 62

// sample holds, for the rows the models use, what the models need: memory
// in proportion to the sample, not to the table.
type sample struct {
	cell  []uint16  // outer*Ki + inner
	cls   []int32   // classification: class slot (sorted order after the pass)
	val   []float64 // regression: target
	slot  [][]int32 // per column: level slot
	with  [][]float64
	count int
}

// Run reads every batch of r once, gathering the statistics of each column
// split into outer x inner fold cells and keeping the sampled rows, then
// scores every candidate on every column with nested cross-validation. It
// does not close r.
//
// Rows whose target is empty are dropped: they enter neither the statistics
// (frequency and top-k included) nor the models.
func Run(r table.Reader, opt Options) (*Result, error) {
	if err := opt.Validate(); err != nil {
		return nil, err
	}
	if opt.Candidates == nil {
		opt.Candidates, _ = ParseCandidates(DefaultCandidates)
	}
	opt.Candidates = withPrior(opt.Candidates)
	return run(r, opt)
}

// Validate checks the options that do not depend on the data, so that a
// bad flag is refused before any is read: folds 2 to 50 each, an L2 weight
// that is 0 (the default) or positive and finite, a target, columns, a
// known task and a fold rule compare can follow.
func (opt *Options) Validate() error {
	if opt.Folds < 2 || opt.Folds > 50 {
		return usage("%s %d: want 2 to 50", pipeline.ParamFolds, opt.Folds)
	}
	if opt.InnerFolds < 2 || opt.InnerFolds > 50 {
		return usage("%s %d: want 2 to 50", ParamInnerFolds, opt.InnerFolds)
	}
	if opt.Lambda < 0 || math.IsNaN(opt.Lambda) || math.IsInf(opt.Lambda, 0) {
		return usage("%s %v: want a number > 0", ParamLambda, opt.Lambda)
	}
	if opt.Target == "" {
		return usage("compare needs %s", pipeline.ParamTarget)
	}
	if len(opt.Columns) == 0 {
		return usage("compare needs %s", pipeline.ParamColumns)
	}
	switch opt.Task {
	case "", "binary", "multiclass", "regression":
	default:
		return usage("%s %q: want binary, multiclass or regression", pipeline.ParamTask, opt.Task)
	}
	rule := opt.foldRule()
	if rule.Needs().Total {
		return usage("fold rule %q: compare cannot follow it (it cuts the rows into blocks by their count, and the inner folds would have to cut each outer fold's training rows again); use rows, stratified or group=COL", rule)
	}
	if rule.Needs().Class && opt.Task == "regression" {
		return stratifiedRegression(rule, opt.Target)
	}
	if g := rule.Needs().Group; g != "" && g == opt.Target {
		return usage("fold rule %q: the group column is the target", rule)
	}
	return nil
}

// foldRule returns the fold rule of the options, rows when none is given.
func (opt *Options) foldRule() folds.Rule {
	if opt.FoldBy == nil {
		return folds.RowsRule{}
	}
	return opt.FoldBy
}

// stratifiedRegression is the error of a rule that stratifies by class
// given a numeric (regression) target.
func stratifiedRegression(rule folds.Rule, target string) error {
	return usage("fold rule %q: target %q is a regression target, which has no classes to stratify by; use rows or group=COL", rule, target)
}

// run is Run once the options are checked.
func run(r table.Reader, opt Options) (*Result, error) {
	if opt.Lambda == 0 {
		opt.Lambda = DefaultLambda
	}
	schema := r.Schema()
	find := func(p param.Name, name string) (int, error) {
		i := schema.Index(name)
		if i < 0 {
			return 0, &pipeline.ColumnError{File: opt.File, Param: p, Name: name, Have: schema.Names()}
		}
		return i, nil
	}
	tcol, err := find(pipeline.ParamTarget, opt.Target)
	if err != nil {
		return nil, err
	}
	// need lists the positions read, in the order of the selected batches:
	// the target, the columns, the numeric columns, the group column.
	need := []int{tcol}
	seen := map[string]bool{}
	for _, c := range opt.Columns {
		i, err := find(pipeline.ParamColumns, c)
		if err != nil {
			return nil, err
		}
		if i == tcol {
			return nil, usage("column %q is the target; it cannot be compared", c)
		}
		if seen[c] {
			return nil, usage("column %q is named twice in %s", c, pipeline.ParamColumns)
		}
		seen[c] = true
		need = append(need, i)
	}
	for _, c := range opt.With {
		i, err := find(ParamWith, c)
		if err != nil {
			return nil, err
		}
		if i == tcol {
			return nil, usage("%s %q is the target", ParamWith, c)
		}
		if k := schema.Fields[i].Kind; k != table.Int64 && k != table.Float64 && k != table.Bool && k != table.String {
			return nil, usage("%s %q is not numeric", ParamWith, c)
		}
		need = append(need, i)
	}
	rule := opt.foldRule()
	if g := rule.Needs().Group; g != "" {
		i, err := find(pipeline.ParamGroup, g)
		if err != nil {
			return nil, err
		}
		need = append(need, i)
	}
	tkind := schema.Fields[tcol].Kind
	// Select wants distinct positions; map each use to its place.
	pos := map[int]int{}
	var sel []int
	at := make([]int, len(need))
	for j, i := range need {
		p, ok := pos[i]
		if !ok {
			p = len(sel)
			pos[i] = p
			sel = append(sel, i)
		}
		at[j] = p
	}
	if err := r.Select(sel); err != nil {
		return nil, err
	}
	total := opt.TotalRows
	if total <= 0 {
		total = table.RowCount(r)
	}
	var threshold uint64 = sampleSpan // keep all
	if opt.Sample > 0 && total > opt.Sample {
		threshold = uint64(float64(opt.Sample) / float64(total) * sampleSpan)
	}

	ko, ki := opt.Folds, opt.InnerFolds
	nc := len(opt.Columns)
	targets := pipeline.NewTargets(opt.File, opt.Target, at[0], tkind, opt.Task)
	r = targets.Decide(r)
	slots := make([]*pipeline.LevelSlots, nc)
	for i := range slots {
		slots[i] = pipeline.NewLevelSlots(at[1+i])
	}
	withAt := at[1+nc : 1+nc+len(opt.With)]
	groupAt := -1
	if rule.Needs().Group != "" {
		groupAt = at[len(at)-1]
	}
	cells := newCellAssigner(rule, opt.Seed, ko, ki, total)
	sts := make([]*colstats.Stats, nc)
	smp := &sample{slot: make([][]int32, nc), with: make([][]float64, len(opt.With))}
	var rows, dropped int64
	var cellBuf []uint16
	var keepBuf []bool
	if err := table.ForEach(r, func(b *table.Batch) error {
		cls, vals, err := targets.Read(b)
		if err != nil {
			return err
		}
		regress := targets.Regression()
		if regress && rule.Needs().Class {
			return stratifiedRegression(rule, opt.Target)
		}
		if sts[0] == nil {
			task := colstats.Binary
			if regress {
				task = colstats.Regression
			}
			for i := range sts {
				sts[i] = colstats.New(task, ko*ki, 0, 1024)
			}
		}
		if !regress {
			if n := targets.NumClasses(); n > sts[0].Classes {
				for _, st := range sts {
					st.AddClasses(n)
				}
			}
		}
		if cap(cellBuf) < b.Rows {
			cellBuf = make([]uint16, b.Rows)
			keepBuf = make([]bool, b.Rows)
		}
		cell, keep := cellBuf[:b.Rows], keepBuf[:b.Rows]
		fb := folds.Batch{First: uint64(b.FirstRow - 1), Class: cls, Labels: targets.Labels()}
		if groupAt >= 0 {
			fb.Group = &b.Cols[groupAt]
		}
		if err := cells.assign(fb, cell); err != nil {
			return err
		}
		for i := 0; i < b.Rows; i++ {
			row := uint64(b.FirstRow - 1 + int64(i))
			known := (regress && vals[i] == vals[i]) || (!regress && cls[i] >= 0)
			if !known {
				cell[i] = math.MaxUint16
				keep[i] = false
				dropped++
				continue
			}
			rows++
			keep[i] = threshold == sampleSpan || uint64(folds.Row(opt.Seed^sampleSalt, row, sampleSpan)) < threshold
			if keep[i] {
				smp.cell = append(smp.cell, cell[i])
				if regress {
					smp.val = append(smp.val, vals[i])
				} else {
					smp.cls = append(smp.cls, cls[i])
				}
				smp.count++
			}
		}
		for ci, st := range sts {
			ls := slots[ci].Fill(b, st)
			for i, l := range ls {
				if cell[i] == math.MaxUint16 {
					continue
				}
				if regress {
					st.AddValue(int(l), int(cell[i]), vals[i])
				} else {
					st.AddClass(int(l), int(cell[i]), int(cls[i]))
				}
				if keep[i] {
					smp.slot[ci] = append(smp.slot[ci], l)
				}
			}
		}
		for wi, p := range withAt {
			c := &b.Cols[p]
			for i := 0; i < b.Rows; i++ {
				if !keep[i] {
					continue
				}
				v, ok, err := c.Float(i)
				if err != nil {
					e := &table.DataError{File: opt.File, Row: b.FirstRow + int64(i), Column: opt.With[wi], Err: param.Errorf("%s column: %v", ParamWith, err)}
					if b.Lines != nil {
						e.Line = b.Lines[i]
					}
					return e
				}
				if !ok || math.IsInf(v, 0) {
					v = math.NaN() // imputed with the training mean
				}
				smp.with[wi] = append(smp.with[wi], v)
			}
		}
		if opt.Progress != nil {
			opt.Progress(rows + dropped)
		}
		return nil
	}); err != nil {
		return nil, err
	}
	if rows+dropped == 0 {
		return nil, &table.DataError{File: opt.File, Err: errors.New("the table has no rows")}
	}
	if rows == 0 {
		return nil, &table.DataError{File: opt.File, Column: opt.Target, Err: errors.New("target is null in every row")}
	}
	res := &Result{File: opt.File, Target: opt.Target, Folds: ko, InnerFolds: ki, FoldBy: rule.String(), Seed: opt.Seed,
		Rows: rows, DroppedRows: dropped, ModelRows: int64(smp.count), With: append([]string{}, opt.With...), Lambda: opt.Lambda}
	ev := &evaluator{opt: opt, smp: smp, ko: ko, ki: ki}
	if targets.Regression() {
		ev.task = colstats.Regression
		for _, st := range sts {
			st.Seal() // the exact cell sums rounded, once
		}
	} else {
		labels, perm := targets.Classes()
		if len(labels) < 2 {
			return nil, &table.DataError{File: opt.File, Column: opt.Target, Err: fmt.Errorf("target has a single class %q; there is nothing to learn", labels[0])}
		}
		for _, st := range sts {
			st.PermuteClasses(perm)
		}
		for i, c := range smp.cls {
			smp.cls[i] = int32(perm[c])
		}
		ev.task = colstats.Binary
		if len(labels) > 2 {
			ev.task = colstats.Multiclass
		}
		if opt.Task == "binary" && len(labels) > 2 {
			return nil, &table.DataError{File: opt.File, Column: opt.Target, Err: param.Errorf("%s binary but the target has %d classes", pipeline.ParamTask, len(labels))}
		}
		ev.classes = len(labels)
		ev.classLabels = labels
		ev.pos = len(labels) - 1
		res.Classes = labels
	}
	for _, st := range sts {
		st.Task = ev.task
	}
	res.Task = ev.task.String()
	res.Metric, res.HigherBetter = primaryOf(ev.task)
	if err := ev.prepare(); err != nil {
		return nil, err
	}
	for ci, name := range opt.Columns {
		cr, err := ev.column(ci, name, sts[ci])
		if err != nil {
			return nil, err
		}
		res.Columns = append(res.Columns, cr)
	}
	res.EncodeCommand = encodeCommand(res, opt)
	if opt.Joint {
		j, err := ev.joint(res)
		if err != nil {
			return nil, err
		}
		res.Joint = j
	}
	return res, nil
}

// cellAssigner gives each row its cell outer*ki + inner. The outer and
// inner folds follow one rule, the inner drawn with the seed salted by
// innerSalt so that it is independent of the outer: with row folds a row's
// inner fold tells nothing of its outer fold, with group folds all rows of a
// group share both, and each outer fold's training groups spread over all
// inner folds.
type cellAssigner struct {
	outer, inner folds.Assigner
	ki           int
	of, in       []int32
}

func newCellAssigner(rule folds.Rule, seed uint64, ko, ki int, total int64) *cellAssigner {
	return &cellAssigner{outer: rule.Assigner(seed, ko, total), inner: rule.Assigner(seed^innerSalt, ki, total), ki: ki}
}

// assign writes the cell of each row of the batch to cell.
func (ca *cellAssigner) assign(fb folds.Batch, cell []uint16) error {
	n := len(cell)
	if cap(ca.of) < n {
		ca.of, ca.in = make([]int32, n), make([]int32, n)
	}
	of, in := ca.of[:n], ca.in[:n]
	if err := ca.outer.Assign(fb, of); err != nil {
		return err
	}
	if err := ca.inner.Assign(fb, in); err != nil {
		return err
	}
	for i := range cell {
		cell[i] = uint16(int(of[i])*ca.ki + int(in[i]))
	}
	return nil
}

// encodeCommand returns the manyfold encode command that encodes every
// column with a winner by its winning encodings (the per-column form), with
// the comparison's target, task, fold rule and seed; "" when no column has
// a winner.
func encodeCommand(res *Result, opt Options) string {
	var plan method.Plan
	for _, c := range res.Columns {
		for _, k := range c.Candidates {
			if !k.Winner {
				continue
			}
			encs, err := method.ParseList(k.Name)
			if err != nil {
				panic(fmt.Sprintf("compare: the winner %q does not parse: %v", k.Name, err)) // names are canonical
			}
			plan.PerColumn = append(plan.PerColumn, method.ColumnEncodings{Column: c.Column, Encodings: encs})
		}
	}
	if plan.PerColumn == nil {
		return ""
	}
	var flags []string
	if opt.Task != "" {
		flags = append(flags, "--task", opt.Task)
	}
	if res.FoldBy != "rows" {
		flags = append(flags, "--fold-by", res.FoldBy)
	}
	if opt.Seed != 0 {
		flags = append(flags, "--seed", strconv.FormatUint(opt.Seed, 10))
	}
	return cmdline.Encode(res.File, res.Target, plan, flags...)
}

// usage returns a usage error of a format and its arguments, among which
// a param.Name names a parameter.
func usage(format string, a ...any) error {
	return &pipeline.UsageError{Msg: param.Textf(format, a...)}
}

// primaryOf names the metric candidates are ranked by.
func primaryOf(t colstats.Task) (string, bool) {
	switch t {
	case colstats.Regression:
		return "rmse", false
	case colstats.Multiclass:
		return "log_loss", false
	}
	return "auc", true
}

// metricNames lists the metrics of a task, the primary first.
func metricNames(t colstats.Task) []string {
	switch t {
	case colstats.Regression:
		return []string{"rmse", "mae", "r2"}
	case colstats.Multiclass:
		return []string{"log_loss", "accuracy", "mean_ovr_auc"}
	}
	return []string{"auc", "log_loss", "brier"}
}

// higherBetter reports whether a larger value of the metric is better.
func higherBetter(name string) bool {
	switch name {
	case "auc", "accuracy", "mean_ovr_auc", "r2":
		return true
	}
	return false
}

// evaluator scores the candidates of every column on the sample.
type evaluator struct {
	opt         Options
	smp         *sample
	task        colstats.Task
	classes     int
	classLabels []string // classification: the labels in sorted order
	pos         int
	ko, ki      int
	// useOut[f]: the cells of the outer training rows of fold f;
	// useIn[f][g]: those whose inner fold is not g either.
	useOut [][]bool
	useIn  [][][]bool
	states []*colState // per column, with Options.Joint
	train  [][]int     // per outer fold: the sample rows it trains on
	test   [][]int     // per outer fold: its held-out sample rows
}

func (ev *evaluator) prepare() error {
	cells := ev.ko * ev.ki
	ev.useOut = make([][]bool, ev.ko)
	ev.useIn = make([][][]bool, ev.ko)
	for f := 0; f < ev.ko; f++ {
		ev.useOut[f] = make([]bool, cells)
		ev.useIn[f] = make([][]bool, ev.ki)
		for g := 0; g < ev.ki; g++ {
			ev.useIn[f][g] = make([]bool, cells)
		}
		for c := 0; c < cells; c++ {
			o, in := c/ev.ki, c%ev.ki
			ev.useOut[f][c] = o != f
			for g := 0; g < ev.ki; g++ {
				ev.useIn[f][g][c] = o != f && in != g
			}
		}
	}
	ev.train = make([][]int, ev.ko)
	ev.test = make([][]int, ev.ko)
	for i, c := range ev.smp.cell {
		o := int(c) / ev.ki
		ev.test[o] = append(ev.test[o], i)
		for f := 0; f < ev.ko; f++ {
			if f != o {
				ev.train[f] = append(ev.train[f], i)
			}
		}
	}
	for f := 0; f < ev.ko; f++ {
		if len(ev.train[f]) < 2 || len(ev.test[f]) < 1 {
			return usage("too few rows for %d folds: outer fold %d has %d training and %d held-out rows of the %d the models use (lower %s or raise %s)",
				ev.ko, f+1, len(ev.train[f]), len(ev.test[f]), ev.smp.count, pipeline.ParamFolds, ParamSample)
		}
	}
	return nil
}

// colState is what every candidate of one column shares.
type colState struct {
	st    *colstats.Stats
	order []uint32
	slot  []int32
	// foldRows[f][l]: rows of level l among the outer training rows of f.
	foldRows [][]uint64
	// views[f] is outer fold f's view of the statistics (see view).
	views []foldView
}

// foldView is the statistics of the training cells of one outer fold,
// grouped by inner fold, as the methods see a column, made once by the
// first candidate that needs them; by prefix length, the same with the
// parent levels of a prefix prior.
type foldView struct {
	once     sync.Once
	col      *method.Column
	mu       sync.Mutex
	prefixed map[int]*method.Column
}

// view returns outer fold f's view of the column, for an encoding with
// hierarchical prior p (a prefix prior, or none): statistics with the
// inner folds as folds (colstats.Stats.Collapse), so that a method fits a
// training row of inner fold g from the other inner folds of the fold's
// training cells, as encode fits a row of fold g; a level is seen when it
// has rows among them.
func (cs *colState) view(ev *evaluator, f int, p method.Prior) *method.Column {
	v := &cs.views[f]
	v.once.Do(func() {
		group := make([]int, ev.ko*ev.ki)
		for c := range group {
			group[c] = -1
			if c/ev.ki != f {
				group[c] = c % ev.ki
			}
		}
		v.col = ev.methodColumn(cs.st.Collapse(group, ev.ki), cs.order)
	})
	if p.Prefix == 0 {
		return v.col
	}
	v.mu.Lock()
	defer v.mu.Unlock()
	if c := v.prefixed[p.Prefix]; c != nil {
		return c
	}
	n := p.Prefix
	ps, of := v.col.St.Rollup(func(b []byte) []byte {
		if len(b) > n {
			return b[:n]
		}
		return b
	})
	// The column's m is then estimated within parents (Stats.Parents), as
	// encode estimates it; the statistics themselves are shared.
	st := *v.col.St
	st.Parents = of
	c := ev.methodColumn(&st, cs.order)
	c.Parent, c.ParentOf = ev.methodColumn(ps, ps.Sorted()), of
	if v.prefixed == nil {
		v.prefixed = map[int]*method.Column{}
	}
	v.prefixed[n] = c
	return c
}

// methodColumn describes statistics to the methods: a level is seen when it has
// rows; order is the slots' canonical order.
func (ev *evaluator) methodColumn(st *colstats.Stats, order []uint32) *method.Column {
	c := &method.Column{St: st, Keep: make([]bool, st.NumLevels()), Supervised: true, Task: ev.task,
		Classes: ev.classLabels, Pos: ev.pos, Order: func() []uint32 { return order }}
	for l := range c.Keep {
		if n := st.RowCount(l); n > 0 {
			c.Keep[l] = true
			c.Total += float64(n)
			c.Distinct++
		}
	}
	return c
}

// job is one (candidate, outer fold) fit.
type job struct {
	cand, fold int
}

// foldScore is what one job measures.
type foldScore struct {
	test, train []float64 // metrics in metricNames order
	seconds     float64
	outCols     int
	unseen      float64
	err         error
}

func (ev *evaluator) column(ci int, name string, st *colstats.Stats) (ColumnResult, error) {
	cs := &colState{st: st, order: st.Sorted(), slot: ev.smp.slot[ci], views: make([]foldView, ev.ko)}
	if ev.opt.Joint {
		ev.states = append(ev.states, cs)
	}
	n := st.NumLevels()
	cs.foldRows = make([][]uint64, ev.ko)
	for f := range cs.foldRows {
		cs.foldRows[f] = make([]uint64, n)
	}
	for l := 0; l < n; l++ {
		for f := 0; f < ev.ko; f++ {
			cs.foldRows[f][l] = uint64(st.TargetMask(l, 0, ev.pos, ev.useOut[f]).N)
		}
	}
	cands := ev.opt.Candidates
	scores := make([][]foldScore, len(cands))
	var jobs []job
	for c := range cands {
		scores[c] = make([]foldScore, ev.ko)
		for f := 0; f < ev.ko; f++ {
			jobs = append(jobs, job{c, f})
		}
	}
	step := ev.modelSteps(ci, name)
	parallel(len(jobs), ev.opt.Threads, func(i int) {
		j := jobs[i]
		scores[j.cand][j.fold] = ev.run(cs, cands[j.cand], j.fold)
		step()
	})
	cr := ColumnResult{Column: name, Levels: st.Levels.Len()}
	if st.RowCount(0) > 0 {
		cr.Levels++
	}
	names := metricNames(ev.task)
	for c, cand := range cands {
		r := CandidateResult{Name: cand.Name, Baseline: cand.IsBaseline()}
		per := make([][]float64, len(names))
		var train []float64
		for f, s := range scores[c] {
			if s.err != nil {
				return cr, fmt.Errorf("column %s, candidate %s, outer fold %d: %w", name, cand.Name, f+1, s.err)
			}
			for m := range names {
				per[m] = append(per[m], s.test[m])
			}
			train = append(train, s.train[0])
			r.FitSeconds += s.seconds
			r.OutputColumns = max(r.OutputColumns, s.outCols)
			r.UnseenShare += s.unseen / float64(ev.ko)
		}
		for m, nm := range names {
			mean, std := foldMeanStd(per[m])
			r.Metrics = append(r.Metrics, Metric{Name: nm, Stat: Stat{mean, std}})
		}
		r.Primary = r.Metrics[0].Stat
		r.PerFold = per[0]
		r.TrainPrimary.Mean, r.TrainPrimary.Std = foldMeanStd(train)
		if ev.opt.NoTimings {
			r.FitSeconds = 0
		}
		cr.Candidates = append(cr.Candidates, r)
	}
	cr.Verdict = judge(cr.Candidates, higherBetter(names[0]), ev.testShare())
	cr.Winner = cr.Verdict.Winner
	cr.Reading = cr.Verdict.reading(names[0])
	cr.RankFreq = rankFrequency(st)
	if ev.task != colstats.Multiclass {
		cr.Shrinkage = ev.shrinkage(cs)
	}
	return cr, nil
}

// modelSteps reports the start of column ci's models to Options.Models
// and returns the function each model calls when it is done (a no-op
// without Options.Models).
func (ev *evaluator) modelSteps(ci int, name string) func() {
	if ev.opt.Models == nil {
		return func() {}
	}
	nc, ncand := len(ev.opt.Columns), len(ev.opt.Candidates)
	var mu sync.Mutex
	done := 0 // models of this column
	report := func() {
		ev.opt.Models(ModelStep{Column: name, ColumnNum: ci + 1, Columns: nc,
			Candidate: min(ncand, done/ev.ko+1), Candidates: ncand,
			ModelsDone: ci*ncand*ev.ko + done, Models: nc * ncand * ev.ko})
	}
	report()
	return func() {
		mu.Lock()
		defer mu.Unlock()
		done++
		report()
	}
}

// testShare is the ratio of held-out to training rows of an outer fold,
// over all folds (1/(k-1) for k equal folds): the correction of the
// resampled t-test.
func (ev *evaluator) testShare() float64 {
	var tr, te int
	for f := range ev.train {
		tr += len(ev.train[f])
		te += len(ev.test[f])
	}
	return float64(te) / float64(tr)
}

// parallel calls f(0..n-1), at most threads at a time; each call writes
// only its own results, so the outcome does not depend on threads.
func parallel(n, threads int, f func(i int)) {
	if threads < 2 {
		for i := 0; i < n; i++ {
			f(i)
		}
		return
	}
	// A panic of f reaches the caller's goroutine (guard.Group); the
	// other workers drain the queue so that the loop below ends.
	var g guard.Group
	next := make(chan int)
	for w := 0; w < threads; w++ {
		g.Go(func() {
			defer func() {
				for range next {
				}
			}()
			for i := range next {
				f(i)
			}
		})
	}
	for i := 0; i < n; i++ {
		next <- i
	}
	close(next)
	g.Wait()
}

// foldMeanStd is the mean and sample standard deviation of the finite values
// of xs; NaN when none is finite.
func foldMeanStd(xs []float64) (float64, float64) {
	var ok []float64
	for _, x := range xs {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			ok = append(ok, x)
		}
	}
	if len(ok) == 0 {
		return math.NaN(), math.NaN()
	}
	var mean float64
	for _, x := range ok {
		mean += x
	}
	mean /= float64(len(ok))
	if len(ok) == 1 {
		return mean, 0
	}
	var ss float64
	for _, x := range ok {
		ss += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(ss / float64(len(ok)-1))
}

// rankFrequency returns the rank-frequency curve of the levels, thinned
// to at most about 300 ranks spread evenly on a log scale.
func rankFrequency(st *colstats.Stats) []RankPoint {
	var counts []uint64
	for l := 0; l < st.NumLevels(); l++ {
		if n := st.RowCount(l); n > 0 {
			counts = append(counts, n)
		}
	}
	slices.SortFunc(counts, func(a, b uint64) int {
		switch {
		case a > b:
			return -1
		case a < b:
			return 1
		}
		return 0
	})
	const points = 300
	var out []RankPoint
	last := 0
	for j := 0; j < points && len(counts) > 0; j++ {
		r := int(math.Round(math.Exp(float64(j) * math.Log(float64(len(counts))) / (points - 1))))
		r = max(1, min(r, len(counts)))
		if r > last {
			out = append(out, RankPoint{Rank: r, Rows: counts[r-1]})
			last = r
		}
	}
	return out
}

// shrinkage returns the raw and target:eb smoothed means, fitted on all
// rows, of up to 400 levels taken evenly from the canonical order.
func (ev *evaluator) shrinkage(cs *colState) []ShrinkPoint {
	all := make([]bool, ev.ko*ev.ki)
	for i := range all {
		all[i] = true
	}
	ft := cs.st.FitMask(0, ev.pos, colstats.Smoothing{Kind: colstats.SmoothEB}, all, nil, cs.order)
	const points = 400
	step := max(1, len(cs.order)/points)
	var out []ShrinkPoint
	for i := 0; i < len(cs.order) && len(out) < points; i += step {
		l := int(cs.order[i])
		a := cs.st.TargetMask(l, 0, ev.pos, all)
		if a.N == 0 {
			continue
		}
		out = append(out, ShrinkPoint{Rows: uint64(a.N), Raw: a.Sum / a.N, Smoothed: ft.Encode(a)})
	}
	return out
}

// measure returns the time since start, for FitSeconds.
func measure(start time.Time) float64 { return time.Since(start).Seconds() }
