package pipeline

import (
	"bytes"
	"fmt"
	"math"
	"sort"
	"strconv"
	"unsafe"

	"manyfold/encoders/colstats"
	"manyfold/folds"
	"manyfold/internal/param"
	"manyfold/io/table"
)

// levelSlots maps the rows of one column in a batch to level slots of a
// Stats, caching the slot of each dictionary entry so that a dictionary
// column is looked up once per entry (per column chunk: the cache holds
// across the batches of one dictionary), not once per row.
type levelSlots struct {
	col      int // position in the batch
	prefix   int // >0: look up the first prefix bytes of each value
	nullSlot int // slot of null rows: 0, or -1 when nulls are unseen
	dictID   uint64
	dictMap  []int32
	scratch  []byte
	slots    []int32
	replay   *cursor // the fit's slots of these rows, when recorded
	settle   bool    // adding: leave making room for new levels to Stats.Settle

	// Per batch: the values to look up, in order of first use.
	keys  [][]byte
	ents  []int32 // dictionary: the entry of each key
	ends  []int   // other forms: end of each key in scratch
	ids   []uint32
	found []int32
}

const (
	unmapped = math.MinInt32
	pending  = math.MinInt32 + 1 // dictionary entry queued for lookup in this batch
)

// fill computes slots[i] for every row of the batch. With add, new levels
// are added to st, in order of first appearance; otherwise an unseen level
// gets -1. The values are gathered first and looked up in one batch
// (Stats.LevelBatch, Stats.LookupBatch).
func (ls *levelSlots) fill(b *table.Batch, st *colstats.Stats, add bool) []int32 {
	if cap(ls.slots) < b.Rows {
		ls.slots = make([]int32, b.Rows)
	}
	slots := ls.slots[:b.Rows]
	if ls.replay != nil {
		if ls.replay.fill(slots) {
			return slots
		}
		// More rows than the fit read: look the rest up.
		ls.replay = nil
	}
	c := &b.Cols[ls.col]
	if cap(ls.keys) < b.Rows {
		// A batch's keys at once, not by doubling: growing a slice of
		// slices copies it and touches fresh memory each time.
		ls.keys = make([][]byte, 0, b.Rows)
	}
	keys := ls.keys[:0]
	cut := func(v []byte) []byte {
		if ls.prefix > 0 && len(v) > ls.prefix {
			v = v[:ls.prefix]
		}
		return v
	}
	switch c.Form {
	case table.FormDict:
		if c.Dict.ID == 0 || c.Dict.ID != ls.dictID || len(ls.dictMap) != c.Dict.Len() {
			ls.dictID = c.Dict.ID
			n := c.Dict.Len()
			if cap(ls.dictMap) < n {
				ls.dictMap = make([]int32, n)
			}
			ls.dictMap = ls.dictMap[:n]
			for i := range ls.dictMap {
				ls.dictMap[i] = unmapped
			}
		}
		ents := ls.ents[:0]
		for i := 0; i < b.Rows; i++ {
			if c.IsNull(i) {
				continue
			}
			j := c.Indices[i]
			if ls.dictMap[j] == unmapped {
				ls.dictMap[j] = pending
				ents = append(ents, j)
				keys = append(keys, cut(c.Dict.Entry(int(j))))
			}
		}
		found := ls.lookup(st, keys, add)
		for k, j := range ents {
			ls.dictMap[j] = found[k]
		}
		ls.ents = ents
		for i := 0; i < b.Rows; i++ {
			if c.IsNull(i) {
				slots[i] = int32(ls.nullSlot)
				continue
			}
			slots[i] = ls.dictMap[c.Indices[i]]
		}
	case table.FormText:
		for i := 0; i < b.Rows; i++ {
			if !c.IsNull(i) {
				keys = append(keys, cut(c.Data[c.Offsets[i]:c.Offsets[i+1]]))
			}
		}
		ls.scatter(c, slots, ls.lookup(st, keys, add))
	default:
		ends := ls.ends[:0]
		buf := ls.scratch[:0]
		for i := 0; i < b.Rows; i++ {
			if !c.IsNull(i) {
				at := len(buf)
				buf = c.AppendText(buf, i)
				if ls.prefix > 0 && len(buf)-at > ls.prefix {
					buf = buf[:at+ls.prefix]
				}
				ends = append(ends, len(buf))
			}
		}
		// Slice the keys only now: buf may have moved while it grew.
		at := 0
		for _, e := range ends {
			keys = append(keys, buf[at:e:e])
			at = e
		}
		ls.scratch, ls.ends = buf, ends
		ls.scatter(c, slots, ls.lookup(st, keys, add))
	}
	clear(keys) // drop references to the batch's buffers
	ls.keys = keys[:0]
	return slots
}

