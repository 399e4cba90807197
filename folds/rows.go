package folds

// RowsRule is the rule "rows": a row's fold is Row of its number and the
// seed. It guarantees that the fold depends only on the seed, k and the row
// number (not on the row's values or on the rows around it), and fold sizes
// are multinomial, near-uniform. It needs nothing but the row numbers.
type RowsRule struct{}

func parseRows(string) (Rule, error) { return RowsRule{}, nil }

// Name returns "rows".
func (RowsRule) Name() string { return "rows" }

// String returns "rows".
func (RowsRule) String() string { return "rows" }

// Needs returns no needs.
func (RowsRule) Needs() Needs { return Needs{} }

// Assigner returns the assigner of row folds.
func (RowsRule) Assigner(seed uint64, k int, _ int64) Assigner {
	return rowsAssigner{seed: seed, k: k}
}

type rowsAssigner struct {
	seed uint64
	k    int
}

func (a rowsAssigner) Assign(b Batch, out []int32) error {
	rowFolds(a.seed, a.k, b.First, out)
	return nil
}

// rowFolds writes the row fold of rows first, first+1, ... to out.
func rowFolds(seed uint64, k int, first uint64, out []int32) {
	if k < 2 {
		zero(out)
		return
	}
	for i := range out {
		out[i] = int32(Row(seed, first+uint64(i), k))
	}
}
