package pipeline

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"maps"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/folds"
	"manyfold/internal/param"
	"manyfold/io/table"
)

// A sharded fit: the statistics of a table cut into shards (files, row
// groups), gathered shard by shard wherever the shards are (the workers of
// a distributed engine), merged, and used to encode each shard, with
// outputs and mapping tables byte for byte those of Fit and Encode over
// the shards' rows read as one table, the shards in order.
//
//	stage 0   Survey(shard)                      -> ShardFacts, a few bytes
//	plan      PlanShards(facts...)               -> ShardPlan: row numbers, task, origin, classes
//	stage 1   FitShard(shard, plan).Partial(p)   -> one partial per partition p
//	merge     MergePartials(partials of p)       -> the partition's statistics
//	model     Assemble(plan, partitions)         -> *Model, as Fit returns it
//	stage 2   Model.Encode(shard, Offset: plan.First[i]-1), Model.SaveTables
//
// What the one-pass fit decides as it reads (the task, from the first
// rows of a target; the origin of a regression target's sums, its first
// known value; the class labels and their order) comes from the plan, so
// every shard counts its rows as the one pass would. Folds are drawn from
// row numbers counted across the shards. Statistics add exactly (class
// counts, exact sums of a regression target), so neither the order of the
// shards' partials nor their grouping changes a bit.
//
// Stratified folds start each class's fold stream in a shard after the
// rows of that class in the shards before it (ShardPlan.EncodeOptions).
//
// The ordered scheme encodes a row from the rows before it, in the shards
// before its own too. The merge of a partition, given every shard's
// partial in shard order, also gives each shard the statistics of the
// shards before it, of that shard's levels only (Preceding); stage 2 of a
// shard starts from them (ShardPlan.Before, EncodeOptions.Before). A
// regression target's running sums are exact (colstats.Running), so they
// do not depend on where the shards cut the rows. --order-by is checked
// within each shard (stage 0 and 1) and across their boundaries (the plan,
// from each shard's first and last value).

// ShardFacts is what stage 0 learns of one shard: its rows and what the
// one-pass fit decides from its target.
type ShardFacts struct {
	Rows    int64
	Missing int64 // rows whose target is unknown
	// Task is what the shard's first rows say of the task (TaskProbe);
	// the plan appends the shards' in order.
	Task TaskProbe
	// First is the shard's first known target value, when HasFirst (a
	// numeric target).
	First    float64
	HasFirst bool
	// Labels are the class labels met, in order of appearance, and Counts
	// the rows of each; Many is set when there were more than MaxClasses
	// (then Labels stops).
	Labels []string
	Counts []int64
	Many   bool
	// Order holds, with --order-by, the shard's first and last values
	// (nil for a shard whose column is all null).
	Order *OrderEnds
}

