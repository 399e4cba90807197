package folds_test

import (
	"fmt"
	"testing"

	"github.com/cespare/xxhash/v2"

	"manyfold/folds"
)

// ParseRule reads a fold rule as written on the command line; String
// writes it back, and Needs says what its assigner reads beside the row
// numbers. A malformed or unknown rule is an error naming it.
func ExampleParseRule() {
	for _, s := range []string{"rows", "stratified", "group=account", "ordered", "group", "rows=3", "blocks"} {
		r, err := folds.ParseRule(s)
		if err != nil {
			fmt.Println(err)
			continue
		}
		fmt.Printf("%-14s name=%-10s needs=%+v\n", r, r.Name(), r.Needs())
	}
	// Output:
	// rows           name=rows       needs={Group: Class:false Total:false}
	// stratified     name=stratified needs={Group: Class:true Total:false}
	// group=account  name=group      needs={Group:account Class:false Total:false}
	// ordered        name=ordered    needs={Group: Class:false Total:true}
	// fold rule "group": want group=COL
	// fold rule "rows=3": want rows
	// fold rule "blocks": unknown (want rows, stratified, group=COL, ordered)
}

// accounts is a column of sender accounts, the group keys of a batch;
// "" is a null.
type accounts []string

func (a accounts) IsNull(i int) bool { return a[i] == "" }

func (a accounts) AppendText(dst []byte, i int) []byte { return append(dst, a[i]...) }

// A rule's Assigner gives the rows of each batch their folds, batch after
// batch in table order. The ordered rule cuts 10 rows into 3 blocks,
// fold floor(row*3/10): rows 0-3 fold 0, 4-6 fold 1, 7-9 fold 2, whatever
// the batches. The group rule gives every row of an account the fold
// XXH64(account) mod 3, so an account's rows never straddle folds; the
// null account is one group, keyed by the byte 0xff, which no UTF-8 text
// is (the folds printed are checked against xxhash by
// TestExampleGroupFolds).
func ExampleRule_Assigner() {
	ordered, _ := folds.ParseRule("ordered")
	a := ordered.Assigner(0, 3, 10)
	for _, b := range []struct{ first, rows int }{{0, 6}, {6, 4}} {
		out := make([]int32, b.rows)
		if err := a.Assign(folds.Batch{First: uint64(b.first)}, out); err != nil {
			fmt.Println(err)
		}
		fmt.Println("ordered, rows from", b.first, out)
	}

	group, _ := folds.ParseRule("group=account")
	keys := accounts{"ACC-1", "ACC-2", "ACC-1", "ACC-3", "", "ACC-2", "ACC-1"}
	out := make([]int32, len(keys))
	if err := group.Assigner(0, 3, 0).Assign(folds.Batch{Group: keys}, out); err != nil {
		fmt.Println(err)
	}
	for i, k := range keys {
		if keys.IsNull(i) {
			k = "(null)"
		}
		fmt.Println(k, out[i])
	}
	// Output:
	// ordered, rows from 0 [0 0 0 0 1 1]
	// ordered, rows from 6 [1 2 2 2]
	// ACC-1 1
	// ACC-2 0
	// ACC-1 1
	// ACC-3 1
	// (null) 0
	// ACC-2 0
	// ACC-1 1
}

// TestExampleGroupFolds computes the group folds that ExampleRule_Assigner
// prints from XXH64 of the account with seed 0, mod 3, without the
// package.
func TestExampleGroupFolds(t *testing.T) {
	want := map[string]int{"ACC-1": 1, "ACC-2": 0, "ACC-3": 1} // as printed by the example
	for k, f := range want {
		if got := int(xxhash.Sum64String(k) % 3); got != f {
			t.Errorf("%s: XXH64 mod 3 is %d, the example prints %d", k, got, f)
		}
	}
	if got := int(xxhash.Sum64([]byte{0xff}) % 3); got != 0 {
		t.Errorf("null: XXH64(0xff) mod 3 is %d, the example prints 0", got)
	}
}
