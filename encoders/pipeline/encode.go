package pipeline

import (
	"fmt"

	"manyfold/encoders/method"
	"manyfold/io/table"
)

// EncodeOptions configures the second pass.
type EncodeOptions struct {
	File string
	// Apply encodes every row as a new row: with the values fitted on all
	// training rows, unseen levels getting the prior, the other code, 0 and
	// their bucket. Without it the spec's scheme gives training rows their
	// out-of-fold values.
	Apply    bool
	Progress func(rows int64)
	Threads  int // columns processed at once; below 2 means one at a time
	// Input, when not nil, is the input's full schema, of which r yields
	// only some columns (see Reader.Select): the kept columns that r does
	// not yield are written as empty columns, for a writer that copies
	// them from the input itself.
	Input *table.Schema
}

// Summary describes an encoding pass.
type Summary struct {
	Rows    int64
	Missing int64   // rows with an unknown target (training pass)
	Unseen  []int64 // per column: rows whose level was unseen or left out
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
func (m *Model) OutputSchema(file string, in *table.Schema, apply bool) (*table.Schema, []int, []outCol, error) {
	var kept []int
	switch {
	case m.Spec.KeepAll:
		for i := range in.Fields {
			kept = append(kept, i)
		}
	default:
		for _, name := range m.Spec.Keep {
			i := in.Index(name)
			if i < 0 {
				return nil, nil, nil, &ColumnError{File: file, Flag: "--keep", Name: name, Have: in.Names()}
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
				oc.fields = append(oc.fields, table.Field{Name: c.Name + "_" + o.Name, Kind: o.Kind})
			}
			outs = append(outs, oc)
		}
	}
	if !apply && m.Spec.FoldColumn != "" {
		outs = append(outs, outCol{fields: []table.Field{{Name: m.Spec.FoldColumn, Kind: table.Int64}}, col: -1})
	}
	seen := map[string]bool{}
	for _, f := range out.Fields {
		seen[f.Name] = true
	}
	for _, o := range outs {
		for _, f := range o.fields {
			if seen[f.Name] {
				return nil, nil, nil, usageErr("output column %q would appear twice; drop the input column with --keep or rename it", f.Name)
			}
			seen[f.Name] = true
			out.Fields = append(out.Fields, f)
		}
	}
	return out, kept, outs, nil
}

// Encode reads every batch of r (the second pass) and writes the kept
// columns and the encoded columns to w. r must hold the table the model was
// fitted on (training pass) or a table with the same columns (Apply). It
// closes neither r nor w.
func (m *Model) Encode(r table.Reader, w table.Writer, opt EncodeOptions) (Summary, error) {
	schema := r.Schema()
	sum := Summary{Unseen: make([]int64, len(m.Cols))}
	full := schema
	if opt.Input != nil {
		full = opt.Input
	}
	_, kept, outs, err := m.OutputSchema(opt.File, full, opt.Apply)
	if err != nil {
		return sum, err
	}
	// kept[i] indexes the full schema; keptAt[i] the batches, or -1 for
	// a column the batches do not hold.
	keptAt := make([]int, len(kept))
	for i, k := range kept {
		keptAt[i] = schema.Index(full.Fields[k].Name)
	}
	sp := &m.Spec
	training := !opt.Apply
	pass := method.Apply
	if training {
		pass = sp.Scheme
	}
	idx := make([]int, len(m.Cols))
	for i, c := range m.Cols {
		idx[i] = schema.Index(c.Name)
		if idx[i] < 0 && !(training && m.replays(i)) {
			return sum, &ColumnError{File: opt.File, Flag: "the mapping tables", Name: c.Name, Have: schema.Names()}
		}
	}
	var tr *targetReader
	var fa *foldAssigner
	if training {
		if sp.Target != "" && (sp.supervised() || sp.FoldBy.Needs().Class) {
			tcol := schema.Index(sp.Target)
			tr = newTargetReader(opt.File, sp.Target, tcol, schema.Fields[tcol].Kind, m.Task.String(), m.Classes)
		}
		gcol := -1
		if g := sp.groupColumn(); g != "" {
			gcol = schema.Index(g)
		}
		fa = newFoldAssigner(sp, gcol, m.Rows)
	}
	slots := make([]levelSlots, len(m.Cols))
	pslots := make([]levelSlots, len(m.Cols))
	rows := make([]method.Rows, len(m.Cols))
	encoders := make([][]method.Encoder, len(m.Cols))
	// first[ci] lists the column's encodings in the order they run: those
	// that read the target first, as they may read each row's level rows
	// on the way and leave them for the others (method.Rows.LevelRows).
	first := make([][]int, len(m.Cols))
	at := make([][]int, len(m.Cols)) // position of each encoding's first output
	for i, c := range m.Cols {
		slots[i] = levelSlots{col: idx[i]}
		if training && m.replays(i) {
			slots[i].replay = c.replay.start()
		}
		if c.Parent != nil {
			if pc := sp.prior(i).Column; pc != "" {
				pcol := schema.Index(pc)
				if pcol < 0 {
					return sum, &ColumnError{File: opt.File, Flag: "prior=column:" + pc, Name: pc, Have: schema.Names()}
				}
				pslots[i] = levelSlots{col: pcol}
			} else {
				pslots[i] = levelSlots{col: idx[i], prefix: sp.prior(i).Prefix}
			}
		}
		at[i] = make([]int, len(c.Fits))
		for ei, f := range c.Fits {
			encoders[i] = append(encoders[i], f.Encoder(pass))
			if sp.EncodingsOf(i)[ei].Needs().Target {
				first[i] = append(first[i], ei)
			}
		}
		for ei := range c.Fits {
			if !sp.EncodingsOf(i)[ei].Needs().Target {
				first[i] = append(first[i], ei)
			}
		}
	}
	foldAt := -1
	pos := len(kept)
	for _, oc := range outs {
		if oc.col < 0 {
			foldAt = pos
		} else {
			at[oc.col][oc.enc] = pos
		}
		pos += len(oc.fields)
	}
	batch := &table.Batch{Cols: make([]table.Column, pos)}
	if err := table.ForEach(r, func(b *table.Batch) error {
		n := b.Rows
		var cls []int32
		var vals []float64
		var fold []int32
		if training {
			if tr != nil {
				if err := tr.read(b); err != nil {
					return err
				}
				if tr.regress {
					vals = tr.vals
				} else {
					cls = tr.cls
				}
			}
			var labels []string
			if tr != nil {
				labels = tr.order
			}
			fold, err = fa.assign(b, cls, labels)
			if err != nil {
				return err
			}
		}
		for i, k := range keptAt {
			if k < 0 {
				batch.Cols[i] = table.Column{}
				continue
			}
			batch.Cols[i] = b.Cols[k]
		}
		for ci := range m.Cols {
			if slots[ci].col < 0 && !slots[ci].replay.has(n) {
				return &table.DataError{File: opt.File, Row: b.FirstRow, Err: fmt.Errorf("the second pass read more rows than the first, %d; the file changed while it was read", m.Rows)}
			}
		}
		each(len(m.Cols), opt.Threads, func(ci int) {
			c := m.Cols[ci]
			rw := &rows[ci]
			rw.Reset(n)
			rw.Slots = slots[ci].fill(b, c.St, false)
			rw.ParentSlots = nil
			if c.Parent != nil {
				rw.ParentSlots = pslots[ci].fill(b, c.Parent.St, false)
			}
			rw.Fold, rw.Cls, rw.Vals, rw.Values = fold, cls, vals, nil
			if idx[ci] >= 0 {
				rw.Values = &b.Cols[idx[ci]]
			}
			for _, l := range rw.Slots {
				if l < 0 || !c.Keep[l] {
					sum.Unseen[ci]++
				}
			}
			for _, ei := range first[ci] {
				k := at[ci][ei]
				encoders[ci][ei].Encode(rw, batch.Cols[k:k+len(c.Fits[ei].Outputs())])
			}
		})
		if foldAt >= 0 {
			in := ints(&batch.Cols[foldAt], n)
			for i, f := range fold {
				in[i] = int64(f)
			}
		}
		batch.Rows, batch.FirstRow, batch.Lines = n, b.FirstRow, b.Lines
		if err := w.Write(batch); err != nil {
			return err
		}
		sum.Rows += int64(n)
		if opt.Progress != nil {
			opt.Progress(sum.Rows)
		}
		return nil
	}); err != nil {
		return sum, err
	}
	if tr != nil {
		sum.Missing = tr.missing
	}
	if training && sum.Rows != m.Rows {
		return sum, fmt.Errorf("%s: the second pass read %d rows, the first %d; the file changed while it was read", opt.File, sum.Rows, m.Rows)
	}
	return sum, nil
}

// replays says whether the training pass takes column i's level slots
// from the fit's record rather than from its values.
func (m *Model) replays(i int) bool {
	c := m.Cols[i]
	return c.replay != nil && c.replay.rows == m.Rows
}

// EncodeReads returns the names of the input columns that Encode reads
// from its batches, besides the kept ones: the encoded columns, the target
// and the prior and group columns. In the training pass (apply false) an
// encoded column whose level slots the fit recorded is left out, unless its
// values are hashed or cut to a prefix prior: a reader restricted to these
// columns (Select) does not decode it a second time.
func (m *Model) EncodeReads(apply bool) []string {
	sp := &m.Spec
	var names []string
	for i, c := range m.Cols {
		if apply || !m.replays(i) || sp.needsValues(i) || sp.prior(i).Prefix > 0 {
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

func floats(c *table.Column, n int) []float64 {
	c.Form, c.Nulls = table.FormFloat64, nil
	if cap(c.Floats) < n {
		c.Floats = make([]float64, n)
	}
	c.Floats = c.Floats[:n]
	return c.Floats
}

func ints(c *table.Column, n int) []int64 {
	c.Form, c.Nulls = table.FormInt64, nil
	if cap(c.Ints) < n {
		c.Ints = make([]int64, n)
	}
	c.Ints = c.Ints[:n]
	return c.Ints
}

// GroupColumn returns the column whose values make the folds (--fold-by
// group=COL), or "".
func (sp *Spec) GroupColumn() string { return sp.groupColumn() }