// Survey reads a shard (stage 0): its rows and, when the spec reads a
// target, the facts of its target. Only the target column is read.
func Survey(r table.Reader, sp Spec, file string) (ShardFacts, error) {
	var sf ShardFacts
	if err := sp.Validate(); err != nil {
		return sf, err
	}
	schema := &table.Schema{Fields: append([]table.Field(nil), r.Schema().Fields...)}
	tcol := -1
	var sel []int // the columns read: the target, the order column
	if sp.Target != "" && (sp.supervised() || sp.FoldBy.Needs().Class) {
		if tcol = schema.Index(sp.Target); tcol < 0 {
			return sf, &ColumnError{File: file, Param: ParamTarget, Name: sp.Target, Have: schema.Names()}
		}
		sel = append(sel, tcol)
	}
	var oc *orderCheck
	if sp.OrderBy != "" {
		i := schema.Index(sp.OrderBy)
		if i < 0 {
			return sf, &ColumnError{File: file, Param: ParamOrderBy, Name: sp.OrderBy, Have: schema.Names()}
		}
		k := schema.Fields[i].Kind
		oc = &orderCheck{file: file, name: sp.OrderBy, col: len(sel), numeric: k == table.Int64 || k == table.Float64}
		if i == tcol {
			oc.col = 0
		} else {
			sel = append(sel, i)
		}
	}
	if len(sel) == 0 && len(schema.Fields) > 0 {
		sel = []int{0} // the rows only
	}
	if len(sel) > 0 {
		if err := r.Select(sel); err != nil {
			return sf, err
		}
	}
	var cls, num *targetReader
	if tcol >= 0 {
		kind := schema.Fields[tcol].Kind
		if sp.Task != colstats.Regression.String() {
			cls = newTargetReader(file, sp.Target, 0, kind, sp.Task, nil)
		}
		if kind == table.Int64 || kind == table.Float64 || sp.Task == colstats.Regression.String() {
			num = newTargetReader(file, sp.Target, 0, kind, colstats.Regression.String(), nil)
		}
	}
	err := table.ForEach(r, func(b *table.Batch) error {
		sf.Rows += int64(b.Rows)
		if oc != nil {
			if err := oc.check(b); err != nil {
				return err
			}
		}
		if tcol < 0 {
			return nil
		}
		sf.Task.Add(b, 0, schema.Fields[tcol].Kind)
		if num != nil {
			if err := num.read(b); err != nil {
				if cls == nil {
					return err
				}
				num = nil // text in a numeric column: a classification target
			} else if !sf.HasFirst {
				for _, y := range num.vals {
					if y == y {
						sf.First, sf.HasFirst = y, true
						break
					}
				}
			}
		}
		if cls != nil && !sf.Many {
			if err := cls.read(b); err != nil {
				if num == nil || sp.Task != "" {
					return err
				}
				// The batch reads as numbers: its values are more
				// classes than a classification target may have.
				sf.Many = true
				return nil
			}
			for len(sf.Counts) < len(cls.order) {
				sf.Counts = append(sf.Counts, 0)
			}
			for _, c := range cls.cls {
				if c >= 0 {
					sf.Counts[c]++
				}
			}
		}
		return nil
	})
	if err != nil {
		return sf, err
	}
	switch {
	case num != nil:
		sf.Missing = num.missing
	case cls != nil:
		sf.Missing = cls.missing
	}
	if cls != nil {
		sf.Labels = cls.order
	}
	if oc != nil && oc.seen {
		sf.Order = &OrderEnds{First: oc.first, Last: oc.last, FirstNum: oc.firstNum, LastNum: oc.lastNum, Numeric: oc.numeric, Row: oc.firstRow}
	}
	return sf, nil
}

// OrderEnds are the first and last values of a shard's --order-by column
// (its nulls passed over), as text and, for a numeric column, as numbers,
// and the row of the first in the shard.
type OrderEnds struct {
	First, Last       []byte
	FirstNum, LastNum float64
	Numeric           bool // the shard's column is numeric (its own kind, as its reader found it)
	Row               int64
}

// ShardPlan is what every shard's fit and encode take from all the
// shards' facts (PlanShards).
type ShardPlan struct {
	Spec  Spec
	First []int64 // per shard, the row number (from 1) of its first row
	Rows  int64   // rows of every shard

	missing    int64
	task       colstats.Task // Regression, or Binary for classification
	decided    bool          // the task is known (no target: false)
	origin     float64
	hasOrigin  bool
	classes    []string // sorted
	numericCls bool
	strata     []map[string]uint64 // stratified folds: per shard, each class's rows before it
}

// EncodeOptions returns the options that make Model.Encode encode shard i
// of the plan (the part of the table its rows are): Part, Offset and, for
// stratified folds, Strata.
func (p *ShardPlan) EncodeOptions(i int) EncodeOptions {
	o := EncodeOptions{Part: true, Offset: p.First[i] - 1}
	if p.strata != nil {
		o.Strata = p.strata[i]
	}
	return o
}

