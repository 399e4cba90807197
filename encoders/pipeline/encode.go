package pipeline

import (
	"fmt"

	"manyfold/encoders/method"
	"manyfold/folds"
	"manyfold/io/table"
)

// EncodeOptions configures the second pass.
type EncodeOptions struct {
	File     string
	Use      Use // Training (the default) or NewRows
	Progress func(rows int64)
	Threads  int // columns processed at once; below 2 means one at a time
	// Input, when not nil, is the input's full schema, of which r yields
	// only some columns (see Reader.Select): the kept columns that r does
	// not yield are written as empty columns, for a writer that copies
	// them from the input itself.
	Input *table.Schema
	// Drift, for a pass of new rows (NewRows), gathers what its drift
	// report needs (NewDrift).
	Drift *Drift
	// Part marks r as one shard of the table the model was fitted on (a
	// sharded fit, see Assemble), whose rows are numbered from Offset+1
	// (ShardPlan.First less 1): their folds are those rows' of the whole
	// table, and their count is not checked against the fit's.
	Part   bool
	Offset int64
	// Strata, for stratified folds, holds the rows of each class (by
	// label) before the part's first row. ShardPlan.EncodeOptions sets
	// Part, Offset and Strata.
	Strata map[string]uint64
	// Before, for the ordered scheme, holds the statistics of the rows
	// before the part (ShardPlan.Before); a part after the first needs it.
	Before *Before
}

// Use says which rows a pass encodes.
type Use uint8

// The uses. Training encodes the table the model was fitted on, each row
// by the spec's scheme (k-fold: from the other folds). NewRows encodes
// every row as a new row (apply): with the values fitted on all training
// rows, an unseen level getting the prior, the other code, 0, its bucket.
const (
	Training Use = iota
	NewRows
)

// Summary describes an encoding pass.
type Summary struct {
	Rows    int64
	Missing int64   // rows with an unknown target (training pass)
	Unseen  []int64 // per column: rows whose level was unseen or left out
	// Scores holds, after a training pass, each column's Score (nil for a
	// column not scored), which StagedTables.RecordScores records.
	Scores []*Score

	scoring *trainingScores // the accumulators of Scores (ScoreState)
}

// outCol is one encoding's output columns and how to fill them: encoding
// enc of column col, or the fold column (col -1).
type outCol struct {
	fields []table.Field
	col    int // index into Model.Cols; -1: the fold column
	enc    int // index into the column's Fits
}

// OutputSchema returns the schema of the encoded table: the kept input
// columns in their order, then the encoded columns, then the fold column.
func (m *Model) OutputSchema(file string, in *table.Schema, use Use) (*table.Schema, []int, []outCol, error) {
	var kept []int
	switch {
	case m.Spec.KeepAll:
		for i, f := range in.Fields {
			if !f.Derived { // a cross or a condition is not the file's
				kept = append(kept, i)
			}
		}
	default:
		for _, name := range m.Spec.Keep {
			i := in.Index(name)
			if i < 0 {
				return nil, nil, nil, &ColumnError{File: file, Param: ParamKeep, Name: name, Have: in.Names()}
			}
			kept = append(kept, i)
		}
	}
	out := &table.Schema{}
	for _, i := range kept {
		out.Fields = append(out.Fields, in.Fields[i])
	}
	var outs []outCol
	for ci, c := range m.Cols {
		for ei, f := range c.Fits {
			oc := outCol{col: ci, enc: ei}
			for _, o := range f.Outputs() {
				oc.fields = append(oc.fields, table.Field{Name: outputName(c, o.Name), Kind: o.Kind})
			}
			outs = append(outs, oc)
		}
	}
	if use == Training && m.Spec.FoldColumn != "" {
		outs = append(outs, outCol{fields: []table.Field{{Name: m.Spec.FoldColumn, Kind: table.Int64}}, col: -1})
	}
	seen := map[string]bool{}
	for _, f := range out.Fields {
		seen[f.Name] = true
	}
	for _, o := range outs {
		for _, f := range o.fields {
			if seen[f.Name] {
				return nil, nil, nil, usageErr("output column %q would appear twice; drop the input column with %s or rename it", f.Name, ParamKeep)
			}
			seen[f.Name] = true
			out.Fields = append(out.Fields, f)
		}
	}
	return out, kept, outs, nil
}

