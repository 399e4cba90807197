package folds

import (
	"errors"
	"fmt"
)

// GroupRule is the rule "group=COL": a row's fold is Key of the text of its
// value in the column COL (a sender account, a customer) and the seed. It
// guarantees that all rows of a group share a fold, whatever their number
// or order, so no group straddles training and held-out rows; the null
// value is one group of its own (key 0xff, which no UTF-8 text is). Fold
// sizes follow the groups' sizes: a large group makes its fold large.
type GroupRule struct {
	Column string // the column whose value names each row's group
}

func parseGroup(arg string) (Rule, error) {
	if arg == "" {
		return nil, errors.New("the group column's name is empty (want group=COL)")
	}
	return GroupRule{Column: arg}, nil
}

// Name returns "group".
func (GroupRule) Name() string { return "group" }

// String returns "group=COL".
func (r GroupRule) String() string { return "group=" + r.Column }

// Needs returns the group column.
func (r GroupRule) Needs() Needs { return Needs{Group: r.Column} }

// Assigner returns the assigner of group folds.
func (r GroupRule) Assigner(seed uint64, k int, _ int64) Assigner {
	return &groupAssigner{rule: r, seed: seed, k: k}
}

type groupAssigner struct {
	rule    GroupRule
	seed    uint64
	k       int
	scratch []byte
}

// nullKey is the group key of null values.
var nullKey = []byte{0xff}

func (a *groupAssigner) Assign(b Batch, out []int32) error {
	if a.k < 2 {
		zero(out)
		return nil
	}
	if b.Group == nil {
		return fmt.Errorf("fold rule %q: the batch carries no group keys", a.rule.String())
	}
	for i := range out {
		key := nullKey
		if !b.Group.IsNull(i) {
			a.scratch = b.Group.AppendText(a.scratch[:0], i)
			key = a.scratch
		}
		out[i] = int32(Key(a.seed, key, a.k))
	}
	return nil
}
