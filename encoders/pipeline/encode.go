package pipeline

import (
	"fmt"

	"manyfold/encoders/colstats"
	"manyfold/encoders/hashenc"
	"manyfold/encoders/smooth"
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

// outCol is one encoded output column and how to fill it.
type outCol struct {
	field  table.Field
	col    int    // index into Model.Cols
	method string // target, freq, topk, hash, sign, fold
	output int    // target output
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
	names := m.OutputNames()
	ni := 0
	add := func(kind table.Kind, col int, method string, o int) {
		outs = append(outs, outCol{field: table.Field{Name: names[ni], Kind: kind}, col: col, method: method, output: o})
		ni++
	}
	for ci, c := range m.Cols {
		for _, meth := range m.Spec.Methods {
			switch meth {
			case MethodTarget:
				for o := 0; o < len(c.Full); o++ {
					add(table.Float64, ci, meth, o)
				}
			case MethodFreq:
				if m.Spec.FreqShare {
					add(table.Float64, ci, meth, 0)
				} else {
					add(table.Int64, ci, meth, 0)
				}
			case MethodTopK:
				add(table.Int64, ci, meth, 0)
			case MethodHash:
				add(table.Int64, ci, meth, 0)
				if m.Spec.Signed {
					add(table.Int64, ci, "sign", 0)
				}
			}
		}
	}
	if !apply && m.Spec.FoldColumn != "" {
		outs = append(outs, outCol{field: table.Field{Name: m.Spec.FoldColumn, Kind: table.Int64}, method: "fold"})
	}
	seen := map[string]bool{}
	for _, f := range out.Fields {
		seen[f.Name] = true
	}
	for _, o := range outs {
		if seen[o.field.Name] {
			return nil, nil, nil, usageErr("output column %q would appear twice; drop the input column with --keep or rename it", o.field.Name)
		}
		seen[o.field.Name] = true
		out.Fields = append(out.Fields, o.field)
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
	idx := make([]int, len(m.Cols))
	for i, c := range m.Cols {
		idx[i] = schema.Index(c.Name)
		if idx[i] < 0 && !(training && m.replays(c)) {
			return sum, &ColumnError{File: opt.File, Flag: "the mapping tables", Name: c.Name, Have: schema.Names()}
		}
	}
	var tr *targetReader
	var fa *foldAssigner
	if training {
		if sp.Target != "" && (sp.has(MethodTarget) || sp.FoldBy == "stratified") {
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
	var running []*runningStats
	pcol := -1
	if sp.PriorColumn != "" {
		if pcol = schema.Index(sp.PriorColumn); pcol < 0 {
			return sum, &ColumnError{File: opt.File, Flag: "--prior-by column", Name: sp.PriorColumn, Have: schema.Names()}
		}
	}
	for i, c := range m.Cols {
		slots[i] = levelSlots{col: idx[i]}
		if training && m.replays(c) {
			slots[i].replay = c.replay.start()
		}
		pslots[i] = levelSlots{col: idx[i], prefix: sp.PriorPrefix}
		if pcol >= 0 {
			pslots[i] = levelSlots{col: pcol}
		}
		if training && sp.Scheme == "ordered" && c.Full != nil {
			running = append(running, newRunning(c))
		} else {
			running = append(running, nil)
		}
	}
	// In the training pass with k folds, a binary target's out-of-fold
	// mean is computed from one read of each row's counts (encodeFolds),
	// which also gives the row's frequency: fused[oi] is the frequency
	// output that target output oi fills, and byOther marks it.
	fused := make([]int, len(outs))
	byOther := make([]bool, len(outs))
	fast := make([]bool, len(outs))
	for oi, oc := range outs {
		fused[oi] = -1
		if !training || sp.Scheme != "kfold" || oc.method != MethodTarget || !m.fastFolds(m.Cols[oc.col]) {
			continue
		}
		fast[oi] = true
		for oj, od := range outs {
			if od.method == MethodFreq && od.col == oc.col {
				fused[oi], byOther[oj] = oj, true
			}
		}
	}
	batch := &table.Batch{Cols: make([]table.Column, len(kept)+len(outs))}
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
		colSlots := make([][]int32, len(m.Cols))
		parSlots := make([][]int32, len(m.Cols))
		each(len(m.Cols), opt.Threads, func(ci int) {
			c := m.Cols[ci]
			colSlots[ci] = slots[ci].fill(b, c.St, false)
			if c.Parent != nil {
				parSlots[ci] = pslots[ci].fill(b, c.Parent.St, false)
			}
			for _, l := range colSlots[ci] {
				if l < 0 || !c.Keep[l] {
					sum.Unseen[ci]++
				}
			}
		})
		each(len(outs), opt.Threads, func(oi int) {
			oc := outs[oi]
			if byOther[oi] {
				return
			}
			var scratch []byte
			dst := &batch.Cols[len(kept)+oi]
			var c *Col
			var ls, ps []int32
			if oc.method != "fold" {
				c = m.Cols[oc.col]
				ls, ps = colSlots[oc.col], parSlots[oc.col]
			}
			switch oc.method {
			case MethodTarget:
				fl := floats(dst, n)
				if fast[oi] {
					var freq *table.Column
					if oj := fused[oi]; oj >= 0 {
						freq = &batch.Cols[len(kept)+oj]
					}
					m.encodeFolds(c, ls, fold, fl, freq)
					break
				}
				rs := running[oc.col]
				for i := 0; i < n; i++ {
					l := int(ls[i])
					pl := -1
					if ps != nil {
						pl = int(ps[i])
					}
					var v float64
					switch {
					case !training || sp.Scheme == "none":
						if sp.PriorColumn != "" {
							// The prior depends on the row, not only the level.
							v = m.value(c, l, pl, oc.output, -1, c.Full[oc.output])
						} else if l >= 0 && c.Keep[l] {
							v = m.tmean(c, oc.output, l)
						} else {
							v = m.value(c, -1, pl, oc.output, -1, c.Full[oc.output])
						}
					case sp.Scheme == "kfold":
						f := int(fold[i])
						v = m.value(c, l, pl, oc.output, f, c.FoldFit[f][oc.output])
					case sp.Scheme == "loo":
						v = m.leaveOneOut(c, l, pl, oc.output, yOf(cls, vals, i))
					case sp.Scheme == "ordered":
						v = rs.next(m, l, oc.output, yOf(cls, vals, i))
					}
					if sp.Output == "logodds" {
						v = smooth.LogOdds(v)
					}
					fl[i] = v
				}
			case MethodFreq:
				if sp.FreqShare {
					fl := floats(dst, n)
					for i, l := range ls {
						fl[i] = 0
						if l >= 0 {
							fl[i] = m.freq(c, int(l))
						}
					}
				} else {
					in := ints(dst, n)
					for i, l := range ls {
						in[i] = 0
						if l >= 0 {
							in[i] = int64(m.freq(c, int(l)))
						}
					}
				}
			case MethodTopK:
				in := ints(dst, n)
				for i, l := range ls {
					in[i] = 0
					if l >= 0 {
						in[i] = int64(c.TopK[l])
					}
				}
			case MethodHash, "sign":
				in := ints(dst, n)
				src := &b.Cols[idx[oc.col]]
				for i := 0; i < n; i++ {
					var v []byte
					if src.Form == table.FormText || src.Form == table.FormDict {
						v = src.Bytes(i)
					} else {
						scratch = src.AppendText(scratch[:0], i)
						v = scratch
					}
					h := hashenc.Sum(v, sp.HashSeed)
					if oc.method == "sign" {
						in[i] = int64(hashenc.Sign(h))
					} else {
						in[i] = int64(hashenc.Bucket(h, sp.Buckets))
					}
				}
			case "fold":
				in := ints(dst, n)
				for i, f := range fold {
					in[i] = int64(f)
				}
			}
		})
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

// fastFolds reports whether encodeFolds encodes column c: a binary
// target, no hierarchical prior, values computed from the statistics.
func (m *Model) fastFolds(c *Col) bool {
	return m.fastTableValues(c) && c.Freq == nil && m.Spec.PriorColumn == ""
}

// encodeFolds sets tm[i] to the out-of-fold target mean of row i, whose
// level slot is ls[i] and fold fold[i] (what value gives with the fold's
// fit), and, when freq is not nil, fills freq with each row's frequency
// (what freq gives), from one read of the row's counts
// (Stats.OutOfFold2s).
func (m *Model) encodeFolds(c *Col, ls, fold []int32, tm []float64, freq *table.Column) {
	const part = 512
	var nb, kb, rb [part]uint64
	var fi []int64
	var ff []float64
	if freq != nil {
		if m.Spec.FreqShare {
			ff = floats(freq, len(ls))
		} else {
			fi = ints(freq, len(ls))
		}
	}
	logodds := m.Spec.Output == "logodds"
	for start := 0; start < len(ls); start += part {
		end := min(start+part, len(ls))
		ps, pf := ls[start:end], fold[start:end]
		c.St.OutOfFold2s(ps, pf, m.Pos, nb[:], kb[:], rb[:])
		for j, l := range ps {
			i := start + j
			ft := &c.FoldFit[pf[j]][0]
			kept := l >= 0 && c.Keep[l]
			v := ft.Prior
			if kept {
				v = ft.Encode(colstats.Agg{N: float64(nb[j]), Sum: float64(kb[j]), SumSq: float64(kb[j])})
			}
			if logodds {
				v = smooth.LogOdds(v)
			}
			tm[i] = v
			if freq == nil {
				continue
			}
			f := 0.0
			if kept {
				f = m.freqOf(c, rb[j])
			}
			if ff != nil {
				ff[i] = f
			} else {
				fi[i] = int64(f)
			}
		}
	}
}

// replays says whether the training pass takes column c's level slots
// from the fit's record rather than from its values.
func (m *Model) replays(c *Col) bool { return c.replay != nil && c.replay.rows == m.Rows }

// EncodeReads returns the names of the input columns that Encode reads
// from its batches, besides the kept ones: the encoded columns, the target
// and the prior and group columns. In the training pass (apply false) an
// encoded column whose level slots the fit recorded is left out, unless its
// values are hashed or cut to a prefix prior: a reader restricted to these
// columns (Select) does not decode it a second time.
func (m *Model) EncodeReads(apply bool) []string {
	sp := &m.Spec
	var names []string
	for _, c := range m.Cols {
		if apply || !m.replays(c) || sp.has(MethodHash) || sp.PriorPrefix > 0 {
			names = append(names, c.Name)
		}
	}
	for _, n := range []string{sp.Target, sp.PriorColumn, sp.GroupColumn()} {
		if n != "" {
			names = append(names, n)
		}
	}
	return names
}

// yOf returns the target of row i as a class index or value; ok is false
// when it is unknown.
func yOf(cls []int32, vals []float64, i int) target {
	if cls != nil {
		return target{cls: int(cls[i]), ok: cls[i] >= 0}
	}
	if vals != nil {
		return target{val: vals[i], ok: vals[i] == vals[i]}
	}
	return target{}
}

type target struct {
	cls int
	val float64
	ok  bool
}

// contribution returns what a row with target t adds to the sum of output o.
func (m *Model) contribution(t target, o int) float64 {
	switch m.Task {
	case colstats.Regression:
		return t.val - m.Origin // the statistics' sums are about Origin
	case colstats.Binary:
		if t.cls == m.Pos {
			return 1
		}
		return 0
	}
	if t.cls == o {
		return 1
	}
	return 0
}

// leaveOneOut encodes a training row from the statistics of all other rows
// of its level: (s - y + m*p) / (n - 1 + m), the prior and m of all rows.
// Leave-one-out leaks the row's own label (see the package README).
func (m *Model) leaveOneOut(c *Col, l, pl, o int, t target) float64 {
	ft := c.Full[o]
	if l < 0 || !c.Keep[l] {
		return m.value(c, -1, pl, o, -1, ft)
	}
	a := c.St.Target(l, o, -1, m.Pos)
	if t.ok {
		y := m.contribution(t, o)
		a.N--
		a.Sum -= y
		a.SumSq -= y * y
	}
	if c.Parent != nil {
		ft.Prior = m.value(c, -1, pl, o, -1, ft)
	}
	return ft.Encode(a)
}

// runningStats holds, for the ordered scheme, the statistics of the rows
// read so far of every level.
type runningStats struct {
	col  *Col
	outs int
	agg  []colstats.Agg // [slot*outs + o]
}

func newRunning(c *Col) *runningStats {
	return &runningStats{col: c, outs: len(c.Full), agg: make([]colstats.Agg, c.St.NumLevels()*len(c.Full))}
}

// next encodes a row of slot l from the rows before it, the m-estimate or
// blend of their statistics with the prior and m of all rows (the ordered
// target statistic), then counts the row. Each output keeps statistics of
// its own, so outputs may be encoded one after another over a batch.
func (rs *runningStats) next(m *Model, l, o int, t target) float64 {
	ft := rs.col.Full[o]
	if l < 0 || !rs.col.Keep[l] {
		return ft.Prior
	}
	a := &rs.agg[l*rs.outs+o]
	v := ft.Encode(*a)
	if t.ok {
		y := m.contribution(t, o)
		a.N++
		a.Sum += y
		a.SumSq += y * y
	}
	return v
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