// lookup returns the slots of keys, adding new levels with add.
func (ls *levelSlots) lookup(st *colstats.Stats, keys [][]byte, add bool) []int32 {
	n := len(keys)
	if cap(ls.ids) < n {
		ls.ids = make([]uint32, n)
		ls.found = make([]int32, n)
	}
	found := ls.found[:n]
	if add && ls.settle {
		st.InternBatch(keys, ls.ids, found)
	} else if add {
		st.LevelBatch(keys, ls.ids, found)
	} else {
		st.LookupBatch(keys, ls.ids, found)
	}
	return found
}

// scatter writes the slots found for the non-null rows of c, in order, and
// the null slot for the null rows.
func (ls *levelSlots) scatter(c *table.Column, slots, found []int32) {
	k := 0
	for i := range slots {
		if c.IsNull(i) {
			slots[i] = int32(ls.nullSlot)
			continue
		}
		slots[i] = found[k]
		k++
	}
}

// targetReader turns the target column of a batch into class indices
// (classification) or values (regression); missing targets are -1 or NaN.
type targetReader struct {
	file    string
	name    string
	col     int
	numeric bool // the target column's kind is numeric: labels are canonical numbers
	regress bool
	labels  map[string]int
	order   []string // class labels by index, in order of appearance
	scratch []byte
	cls     []int32
	vals    []float64
	missing int64
	fixed   bool // task given by the user: do not switch
	binary  bool // task given as binary: a third class is an error
	// The first values met and their classes, so that a target of few
	// distinct values is not parsed, formatted and looked up by label on
	// every row: integers, and texts (a CSV's "0" and "1").
	ints  classMemo[int64]
	texts classMemo[string]
}

// MaxTarget bounds the magnitude of a regression target: the statistics
// hold sums of squares of targets (less the origin), and a square must stay
// finite.
const MaxTarget = 1e150

// newTargetReader returns the reader of the target column name at position
// col of kind kind: the one constructor of fit, encode and compare, so all
// of them read the same column the same way. task is "" (decided later
// from the first rows, TaskProbe), binary, multiclass or regression. classes, when
// known (the encode pass after a fit), are the labels in the fitted order:
// rows get those class numbers; otherwise classes are numbered in order of
// appearance.
func newTargetReader(file, name string, col int, kind table.Kind, task string, classes []string) *targetReader {
	tr := &targetReader{file: file, name: name, col: col, labels: map[string]int{},
		numeric: kind == table.Int64 || kind == table.Float64, fixed: task != "", binary: task == colstats.Binary.String()}
	if task == colstats.Regression.String() {
		tr.regress = true
		if kind == table.String {
			// Text columns may still hold numbers (CSV); read them as such.
			tr.numeric = true
		}
	}
	for i, cl := range classes {
		tr.labels[cl] = i
		tr.order = append(tr.order, cl)
	}
	return tr
}

// classMemo remembers the classes of the first distinct raw values of a
// target, at most 2*MaxClasses of them: a raw value always gets the same
// class, as its label is a function of it.
type classMemo[T comparable] struct {
	vals []T
	cls  []int32
}

// get returns the class of v if v was met before: a linear search of at
// most 2*MaxClasses values, most often two.
func (m *classMemo[T]) get(v T) (int32, bool) {
	for j, w := range m.vals {
		if w == v {
			return m.cls[j], true
		}
	}
	return 0, false
}

// view returns b as a string without copying it (a conversion would
// allocate past 32 bytes), for comparing only: it is valid while b is, and
// classMemo.put is given a copy.
func view(b []byte) string { return unsafe.String(unsafe.SliceData(b), len(b)) }

// put records that v has class k, while there is room.
func (m *classMemo[T]) put(v T, k int32) {
	if len(m.vals) < 2*MaxClasses {
		m.vals = append(m.vals, v)
		m.cls = append(m.cls, k)
	}
}

func (tr *targetReader) dataErr(b *table.Batch, i int, err error) error {
	e := &table.DataError{File: tr.file, Row: b.FirstRow + int64(i), Column: tr.name, Err: err}
	if b.Lines != nil {
		e.Line = b.Lines[i]
	}
	return e
}