// PlanShards combines the facts of every shard, in shard order, into the
// plan of a sharded fit of the spec over a table of that schema (any
// shard's, with the derived columns; file names the table in messages).
func PlanShards(sp Spec, schema *table.Schema, facts []ShardFacts, file string) (*ShardPlan, error) {
	if err := sp.Validate(); err != nil {
		return nil, err
	}
	p := &ShardPlan{Spec: sp, First: make([]int64, len(facts))}
	var last *OrderEnds // the order column's values in the shards so far
	lastShard := 0
	var order []string
	var probe TaskProbe // the first rows of the shards, in order
	seen, many := map[string]bool{}, false
	stratified := sp.FoldBy.Name() == (folds.StratifiedRule{}).Name()
	before := map[string]uint64{} // rows of each class before shard i
	for i, f := range facts {
		if stratified {
			p.strata = append(p.strata, maps.Clone(before))
			for j, l := range f.Labels {
				if j < len(f.Counts) {
					before[l] += uint64(f.Counts[j])
				}
			}
		}
		p.First[i] = p.Rows + 1
		if o := f.Order; sp.OrderBy != "" && o != nil {
			// By number when both shards read the column as numbers,
			// else by its text (a CSV shard may infer another kind).
			if last != nil && orderBefore(o.First, o.FirstNum, last.Last, last.LastNum, o.Numeric && last.Numeric) {
				return nil, &table.DataError{File: file, Row: p.First[i] + o.Row - 1, Column: sp.OrderBy,
					Err: param.Errorf("the shards are not in the order of this column (%s): shard %d starts with %q, after %q, the last of shard %d", ParamOrderBy, i+1, o.First, last.Last, lastShard+1)}
			}
			last, lastShard = o, i
		}
		p.Rows += f.Rows
		p.missing += f.Missing
		probe.Append(f.Task)
		if f.HasFirst && !p.hasOrigin {
			p.origin, p.hasOrigin = f.First, true
		}
		for _, l := range f.Labels {
			if !seen[l] {
				seen[l] = true
				order = append(order, l)
			}
		}
		many = many || f.Many
	}
	if probe.Rows > 0 {
		p.decided = true
		if probe.Regression() {
			p.task = colstats.Regression
		}
	}
	switch sp.Task {
	case colstats.Regression.String():
		p.task, p.decided = colstats.Regression, true
	case "":
	default:
		p.task, p.decided = colstats.Binary, true
	}
	if t := schema.Index(sp.Target); t >= 0 {
		k := schema.Fields[t].Kind
		p.numericCls = k == table.Int64 || k == table.Float64
	}
	if p.decided && p.task != colstats.Regression {
		if many || len(order) > MaxClasses {
			return nil, &table.DataError{File: file, Column: sp.Target, Err: param.Errorf("target has more than %d classes", MaxClasses)}
		}
		if sp.Task == colstats.Binary.String() && len(order) > 2 {
			return nil, &table.DataError{File: file, Column: sp.Target, Err: param.Errorf("%s binary, but the shards' target has %d values between them (%q, %q, %q ...)", ParamTask, len(order), order[0], order[1], order[2])}
		}
		p.classes, _ = sortedClasses(order, p.numericCls)
	}
	return p, nil
}

// offsetReader numbers the rows of a shard from its place in the table:
// the batches of r with FirstRow moved on by the rows before the shard.
type offsetReader struct {
	table.Reader
	off int64
	b   table.Batch
}

func (o *offsetReader) Next() (*table.Batch, error) {
	b, err := o.Reader.Next()
	if err == io.EOF {
		return nil, err
	}
	if err != nil {
		return nil, &readError{err} // the reader's rows are the shard's own
	}
	o.b = *b
	o.b.FirstRow = b.FirstRow + o.off
	return &o.b, nil
}

// readError is an error of the shard's reader, passed on by an
// offsetReader: its rows are numbered in the shard already.
type readError struct{ err error }

func (e *readError) Error() string { return e.err.Error() }
func (e *readError) Unwrap() error { return e.err }

