// Package method holds manyfold's encoding methods, one file each, behind
// one interface, and the grammar that names an encoding: a method and its
// parameters, such as target:eb, freq:share, topk:100 or hash:1024:signed.
//
// The driver (encoders/pipeline) gathers each column's per-level, per-fold
// statistics (colstats.Stats) in one pass, keeps the level slots of the
// rows, the folds and the targets, and hands them to the methods: Fit
// derives a method's values from the statistics, an Encoder fills the
// method's output columns one batch at a time, and the fitted method saves
// and loads its own columns of the column's mapping table, by name. Adding
// a method is one file that implements Method and Encoding and one line in
// the registry (registry.go).
package method

import (
	"encoding/json"

	"manyfold/encoders/colstats"
	"manyfold/io/table"
)

// Method is an encoding method: a name in the grammar and a parser of its
// parameters.
type Method interface {
	// Name is the method's first word in the grammar.
	Name() string
	// Syntax is the method's grammar, Summary one line on what it
	// writes, for the commands' help.
	Syntax() string
	Summary() string
	// Parse returns the encoding that the parameters args (the grammar's
	// fields after the name, split at ':') describe; errors say which
	// parameter is wrong and what is wanted.
	Parse(args []string) (Encoding, error)
}

// Encoding is a method with its parameters, before the fit.
type Encoding interface {
	// Method is the registered method.
	Method() Method
	// String is the encoding in canonical grammar: parsing it gives the
	// same encoding.
	String() string
	// Needs says what the encoding reads besides the level of each row.
	Needs() Needs
	// Names returns the suffixes of the output columns' names that are
	// known before the fit (those that depend on it, such as one per
	// class, are left out).
	Names() []string
	// Validate reports a training scheme the encoding cannot serve,
	// before any data is read.
	Validate(scheme Pass) error
	// Check reports a fitted target the encoding cannot serve (a weight
	// of evidence needs a binary one, say), once the task is known.
	Check(task colstats.Task, classes int) error
	// Fit derives the encoding's values from a column's statistics.
	Fit(c *Column) Fitted
	// Load returns the encoding of a column read from a mapping table,
	// from what its Fitted.Manifest recorded; its values are then read
	// from the table (Fitted.LoadTable).
	Load(c *Column, fit json.RawMessage) (Fitted, error)
}

// Needs is what an encoding reads beyond the level slot of each row.
type Needs struct {
	// Target: the target's statistics per level and fold (supervised).
	Target bool
	// Values: the column's value in each row (hashing), so that an
	// unseen level is encoded too.
	Values bool
	// Prior: the hierarchical prior a level is pulled towards.
	Prior Prior
}

// Prior names the parent of a level for a hierarchical prior: the level's
// first Prefix bytes, or the row's value of Column. The zero Prior is none.
type Prior struct {
	Prefix int
	Column string
}

// None reports whether p is no hierarchical prior.
func (p Prior) None() bool { return p.Prefix == 0 && p.Column == "" }

// Column is an encoded column's fitted statistics, as the driver hands
// them to the methods.
type Column struct {
	Name       string
	St         *colstats.Stats
	Keep       []bool  // per slot: counted as seen (--min-level-rows, nulls)
	Total      float64 // rows of all levels
	Distinct   int     // levels with rows, the null level included
	Supervised bool    // St holds the target's statistics
	Task       colstats.Task
	Classes    []string // classification: labels in sorted order
	Pos        int      // binary: the positive class's slot
	// Parent holds, for a hierarchical prior, the statistics of the parent
	// levels; ParentOf the parent slot of each slot for a prefix prior
	// (nil when the parent is the row's value of another column).
	Parent   *Column
	ParentOf []int32
	// Order returns the slots in canonical order (Stats.Sorted), sorted
	// once on first use.
	Order func() []uint32
}

// Fitted is an encoding fitted on one column (or loaded from its mapping
// table).
type Fitted interface {
	// Outputs returns the encoded columns' names after the column's name
	// and "_", and their kinds, in output order.
	Outputs() []table.Field
	// Encoder returns what encodes the rows of one pass.
	Encoder(p Pass) Encoder
	// TableColumns returns the encoding's columns in the column's mapping
	// table (names unique among all encodings' columns).
	TableColumns() []table.Field
	// FillTable fills the table columns (in TableColumns order) for the
	// levels of lv.
	FillTable(lv *Levels, dst []table.Column)
	// LoadTable reads the table columns (in TableColumns order) of rows
	// [0, n) of a batch, whose levels have the slots slots; it checks
	// every value.
	LoadTable(slots []int32, src []table.Column) error
	// Finish checks, after the whole table was loaded, what depends on
	// every level (a stored value against its statistics).
	Finish() error
	// Manifest returns what the manifest records of the fit (priors,
	// smoothing weights), nil for nothing; Encoding.Load reads it back.
	Manifest() any
}

// Encoder fills an encoding's output columns for the rows of a batch.
type Encoder interface {
	Encode(r *Rows, dst []table.Column)
}

// Pass says which values the rows of a pass get.
type Pass uint8

