package folds

import "errors"

// OrderedRule is the rule "ordered": the rows are cut into k contiguous
// blocks in file order (Block). It guarantees that folds follow the row
// order, so a time-ordered file keeps its time order from fold to fold, and
// that fold sizes differ by at most 1. It needs the table's row count before
// the pass.
type OrderedRule struct{}

func parseOrdered(string) (Rule, error) { return OrderedRule{}, nil }

// Name returns "ordered".
func (OrderedRule) Name() string { return "ordered" }

// String returns "ordered".
func (OrderedRule) String() string { return "ordered" }

// Needs returns the row count.
func (OrderedRule) Needs() Needs { return Needs{Total: true} }

// Assigner returns the assigner of contiguous blocks of a table of total
// rows.
func (OrderedRule) Assigner(_ uint64, k int, total int64) Assigner {
	return orderedAssigner{k: k, total: total}
}

type orderedAssigner struct {
	k     int
	total int64
}

func (a orderedAssigner) Assign(b Batch, out []int32) error {
	if a.k < 2 {
		zero(out)
		return nil
	}
	if a.total <= 0 {
		return errors.New("fold rule \"ordered\": needs the table's row count")
	}
	for i := range out {
		out[i] = int32(Block(b.First+uint64(i), uint64(a.total), a.k))
	}
	return nil
}