// shardRow gives a data error found in the rows of a shard read through
// an offsetReader (off rows before it) the shard's own row number back;
// an error of the shard's reader is returned as the reader gave it.
func shardRow(err error, off int64) error {
	var re *readError
	if errors.As(err, &re) {
		return re.err
	}
	var de *table.DataError
	if off > 0 && errors.As(err, &de) && de.Row > off {
		de.Row -= off
	}
	return err
}

// Unwrap returns the shard's reader, for inspection (table.Find).
func (o *offsetReader) Unwrap() table.Reader { return o.Reader }

// ShardStats are the statistics of one shard (stage 1), to be cut into
// partitions (Partial).
type ShardStats struct {
	f *fitter
}

// FitShard counts the rows of shard i of the plan (stage 1): the rows are
// numbered from plan.First[i], and the task, origin and classes are the
// plan's. opt.File names the shard in messages.
func FitShard(r table.Reader, plan *ShardPlan, i int, opt FitOptions) (*ShardStats, error) {
	opt.TotalRows = plan.Rows
	f, err := newFitter(r.Schema(), plan.Spec, opt)
	if err != nil {
		return nil, err
	}
	f.preset(plan)
	if plan.strata != nil {
		folds.StartStrata(f.fa.as, plan.strata[i])
	}
	if err := f.pass(&offsetReader{Reader: r, off: plan.First[i] - 1}); err != nil {
		return nil, shardRow(err, plan.First[i]-1)
	}
	f.ensureStats()
	for _, c := range f.m.Cols {
		c.replay = nil
	}
	return &ShardStats{f: f}, nil
}

// preset gives the fitter what a one-pass fit decides as it reads, from
// the plan.
func (f *fitter) preset(plan *ShardPlan) {
	if f.tr == nil {
		return
	}
	f.decided = true
	f.task = plan.task
	task := colstats.Regression.String()
	if plan.task != colstats.Regression {
		task = colstats.Binary.String()
		if len(plan.classes) > 2 {
			task = colstats.Multiclass.String()
		}
	}
	f.tr = newTargetReader(f.opt.File, f.sp.Target, f.tcol, f.schema.Fields[f.tcol].Kind, task, plan.classes)
	f.tr.numeric = f.tr.numeric || plan.numericCls
	if plan.hasOrigin {
		f.originSet, f.m.Origin = true, plan.origin
	}
}

// ensureStats creates the statistics of every column that has none (a
// shard without rows, an assembly).
func (f *fitter) ensureStats() {
	if f.m.Cols[0].St != nil {
		return
	}
	f.newStats()
	if f.tr != nil && f.task != colstats.Regression {
		for _, c := range f.all {
			if c.supervised {
				c.St.AddClasses(len(f.tr.order))
			}
		}
	}
}

// shardMagic starts a shard's partial: the partials of every column
// gathered, each a colstats partial.
var shardMagic = []byte("MFS1")

// Partial returns the shard's statistics of the levels of partition part
// of parts (a power of two from 1 to 65,536): for every column the fit
// gathers, its colstats partial (colstats.AppendPartial), each level with
// the parent of its rows under a column prior. Partials gives every
// partition at once.
func (ss *ShardStats) Partial(part, parts int) ([]byte, error) {
	all, err := ss.Partials(parts)
	if err != nil || part < 0 || part >= parts {
		return nil, fmt.Errorf("partition %d of %d: want a power of two of partitions up to 65536", part, parts)
	}
	return all[part], nil
}

// Partials returns Partial(p, parts) for every partition p, each level's
// partition computed once.
func (ss *ShardStats) Partials(parts int) ([][]byte, error) {
	if parts < 1 || parts > 1<<16 || parts&(parts-1) != 0 {
		return nil, fmt.Errorf("%d partitions: want a power of two up to 65536", parts)
	}
	f := ss.f
	return f.appendPartials(parts, func(ci int, c *Col) func([]byte, int) []byte {
		parent := f.all[c.parentAt].St
		return func(b []byte, l int) []byte {
			if l >= len(c.nest) {
				return b
			}
			switch p := c.nest[l]; {
			case p == mixedParents || p == noParent:
				return b // several parents: no bytes
			case p == 0:
				return append(b, 1) // the null parent
			default:
				return append(append(b, 2), parent.Bytes(int(p))...)
			}
		}
	}), nil
}