// The passes. Apply encodes new rows with the values fitted on all
// training rows (unseen levels get the prior, the "other" code, 0); the
// others encode the training rows by a scheme (Scheme).
const (
	Apply       Pass = iota
	KFold            // from the rows of the other folds
	LeaveOneOut      // from the other rows of the level
	Ordered          // from the rows before it, in file order
	InSample         // from all rows, the row's own included
)

var passNames = [...]string{Apply: "apply", KFold: "kfold", LeaveOneOut: "loo", Ordered: "ordered", InSample: "none"}

// String returns the scheme's name in the command's grammar (apply for
// Apply).
func (p Pass) String() string { return passNames[p] }

// ParseScheme parses a training scheme: kfold, loo, ordered or none.
func ParseScheme(s string) (Pass, bool) {
	for i, n := range passNames {
		if n == s && Pass(i) != Apply {
			return Pass(i), true
		}
	}
	return 0, false
}

// Rows is one batch of rows of an encoded column, as the driver read them.
type Rows struct {
	N     int
	Slots []int32 // level slot of each row; -1: a level the fit did not see
	// ParentSlots is the slot of each row's parent level, for a column with
	// a hierarchical prior (-1: unseen).
	ParentSlots []int32
	Fold        []int32       // training pass: each row's fold
	Cls         []int32       // training pass, classification: each row's class, -1 unknown
	Vals        []float64     // training pass, regression: each row's target, NaN unknown
	Values      *table.Column // Needs.Values: the column itself

	// levelRows caches the rows of each row's level, see LevelRows.
	levelRows []uint64
	haveRows  bool
}

// Reset prepares r for a new batch of n rows.
func (r *Rows) Reset(n int) {
	r.N = n
	r.haveRows = false
}

// LevelRows returns the fitting rows of each row's level (0 for a level
// unseen or left out): read from the statistics by the first encoding that
// asks, or handed over by one that read them anyway (SetLevelRows).
func (r *Rows) LevelRows(c *Column) []uint64 {
	if r.haveRows {
		return r.levelRows
	}
	out := r.rowsBuf()
	for i, l := range r.Slots {
		out[i] = 0
		if l >= 0 && c.Keep[l] {
			out[i] = c.St.RowCount(int(l))
		}
	}
	r.haveRows = true
	return out
}

// RowsBuf returns a buffer of N values that SetLevelRows then publishes.
func (r *Rows) rowsBuf() []uint64 {
	if cap(r.levelRows) < r.N {
		r.levelRows = make([]uint64, r.N)
	}
	r.levelRows = r.levelRows[:r.N]
	return r.levelRows
}

// LevelRowsBuf returns a buffer for an encoding that reads each row's level
// rows as a by-product; it fills it and calls SetLevelRows.
func (r *Rows) LevelRowsBuf() []uint64 { return r.rowsBuf() }

// SetLevelRows publishes the buffer of LevelRowsBuf, filled with the rows
// of each row's level (0 for a level unseen or left out).
func (r *Rows) SetLevelRows() { r.haveRows = true }

// Levels is a chunk of a column's levels in canonical order, as the driver
// writes them to the mapping table, with their statistics.
type Levels struct {
	Slots []int // level slots
	// Unkept0 marks Slots[0] as the null level stored though it counts as
	// unseen (nulls unseen): its values are those of an unseen level.
	Unkept0 bool
	// Data and Offsets hold the level bytes: level i is
	// Data[Offsets[i]:Offsets[i+1]].
	Data    []byte
	Offsets []int32
	Rows    []int64 // every row of the level
	// Supervised columns: the rows with a known target, and either the
	// count of each class (Counts[class][i]) or the target sum and sum of
	// squares about the origin.
	TargetRows []int64
	Counts     [][]int64
	Sum, SumSq []float64
}

// Bytes returns the bytes of level i.
func (lv *Levels) Bytes(i int) []byte { return lv.Data[lv.Offsets[i]:lv.Offsets[i+1]] }

// Agg returns the target statistic of level i for output o (the class
// count for a classification output; pos is a binary target's positive
// class).
func (lv *Levels) Agg(i, o, pos int, task colstats.Task) colstats.Agg {
	switch task {
	case colstats.Regression:
		return colstats.Agg{N: float64(lv.TargetRows[i]), Sum: lv.Sum[i], SumSq: lv.SumSq[i]}
	case colstats.Binary:
		o = pos
	}
	k := float64(lv.Counts[o][i])
	return colstats.Agg{N: float64(lv.TargetRows[i]), Sum: k, SumSq: k}
}

// Coded is a Fitted whose first output is a code standing for a group of
// levels (a top-k code, a hash bucket) rather than a quantity: a model
// expands it into one indicator per code. Codes returns the number of
// codes and the first one's value; n == 0 means the output is a quantity
// after all.
type Coded interface {
	Codes() (n int, first int64)
}

// Warner is a Fitted that has something to tell the user about its fit
// (a hash with far too few buckets, say), one line each.
type Warner interface {
	Warnings() []string
}
