package folds

import (
	"fmt"
	"strings"
)

// Rule is a fold rule: how the rows of a table are assigned to folds. Each
// rule is one file of this package and one line of the registry
// (registry.go); ParseRule turns its written form into a Rule.
type Rule interface {
	// Name is the rule's name in the grammar: rows, stratified, group,
	// ordered.
	Name() string
	// String is the rule as written, "group=sender" for instance:
	// ParseRule(r.String()) gives r back.
	String() string
	// Needs says what the rule's assigner reads beside the row numbers.
	Needs() Needs
	// Assigner returns a new assigner of rows to k folds (k < 1 is one
	// fold, 0), drawn from seed; total is the table's row count (0 when
	// unknown), which only a rule that needs it reads. One assigner serves
	// one pass over the table, its batches in order.
	Assigner(seed uint64, k int, total int64) Assigner
}

// Needs lists what a rule reads of the table beside each row's number.
type Needs struct {
	Group string // the column whose value is each row's group key; "" none
	Class bool   // each row's class, the label of its target
	Total bool   // the table's row count, known before the pass
}

// Batch is a run of consecutive rows of the table to assign to folds.
type Batch struct {
	First  uint64   // number (0-based) of the batch's first row in the table
	Group  Keys     // the group keys of the rows, for a rule that needs a group
	Class  []int32  // the class number of each row, -1 if unknown; nil: no classes (a numeric target)
	Labels []string // the label of each class number
}

// Keys gives the group key of each row of a batch; a column of a table
// batch (*table.Column) is one.
type Keys interface {
	IsNull(i int) bool
	AppendText(dst []byte, i int) []byte
}

// Assigner gives the rows of a batch their folds. It may keep state from one
// batch to the next (the stratified rule counts each class's rows), so it
// must see the batches of a pass in order; it is not safe for concurrent
// use.
type Assigner interface {
	// Assign writes the fold in [0, k) of the batch's i-th row to out[i],
	// for every i < len(out).
	Assign(b Batch, out []int32) error
}

// ParseRule parses a fold rule: rows, stratified, group=COL or ordered (the
// registry's syntaxes). An unknown or malformed rule gives an error that
// names it.
func ParseRule(s string) (Rule, error) {
	name, arg, hasArg := strings.Cut(s, "=")
	for _, e := range registry {
		if e.name != name {
			continue
		}
		if e.takesArg != hasArg {
			return nil, fmt.Errorf("fold rule %q: want %s", s, e.syntax)
		}
		r, err := e.parse(arg)
		if err != nil {
			return nil, fmt.Errorf("fold rule %q: %w", s, err)
		}
		return r, nil
	}
	return nil, fmt.Errorf("fold rule %q: unknown (want %s)", s, Syntaxes())
}

// Syntaxes lists the rules' written forms in registry order, comma
// separated: "rows, stratified, group=COL, ordered".
func Syntaxes() string {
	s := make([]string, len(registry))
	for i, e := range registry {
		s[i] = e.syntax
	}
	return strings.Join(s, ", ")
}

// zero sets every fold to 0: the single fold of k < 2.
func zero(out []int32) {
	for i := range out {
		out[i] = 0
	}
}