// appendPartials returns the partials of every column the fit gathers,
// one for each partition of parts; extra gives, for a column with a column
// prior, the writer of each level's parent.
func (f *fitter) appendPartials(parts int, extra func(ci int, c *Col) func([]byte, int) []byte) [][]byte {
	n := parts
	byCol := make([][][]byte, len(f.all))
	for ci, c := range f.all {
		var x func([]byte, int) []byte
		if c.nest != nil {
			x = extra(ci, c)
		}
		byCol[ci] = c.St.Partials(parts, x)
	}
	out := make([][]byte, n)
	cols := make([][]byte, len(byCol))
	for i := range out {
		for ci := range byCol {
			cols[ci], byCol[ci][i] = byCol[ci][i], nil
		}
		out[i] = shardPartial(cols)
	}
	return out
}

// shardPartial returns a shard's partial: the columns' partials, each
// after its length.
func shardPartial(cols [][]byte) []byte {
	size := len(shardMagic) + binary.MaxVarintLen64
	for _, c := range cols {
		size += binary.MaxVarintLen64 + len(c)
	}
	b := make([]byte, 0, size) // one copy of the columns' partials
	b = append(b, shardMagic...)
	b = binary.AppendUvarint(b, uint64(len(cols)))
	for _, c := range cols {
		b = binary.AppendUvarint(b, uint64(len(c)))
		b = append(b, c...)
	}
	return b
}

// Preceding gives, for the ordered scheme, what each shard's encode
// starts from in one partition. partials[i] is shard i's partial of the
// partition (stage 1's; empty for none), the shards in order; out[i] is a
// partial of the rows of shards 0 to i-1, of the levels in partials[i]
// only. ShardPlan.Before reads shard i's out[i] of every partition.
func Preceding(plan *ShardPlan, schema *table.Schema, partials [][]byte, opt FitOptions) ([][]byte, error) {
	acc, _, err := gatherPartials(plan, schema, nil, opt, true)
	if err != nil {
		return nil, err
	}
	out := make([][]byte, len(partials))
	cols := make([][]byte, len(acc.all))
	keys := make([][][]byte, len(acc.all))
	for i, b := range partials {
		var own [][]byte // shard i's partial of each column
		if len(b) > 0 {
			if own, err = acc.splitPartial(b); err != nil {
				return nil, fmt.Errorf("shard %d: %w", i+1, err)
			}
		}
		for ci, c := range acc.all {
			var ls []int32
			if own != nil {
				err := colstats.PartialKeys(own[ci], func(k []byte, null bool) {
					al := 0 // the null level
					if !null {
						al = c.St.Lookup(k)
					}
					if al >= 0 && c.St.RowCount(al) > 0 {
						ls = append(ls, int32(al))
					}
				})
				if err != nil {
					return nil, fmt.Errorf("shard %d, column %q: %w: %w", i+1, c.Name, ErrShardPartial, err)
				}
			}
			cols[ci] = c.St.AppendLevels(nil, ls)
		}
		out[i] = shardPartial(cols)
		if len(b) > 0 {
			if err := acc.gather([][]byte{b}, keys, true); err != nil {
				return nil, fmt.Errorf("shard %d: %w", i+1, err)
			}
		}
	}
	return out, nil
}

// Before is the statistics of the rows before a shard, which the ordered
// scheme starts from (EncodeOptions.Before).
type Before struct {
	cols []*Col // per encoded column, as the model's
}

// Before reads the statistics of the rows before a shard: its part of
// every partition's Preceding (in any order). schema and opt are as
// Assemble's.
func (p *ShardPlan) Before(schema *table.Schema, partials [][]byte, opt FitOptions) (*Before, error) {
	f, _, err := gatherPartials(p, schema, partials, opt, true)
	if err != nil {
		return nil, err
	}
	return &Before{cols: f.m.Cols}, nil
}

