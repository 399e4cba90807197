package folds

import "fmt"

// StratifiedRule is the rule "stratified": the rows of each class (target
// label) are spread evenly over the folds by a Stratifier, each class's
// fold stream following its label (Stratifier.Stratum). It guarantees that
// at every point of the pass the fold counts of a class differ by at most
// 1, and that a row's fold depends only on the seed, k, its class's label
// and its rank within the class: two passes that number the classes
// differently give it the same fold. Rows of unknown class, and every row
// when the batch carries no classes (a numeric target), get row folds (as
// RowsRule).
type StratifiedRule struct{}

func parseStratified(string) (Rule, error) { return StratifiedRule{}, nil }

// Name returns "stratified".
func (StratifiedRule) Name() string { return "stratified" }

// String returns "stratified".
func (StratifiedRule) String() string { return "stratified" }

// Needs returns the class.
func (StratifiedRule) Needs() Needs { return Needs{Class: true} }

// Assigner returns the assigner of stratified folds.
func (StratifiedRule) Assigner(seed uint64, k int, _ int64) Assigner {
	return &stratifiedAssigner{seed: seed, k: k, strat: NewStratifier(seed, k)}
}

type stratifiedAssigner struct {
	seed   uint64
	k      int
	strat  *Stratifier
	strata []*Stratum // per class number: its label's fold stream
	start  map[string]uint64
}

// StartStrata positions the stratified assigner a (StratifiedRule's) after
// the rows of each class that come before its rows in the table: start
// gives them by label (the earlier shards' rows of each class, in a sharded
// fit), so that its rows get the folds they get in the whole table's
// stream. It reports whether a is such an assigner; it must be called
// before the first Assign.
func StartStrata(a Assigner, start map[string]uint64) bool {
	sa, ok := a.(*stratifiedAssigner)
	if ok {
		sa.start = start
	}
	return ok
}

func (a *stratifiedAssigner) Assign(b Batch, out []int32) error {
	if a.k < 2 || b.Class == nil {
		rowFolds(a.seed, a.k, b.First, out)
		return nil
	}
	for i := range out {
		c := b.Class[i]
		if c < 0 {
			out[i] = int32(Row(a.seed, b.First+uint64(i), a.k))
			continue
		}
		st, err := a.stratum(c, b.Labels)
		if err != nil {
			return err
		}
		out[i] = int32(st.Next())
	}
	return nil
}

// stratum returns the fold stream of class number c, whose label is
// labels[c].
func (a *stratifiedAssigner) stratum(c int32, labels []string) (*Stratum, error) {
	for int(c) >= len(a.strata) {
		a.strata = append(a.strata, nil)
	}
	if a.strata[c] == nil {
		if int(c) >= len(labels) {
			return nil, fmt.Errorf("fold rule \"stratified\": class %d has no label (%d labels)", c, len(labels))
		}
		a.strata[c] = a.strat.StratumFrom(labels[c], a.start[labels[c]])
	}
	return a.strata[c], nil
}