// Encode reads every batch of r (the second pass) and writes the kept
// columns and the encoded columns to w. r must hold the table the model was
// fitted on (Training) or a table with the same columns (NewRows). It
// closes neither r nor w. Its stages: newEncodePass finds the columns and
// readies each encoding's encoder, then batch encodes and writes one batch
// at a time.
func (m *Model) Encode(r table.Reader, w table.Writer, opt EncodeOptions) (Summary, error) {
	if opt.Part && opt.Offset > 0 {
		r = &offsetReader{Reader: r, off: opt.Offset}
	}
	e, err := m.newEncodePass(r.Schema(), opt)
	if err != nil {
		return Summary{Unseen: make([]int64, len(m.Cols))}, err
	}
	e.w = w
	if err := table.ForEach(r, e.batch); err != nil {
		return e.sum, shardRow(err, opt.Offset)
	}
	if e.tr != nil {
		e.sum.Missing = e.tr.missing
	}
	if e.training && !opt.Part && e.sum.Rows != m.Rows {
		return e.sum, fmt.Errorf("%s: the second pass read %d rows, the first %d; the file changed while it was read", opt.File, e.sum.Rows, m.Rows)
	}
	if e.obs != nil {
		e.obs.finish(&e.sum)
	}
	return e.sum, nil
}

// encodePass is the state of an encoding pass.
type encodePass struct {
	m        *Model
	opt      EncodeOptions
	w        table.Writer
	training bool
	sum      Summary
	keptAt   []int // per kept column, its position in the batches, or -1
	idx      []int // per encoded column, its position in the batches, or -1 (replayed)
	tr       *targetReader
	fa       *foldAssigner
	slots    []levelSlots // per encoded column
	pslots   []levelSlots // per encoded column: its parent levels
	rows     []method.Rows
	encoders [][]method.Encoder
	// first[ci] lists the column's encodings in the order they run: those
	// that read the target first, as they may read each row's level rows
	// on the way and leave them for the others (method.Rows.LevelRows).
	first  [][]int
	at     [][]int // position of each encoding's first output in the batch
	foldAt int     // position of the fold column, or -1
	out    *table.Batch
	obs    observer // sees each encoded batch (score.go), or nil
}

// newEncodePass finds the columns the pass reads and writes in schema and
// readies each encoding's encoder.
func (m *Model) newEncodePass(schema *table.Schema, opt EncodeOptions) (*encodePass, error) {
	full := schema
	if opt.Input != nil {
		full = opt.Input
	}
	_, kept, outs, err := m.OutputSchema(opt.File, full, opt.Use)
	if err != nil {
		return nil, err
	}
	sp := &m.Spec
	e := &encodePass{m: m, opt: opt, training: opt.Use == Training, foldAt: -1}
	e.sum.Unseen = make([]int64, len(m.Cols))
	// kept[i] indexes the full schema; keptAt[i] the batches, or -1 for
	// a column the batches do not hold.
	e.keptAt = make([]int, len(kept))
	for i, k := range kept {
		e.keptAt[i] = schema.Index(full.Fields[k].Name)
	}
	pass := method.Apply
	if e.training {
		pass = sp.Scheme
	}
	if pass == method.Ordered && opt.Part && opt.Offset > 0 && opt.Before == nil {
		return nil, fmt.Errorf("%s: %s ordered in a part of the table after its first row needs the statistics of the rows before it (ShardPlan.Before)", opt.File, ParamScheme)
	}
	e.idx = make([]int, len(m.Cols))
	for i, c := range m.Cols {
		e.idx[i] = schema.Index(c.Name)
		if e.idx[i] < 0 && !(e.training && m.replays(i)) {
			return nil, &ColumnError{File: opt.File, By: "the mapping tables", Name: c.Name, Have: schema.Names()}
		}
	}
	if e.training {
		if sp.Target != "" && (sp.supervised() || sp.FoldBy.Needs().Class) {
			tcol := schema.Index(sp.Target)
			e.tr = newTargetReader(opt.File, sp.Target, tcol, schema.Fields[tcol].Kind, m.Task.String(), m.Classes)
		}
		gcol := -1
		if g := sp.groupColumn(); g != "" {
			gcol = schema.Index(g)
		}
		e.fa = newFoldAssigner(sp, gcol, m.Rows)
		if opt.Strata != nil {
			folds.StartStrata(e.fa.as, opt.Strata)
		}
	}
	n := len(m.Cols)
	e.slots, e.pslots, e.rows = make([]levelSlots, n), make([]levelSlots, n), make([]method.Rows, n)
	e.encoders, e.first, e.at = make([][]method.Encoder, n), make([][]int, n), make([][]int, n)
	for i, c := range m.Cols {
		e.slots[i] = levelSlots{col: e.idx[i]}
		if e.training && m.replays(i) {
			e.slots[i].replay = c.replay.start()
		}
		if c.Parent != nil {
			if pc := sp.prior(i).Column; pc != "" {
				pcol := schema.Index(pc)
				if pcol < 0 {
					return nil, &ColumnError{File: opt.File, By: "prior=column:" + pc, Name: pc, Have: schema.Names()}
				}
				e.pslots[i] = levelSlots{col: pcol}
			} else {
				e.pslots[i] = levelSlots{col: e.idx[i], prefix: sp.prior(i).Prefix}
			}
		}
		e.at[i] = make([]int, len(c.Fits))
		var before *method.Before // the column's rows before the part, once
		for ei, f := range c.Fits {
			enc := f.Encoder(pass)
			if st, ok := enc.(method.Starter); ok && opt.Before != nil && pass == method.Ordered {
				if before == nil {
					b := opt.Before.of(i, c)
					before = &b
				}
				st.Start(*before)
			}
			e.encoders[i] = append(e.encoders[i], enc)
			if sp.EncodingsOf(i)[ei].Needs().Target {
				e.first[i] = append(e.first[i], ei)
			}
		}
		for ei := range c.Fits {
			if !sp.EncodingsOf(i)[ei].Needs().Target {
				e.first[i] = append(e.first[i], ei)
			}
		}
	}
	pos := len(kept)
	for _, oc := range outs {
		if oc.col < 0 {
			e.foldAt = pos
		} else {
			e.at[oc.col][oc.enc] = pos
		}
		pos += len(oc.fields)
	}
	e.out = &table.Batch{Cols: make([]table.Column, pos)}
	if e.obs, err = m.newObserver(schema, opt, e.at); err != nil {
		return nil, err
	}
	return e, nil
}

