// Package pipeline runs manyfold's main job: one pass over a table gathers
// per-level statistics of the categorical columns (the fit), a second pass
// writes the table back with the encoded columns appended, and the fitted
// statistics are saved as mapping tables that encode new data identically.
package pipeline

import (
	"slices"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/folds"
	"manyfold/internal/param"
	"manyfold/io/table"
)

// MaxClasses is the largest number of target classes a classification
// target may have.
const MaxClasses = 64

// Parameters of a job that the package's messages name (param.Name): the
// Spec's fields, and the group column of the fold rule group=COL.
const (
	ParamTarget       param.Name = "target"
	ParamColumns      param.Name = "columns"
	ParamEncodings    param.Name = "encodings"
	ParamTask         param.Name = "task"
	ParamFolds        param.Name = "folds"
	ParamGroup        param.Name = "fold rule group"
	ParamScheme       param.Name = "scheme"
	ParamMinLevelRows param.Name = "min level rows"
	ParamKeep         param.Name = "keep"
	ParamOrderBy      param.Name = "order by"
	ParamThreads      param.Name = "threads"
)

// Spec holds every parameter of an encoding job. Its zero value is not
// valid; start from DefaultSpec.
type Spec struct {
	Target  string   // target column
	Columns []string // categorical columns to encode (with Encodings.PerColumn, may be left empty)
	// Encodings gives every column one list of encodings, or each column
	// its own (method.Plan); Validate resolves it per column.
	Encodings method.Plan
	Task      string // "" detects; binary, multiclass, regression

	Folds  int        // K for kfold
	FoldBy folds.Rule // how rows are given folds (folds.ParseRule)
	Seed   uint64
	Scheme method.Pass // the training rows' scheme: KFold, LeaveOneOut, Ordered or InSample

	MinLevelRows uint64 // levels with fewer rows are left out of the tables and treated as unseen
	NullsUnseen  bool   // nulls are treated as unseen instead of as a level of their own
	Keep         []string
	KeepAll      bool
	FoldColumn   string // "" for none
	OrderBy      string // a column the input must be sorted by (ascending), checked during the fit

	// encs holds each column's encodings once Validate has run.
	encs [][]method.Encoding
}

// DefaultSpec returns the defaults documented in the command's help.
func DefaultSpec() Spec {
	eb, _ := method.Parse("target:eb")
	return Spec{
		Encodings: method.Plan{All: []method.Encoding{eb}},
		Folds:     5,
		FoldBy:    folds.RowsRule{},
		Scheme:    method.KFold,
		KeepAll:   true,
	}
}

// EncodingsOf returns the encodings of column i (after Validate).
func (sp *Spec) EncodingsOf(i int) []method.Encoding { return sp.encs[i] }

// supervised reports whether an encoding reads the target.
func (sp *Spec) supervised() bool {
	for _, encs := range sp.encs {
		for _, e := range encs {
			if e.Needs().Target {
				return true
			}
		}
	}
	return false
}

// columnSupervised reports whether an encoding of column i reads the
// target.
func (sp *Spec) columnSupervised(i int) bool {
	for _, e := range sp.encs[i] {
		if e.Needs().Target {
			return true
		}
	}
	return false
}

// needsValues reports whether an encoding of column i reads its values.
func (sp *Spec) needsValues(i int) bool {
	for _, e := range sp.encs[i] {
		if e.Needs().Values {
			return true
		}
	}
	return false
}

// prior returns the hierarchical prior of column i (Validate checked that
// its encodings agree), the zero Prior for none.
func (sp *Spec) prior(i int) method.Prior {
	for _, e := range sp.encs[i] {
		if p := e.Needs().Prior; !p.None() {
			return p
		}
	}
	return method.Prior{}
}

// PriorColumns returns the columns that hierarchical priors take the
// parent from (prior=column:COL), each once, in the order first named.
func (sp *Spec) PriorColumns() []string { return sp.priorColumns() }

func (sp *Spec) priorColumns() []string {
	var out []string
	for i := range sp.encs {
		if c := sp.prior(i).Column; c != "" && !slices.Contains(out, c) {
			out = append(out, c)
		}
	}
	return out
}

// PlanString returns the encodings in the grammar of the per-column form
// (COLUMN=LIST,...), or of the simple form when every column has the same
// list.
func (sp *Spec) PlanString() string {
	same := true
	for i := range sp.encs {
		if method.ListString(sp.encs[i]) != method.ListString(sp.encs[0]) {
			same = false
		}
	}
	if same && len(sp.encs) > 0 {
		return method.ListString(sp.encs[0])
	}
	p := method.Plan{}
	for i, c := range sp.Columns {
		p.PerColumn = append(p.PerColumn, method.ColumnEncodings{Column: c, Encodings: sp.encs[i]})
	}
	return p.String()
}