// of returns the statistics before the shard of the model's column i (c),
// each level with its slot in c.
func (b *Before) of(i int, c *Col) method.Before {
	bc := b.cols[i].St
	slots := make([]int32, bc.NumLevels())
	for l := range slots {
		switch {
		case bc.RowCount(l) == 0:
			slots[l] = -1
		case l == 0:
			slots[l] = 0
		default:
			slots[l] = int32(c.St.Lookup(bc.Bytes(l)))
		}
	}
	return method.Before{St: bc, Slots: slots}
}

// ErrShardPartial is the error of bytes that are not a partial of this
// plan's statistics.
var ErrShardPartial = errors.New("not partial statistics of this job")

// gather merges partials into the statistics of the fitter's columns,
// keeping each level's parent key (nest) in keys. Each column's level
// table first makes room for the levels the partials declare (at most
// what their bytes hold, and the plan's rows), so that it does not grow
// again and again: their sum when they are disjoint (the partitions of a
// model), else the largest's (one partition from many shards, which may
// repeat levels).
func (f *fitter) gather(partials [][]byte, keys [][][]byte, disjoint bool) error {
	byCol := make([][][]byte, len(f.all))
	for pi, b := range partials {
		cols, err := f.splitPartial(b)
		if err != nil {
			return fmt.Errorf("partial %d: %w", pi+1, err)
		}
		for ci, col := range cols {
			byCol[ci] = append(byCol[ci], col)
		}
	}
	for ci, c := range f.all {
		n, most := c.St.NumLevels(), 0
		for _, col := range byCol[ci] {
			k := colstats.PartialLevels(col)
			n, most = n+k, max(most, k)
		}
		if !disjoint {
			n = c.St.NumLevels() + most
		}
		if f.opt.TotalRows > 0 {
			n = min(n, c.St.NumLevels()+int(f.opt.TotalRows)+1)
		}
		c.St.Levels.Reserve(n)
		var extra func(int, []byte) error
		if c.nest != nil {
			extra = func(l int, data []byte) error { return mergeParentKey(&keys[ci], l, data) }
		}
		for pi, col := range byCol[ci] {
			if err := c.St.MergePartial(col, extra); err != nil {
				return fmt.Errorf("partial %d, column %q: %w: %w", pi+1, c.Name, ErrShardPartial, err)
			}
		}
	}
	return nil
}

// splitPartial returns the columns' partials of a shard's partial.
func (f *fitter) splitPartial(b []byte) ([][]byte, error) {
	if len(b) < len(shardMagic) || string(b[:len(shardMagic)]) != string(shardMagic) {
		return nil, ErrShardPartial
	}
	b = b[len(shardMagic):]
	n, k := binary.Uvarint(b)
	if k <= 0 || n != uint64(len(f.all)) {
		return nil, fmt.Errorf("%w: %d columns, the job gathers %d", ErrShardPartial, n, len(f.all))
	}
	b = b[k:]
	cols := make([][]byte, len(f.all))
	for ci, c := range f.all {
		size, k := binary.Uvarint(b)
		if k <= 0 || size > uint64(len(b)-k) {
			return nil, fmt.Errorf("column %q: %w", c.Name, ErrShardPartial)
		}
		cols[ci] = b[k : k+int(size)]
		b = b[k+int(size):]
	}
	if len(b) != 0 {
		return nil, fmt.Errorf("%w: bytes after the last column", ErrShardPartial)
	}
	return cols, nil
}

// mixedKey marks a level whose rows had several parents.
var mixedKey = []byte{}

// mergeParentKey records the parent key of level slot l: the same key
// again keeps it, another one (or none: several) makes it mixed. keys
// grows to hold l.
func mergeParentKey(keys *[][]byte, l int, data []byte) error {
	if len(data) > 0 && data[0] != 1 && data[0] != 2 {
		return fmt.Errorf("%w: a parent of kind %d", ErrShardPartial, data[0])
	}
	for len(*keys) <= l {
		*keys = append(*keys, nil)
	}
	k := *keys
	switch cur := k[l]; {
	case cur == nil:
		if len(data) == 0 {
			k[l] = mixedKey
		} else {
			k[l] = append([]byte(nil), data...)
		}
	case len(cur) == 0, string(cur) == string(data):
	default:
		k[l] = mixedKey
	}
	return nil
}