// read fills cls or vals for the batch's rows.
func (tr *targetReader) read(b *table.Batch) error {
	c := &b.Cols[tr.col]
	n := b.Rows
	if tr.regress {
		if cap(tr.vals) < n {
			tr.vals = make([]float64, n)
		}
		tr.vals = tr.vals[:n]
		for i := 0; i < n; i++ {
			v, ok, err := c.Float(i)
			if err != nil {
				return tr.dataErr(b, i, fmt.Errorf("target %v; a regression target must be numeric", err))
			}
			if !ok {
				tr.vals[i] = math.NaN()
				tr.missing++
				continue
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return tr.dataErr(b, i, fmt.Errorf("target is %v; NaN and infinite targets are refused (leave the cell empty to mark it unknown)", v))
			}
			if math.Abs(v) > MaxTarget {
				return tr.dataErr(b, i, fmt.Errorf("target is %v; a regression target beyond ±%g would overflow its sums of squares (rescale it)", v, MaxTarget))
			}
			tr.vals[i] = v
		}
		return nil
	}
	if cap(tr.cls) < n {
		tr.cls = make([]int32, n)
	}
	tr.cls = tr.cls[:n]
	for i := 0; i < n; i++ {
		if c.IsNull(i) {
			tr.cls[i] = -1
			tr.missing++
			continue
		}
		// A classification target has few distinct values: find the
		// class of this one among those already met before parsing or
		// formatting it as a label and looking that up.
		intForm := c.Form == table.FormInt64 && tr.numeric
		textForm := c.Form == table.FormText || c.Form == table.FormDict
		if intForm {
			if k, ok := tr.ints.get(c.Ints[i]); ok {
				tr.cls[i] = k
				continue
			}
		} else if textForm {
			if k, ok := tr.texts.get(view(c.Bytes(i))); ok {
				tr.cls[i] = k
				continue
			}
		}
		var key []byte
		if tr.numeric {
			v, _, err := c.Float(i)
			if err != nil {
				return tr.dataErr(b, i, err)
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return tr.dataErr(b, i, fmt.Errorf("target is %v; NaN and infinite targets are refused (leave the cell empty to mark it unknown)", v))
			}
			tr.scratch = table.AppendFloat(tr.scratch[:0], v)
			key = tr.scratch
		} else {
			tr.scratch = c.AppendText(tr.scratch[:0], i)
			key = tr.scratch
		}
		k, ok := tr.labels[string(key)]
		if !ok {
			if tr.binary && len(tr.order) == 2 {
				return tr.dataErr(b, i, param.Errorf("%s binary, but the target has a third value %q besides %q and %q", ParamTask, key, tr.order[0], tr.order[1]))
			}
			if len(tr.order) >= MaxClasses {
				var hint param.Text
				if tr.numeric && !tr.fixed {
					hint = param.Textf("; for a numeric target give %s regression", ParamTask)
				}
				return tr.dataErr(b, i, param.Errorf("target has more than %d classes%v", MaxClasses, hint))
			}
			k = len(tr.order)
			tr.labels[string(key)] = k
			tr.order = append(tr.order, string(key))
		}
		tr.cls[i] = int32(k)
		if intForm {
			tr.ints.put(c.Ints[i], int32(k))
		} else if textForm {
			tr.texts.put(string(c.Bytes(i)), int32(k))
		}
	}
	return nil
}

// sortedClasses returns the class labels in sorted order (numerically for
// numeric targets, by bytes otherwise) and the permutation from appearance
// index to sorted position.
func sortedClasses(order []string, numeric bool) ([]string, []int) {
	idx := make([]int, len(order))
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool {
		x, y := order[idx[a]], order[idx[b]]
		if numeric {
			fx, _ := strconv.ParseFloat(x, 64)
			fy, _ := strconv.ParseFloat(y, 64)
			return fx < fy
		}
		return bytes.Compare([]byte(x), []byte(y)) < 0
	})
	labels := make([]string, len(order))
	pos := make([]int, len(order))
	for p, i := range idx {
		labels[p] = order[i]
		pos[i] = p
	}
	return labels, pos
}

// foldAssigner gives the fold of each row of a batch: the spec's fold rule
// (folds.ParseRule) with the batch's group column, classes and row numbers.
type foldAssigner struct {
	groupCol int // position of the group column in the batch, or -1
	as       folds.Assigner
	out      []int32
}

func newFoldAssigner(sp *Spec, groupCol int, total int64) *foldAssigner {
	return &foldAssigner{groupCol: groupCol, as: sp.FoldBy.Assigner(sp.Seed, sp.folds(), total)}
}

// assign fills the fold of every row. cls holds the class number of each
// row for stratified folds (-1: unknown target, assigned by row number) and
// labels the label of each class number: a class's fold stream follows its
// label, not its number, so the fit (classes numbered as met) and the
// encode pass (classes numbered in sorted order) give a row the same fold.
func (fa *foldAssigner) assign(b *table.Batch, cls []int32, labels []string) ([]int32, error) {
	if cap(fa.out) < b.Rows {
		fa.out = make([]int32, b.Rows)
	}
	out := fa.out[:b.Rows]
	fb := folds.Batch{First: uint64(b.FirstRow - 1), Class: cls, Labels: labels}
	if fa.groupCol >= 0 {
		fb.Group = &b.Cols[fa.groupCol]
	}
	if err := fa.as.Assign(fb, out); err != nil {
		return nil, err
	}
	return out, nil
}