// batch encodes one batch and writes it.
func (e *encodePass) batch(b *table.Batch) error {
	m, n, out := e.m, b.Rows, e.out
	var cls []int32
	var vals []float64
	var fold []int32
	if e.training {
		if e.tr != nil {
			if err := e.tr.read(b); err != nil {
				return err
			}
			if e.tr.regress {
				vals = e.tr.vals
			} else {
				cls = e.tr.cls
			}
		}
		var labels []string
		if e.tr != nil {
			labels = e.tr.order
		}
		var err error
		if fold, err = e.fa.assign(b, cls, labels); err != nil {
			return err
		}
	}
	for i, k := range e.keptAt {
		if k < 0 {
			out.Cols[i] = table.Column{}
			continue
		}
		out.Cols[i] = b.Cols[k]
	}
	for ci := range m.Cols {
		if e.slots[ci].col < 0 && !e.slots[ci].replay.has(n) {
			return &table.DataError{File: e.opt.File, Row: b.FirstRow, Err: fmt.Errorf("the second pass read more rows than the first, %d; the file changed while it was read", m.Rows)}
		}
	}
	if e.obs != nil {
		if err := e.obs.batch(b); err != nil {
			return err
		}
	}
	each(len(m.Cols), e.opt.Threads, func(ci int) {
		c := m.Cols[ci]
		rw := &e.rows[ci]
		rw.Reset(n)
		rw.Slots = e.slots[ci].fill(b, c.St, false)
		rw.ParentSlots = nil
		if c.Parent != nil {
			rw.ParentSlots = e.pslots[ci].fill(b, c.Parent.St, false)
		}
		rw.Fold, rw.Cls, rw.Vals, rw.Values = fold, cls, vals, nil
		if e.idx[ci] >= 0 {
			rw.Values = &b.Cols[e.idx[ci]]
		}
		for _, l := range rw.Slots {
			if l < 0 || !c.Keep[l] {
				e.sum.Unseen[ci]++
			}
		}
		for _, ei := range e.first[ci] {
			k := e.at[ci][ei]
			e.encoders[ci][ei].Encode(rw, out.Cols[k:k+len(c.Fits[ei].Outputs())])
		}
		if e.obs != nil {
			e.obs.column(ci, rw, out.Cols)
		}
	})
	if e.foldAt >= 0 {
		in := out.Cols[e.foldAt].ResetInts(n)
		for i, f := range fold {
			in[i] = int64(f)
		}
	}
	out.Rows, out.FirstRow, out.Lines = n, b.FirstRow, b.Lines
	if err := e.w.Write(out); err != nil {
		return err
	}
	e.sum.Rows += int64(n)
	if e.opt.Progress != nil {
		e.opt.Progress(e.sum.Rows)
	}
	return nil
}

// replays says whether the training pass takes column i's level slots
// from the fit's record rather than from its values.
func (m *Model) replays(i int) bool {
	c := m.Cols[i]
	return c.replay != nil && c.replay.rows == m.Rows
}

// EncodeReads returns the names of the input columns that Encode reads
// from its batches, besides the kept ones: the encoded columns, the target
// and the prior and group columns. In the training pass (Training) an
// encoded column whose level slots the fit recorded is left out, unless its
// values are hashed or cut to a prefix prior: a reader restricted to these
// columns (Select) does not decode it a second time.
func (m *Model) EncodeReads(use Use) []string {
	sp := &m.Spec
	var names []string
	for i, c := range m.Cols {
		if use == NewRows || !m.replays(i) || sp.needsValues(i) || sp.prior(i).Prefix > 0 {
			names = append(names, c.Name)
		}
	}
	for _, n := range append(sp.priorColumns(), sp.Target, sp.GroupColumn()) {
		if n != "" {
			names = append(names, n)
		}
	}
	return names
}

// GroupColumn returns the column whose values make the folds (--fold-by
// group=COL), or "".
func (sp *Spec) GroupColumn() string { return sp.groupColumn() }