// Validate checks the parameters that do not depend on the data and
// resolves each column's encodings.
func (sp *Spec) Validate() error {
	if per := sp.Encodings.PerColumn; per != nil {
		if len(sp.Columns) == 0 {
			for _, c := range per {
				sp.Columns = append(sp.Columns, c.Column)
			}
		}
		if len(per) != len(sp.Columns) {
			return usageErr("the columns to encode and the per-column encodings name different columns")
		}
	} else if len(sp.Encodings.All) == 0 {
		return usageErr("no encodings: give %s", ParamEncodings)
	}
	if len(sp.Columns) == 0 {
		return usageErr("no columns to encode: give %s", ParamColumns)
	}
	seen := map[string]bool{}
	sp.encs = make([][]method.Encoding, len(sp.Columns))
	for i, c := range sp.Columns {
		if seen[c] {
			return usageErr("column %q is named twice in %s", c, ParamColumns)
		}
		seen[c] = true
		sp.encs[i] = sp.Encodings.All
		if per := sp.Encodings.PerColumn; per != nil {
			j := slices.IndexFunc(per, func(ce method.ColumnEncodings) bool { return ce.Column == c })
			if j < 0 {
				return usageErr("column %q has no encodings in the per-column list", c)
			}
			sp.encs[i] = per[j].Encodings
		}
		var prior method.Prior
		for _, e := range sp.encs[i] {
			if err := e.Validate(sp.Scheme); err != nil {
				return usageErr("column %q: %v", c, err)
			}
			p := e.Needs().Prior
			if !p.None() && !prior.None() && p != prior {
				return usageErr("column %q: two hierarchical priors", c)
			}
			if !p.None() {
				prior = p
			}
		}
		if prior.Column == c {
			return usageErr("column %q: its prior cannot be the column itself", c)
		}
	}
	if sp.supervised() && sp.Target == "" {
		return usageErr("the target encodings need %s", ParamTarget)
	}
	if sp.Scheme == method.Apply {
		return usageErr("unknown %s (want kfold, loo, ordered, none)", ParamScheme)
	}
	if sp.Scheme == method.KFold && (sp.Folds < 2 || sp.Folds > MaxFolds) {
		return usageErr("%s %d: want 2 to %d (for leave-one-out give %s loo)", ParamFolds, sp.Folds, MaxFolds, ParamScheme)
	}
	if sp.FoldBy == nil {
		return usageErr("no fold rule")
	}
	if sp.FoldBy.Needs().Class && sp.Target == "" {
		return usageErr("the fold rule %s needs %s", sp.FoldBy, ParamTarget)
	}
	if sp.Task != "" {
		if _, err := colstats.ParseTask(sp.Task); err != nil {
			return usageErr("%s: %v", ParamTask, err)
		}
	}
	return nil
}

// Limits of the numeric parameters, checked by Validate before any data is
// read. A level keeps a counter per fold and class, so memory grows with
// the folds; bucket numbers are written as 64-bit signed integers.
const MaxFolds = 100

// CheckThreads checks a number of threads, the same for every command.
func CheckThreads(n int) error {
	if n < 1 {
		return usageErr("%s %d: want at least 1", ParamThreads, n)
	}
	return nil
}

// groupColumn returns the column named by the fold rule group=COL, or "".
func (sp *Spec) groupColumn() string {
	if sp.FoldBy != nil {
		return sp.FoldBy.Needs().Group
	}
	return ""
}

// folds returns the number of folds statistics are split into: K for
// kfold, 1 otherwise.
func (sp *Spec) folds() int {
	if sp.Scheme == method.KFold {
		return sp.Folds
	}
	return 1
}

// UsageError is a mistake in the job's parameters or column names. Its
// message names the parameters in the package's words (ParamFolds: "folds
// 1: want 2 to 100"); a command spells them as its flags (Spell).
type UsageError struct{ Msg param.Text }

func (e *UsageError) Error() string { return e.Msg.String() }

// Spell returns the message with each parameter spelled by spell.
func (e *UsageError) Spell(spell param.Speller) string { return e.Msg.Spell(spell) }

// usageErr returns a UsageError of a format and its arguments, among which
// a param.Name names a parameter.
func usageErr(format string, a ...any) error {
	return &UsageError{Msg: param.Textf(format, a...)}
}

// FitColumns returns the positions in s of the columns the fit reads: the
// encoded columns, the target and the group column, in schema order. ok is
// false when one of them is missing (Fit then reports it by name).
func (sp *Spec) FitColumns(s *table.Schema) (cols []int, ok bool) {
	need := map[string]bool{sp.Target: sp.Target != "", sp.groupColumn(): sp.groupColumn() != "", sp.OrderBy: sp.OrderBy != ""}
	for _, c := range sp.priorColumns() {
		need[c] = true
	}
	for _, c := range sp.Columns {
		need[c] = true
	}
	for i, f := range s.Fields {
		if need[f.Name] {
			cols = append(cols, i)
			delete(need, f.Name)
		}
	}
	for _, v := range need {
		if v {
			return nil, false
		}
	}
	return cols, true
}

// CheckOutputNames reports, before any row is read, an encoded column
// whose name a kept input column already has (names that depend on the fit,
// such as a multi-class target's, are checked after it).
func (sp *Spec) CheckOutputNames(file string, s *table.Schema) error {
	kept := map[string]bool{}
	for _, f := range s.Fields {
		if sp.KeepAll || slices.Contains(sp.Keep, f.Name) {
			kept[f.Name] = true
		}
	}
	names := []string{}
	if sp.FoldColumn != "" {
		names = append(names, sp.FoldColumn)
	}
	for i, c := range sp.Columns {
		for _, e := range sp.encs[i] {
			for _, n := range e.Names() {
				names = append(names, c+"_"+n)
			}
		}
	}
	for _, n := range names {
		if kept[n] {
			return usageErr("%s: output column %q would appear twice: the input has it; drop it with %s or rename it", file, n, ParamKeep)
		}
	}
	return nil
}