// Assemble merges the partials of every shard and partition (any number,
// in any order and grouping: MergePartials' outputs or stage 1's) into the
// model Fit would return over the table: schema is the table's (with its
// derived columns), opt as Fit's.
func Assemble(plan *ShardPlan, schema *table.Schema, partials [][]byte, opt FitOptions) (*Model, error) {
	f, keys, err := gatherPartials(plan, schema, partials, opt, true)
	if err != nil {
		return nil, err
	}
	if err := f.checkRows(plan.Rows); err != nil {
		return nil, err
	}
	for ci, c := range f.all {
		if c.nest == nil {
			continue
		}
		parent := f.all[c.parentAt].St
		c.nest = make([]int32, c.St.NumLevels())
		for l := range c.nest {
			c.nest[l] = mixedParents
			var k []byte
			if l < len(keys[ci]) {
				k = keys[ci][l]
			}
			switch {
			case len(k) == 0:
			case k[0] == 1:
				c.nest[l] = 0
			default:
				if p := parent.Lookup(k[1:]); p >= 0 {
					c.nest[l] = int32(p)
				}
			}
		}
	}
	f.m.Rows = plan.Rows
	if f.tr != nil {
		f.tr.missing = plan.missing
	}
	for _, c := range f.m.Cols {
		c.replay = nil
	}
	return f.finish()
}

// checkRows checks that the levels of every column the fitter gathers
// hold the plan's rows, each row in one level: a shard's partial missing or
// given twice (a task of the engine run again) would change them.
func (f *fitter) checkRows(rows int64) error {
	for _, c := range f.all {
		left := uint64(rows)
		for l := 0; l < c.St.NumLevels(); l++ {
			n := c.St.RowCount(l)
			if n > left {
				return fmt.Errorf("column %q: %w: its levels hold more than the plan's %d rows; a shard's partial is given twice", c.Name, ErrShardPartial, rows)
			}
			left -= n
		}
		if left != 0 {
			return fmt.Errorf("column %q: %w: its levels hold %d rows, the plan %d; a shard's partial is missing", c.Name, ErrShardPartial, uint64(rows)-left, rows)
		}
	}
	return nil
}

// gatherPartials returns a fitter of the plan whose columns hold the
// partials merged, and each level's parent key (keys, per column).
// disjoint says that the partials hold different levels (different
// partitions): room is made for the sum of their levels, else for the
// largest's (see gather).
func gatherPartials(plan *ShardPlan, schema *table.Schema, partials [][]byte, opt FitOptions, disjoint bool) (*fitter, [][][]byte, error) {
	opt.TotalRows = plan.Rows
	f, err := newFitter(schema, plan.Spec, opt)
	if err != nil {
		return nil, nil, err
	}
	f.preset(plan)
	f.ensureStats()
	keys := make([][][]byte, len(f.all))
	if err := f.gather(partials, keys, disjoint); err != nil {
		return nil, nil, err
	}
	return f, keys, nil
}

// MergePartials merges partials of one partition (from every shard, or
// merged before) into one, as a merge step of a distributed engine does:
// Assemble gives the same model from the merged partial as from those it
// merged.
func MergePartials(plan *ShardPlan, schema *table.Schema, partials [][]byte, opt FitOptions) ([]byte, error) {
	f, keys, err := gatherPartials(plan, schema, partials, opt, false)
	if err != nil {
		return nil, err
	}
	return f.appendPartials(1, func(ci int, c *Col) func([]byte, int) []byte {
		return func(b []byte, l int) []byte {
			if l < len(keys[ci]) && len(keys[ci][l]) > 0 {
				return append(b, keys[ci][l]...)
			}
			return b
		}
	})[0], nil
}
