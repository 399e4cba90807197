package compare

import (
	"bytes"
	"fmt"
	"strings"
	"testing"

	"manyfold/folds"
	"manyfold/internal/parcels"
)

// groupTable is a table of shipments of groups senders, rows of each: every
// shipment of a sender shares its late flag (a fair coin per sender,
// independent of everything else) and its sender_ref, a code that names the
// sender and nothing else; then each flag is flipped with chance 1/10
// (noise). So sender_ref predicts a known sender's shipments well and a new
// sender's not at all.
func groupTable(groups, rows int, seed uint64) string {
	var b strings.Builder
	b.WriteString("sender_account,sender_ref,late\n")
	rng := splitmix64(seed)
	for g := 0; g < groups; g++ {
		late := rng.next() >> 63
		ref := fmt.Sprintf("ref-%016x", rng.next())
		for i := 0; i < rows; i++ {
			y := late
			if rng.next()%10 == 0 {
				y ^= 1
			}
			fmt.Fprintf(&b, "acct-%05d,%s,%d\n", g, ref, y)
		}
	}
	return b.String()
}

// TestGroupFoldsDoNotFlatter is the acceptance test of compare's
// group folds: on a table where one sender's rows share a label and a level
// of the compared column, a row-fold compare puts each sender's rows on
// both sides of every split, so the target mean of a held-out row's level
// is learnt from that same sender's other rows and the held-out AUC looks
// high; with --fold-by group=sender_account every held-out sender is new,
// its level unseen, and the AUC falls to what the column really tells of a
// new sender: nothing (0.5).
func TestGroupFoldsDoNotFlatter(t *testing.T) {
	text := groupTable(400, 40, 21)
	cands, _ := ParseCandidates("prior,target:eb")
	run := func(rule string) CandidateResult {
		r, err := folds.ParseRule(rule)
		if err != nil {
			t.Fatal(err)
		}
		res, err := Run(csvReader(t, text), Options{File: "senders.csv", Target: "late", Columns: []string{"sender_ref"},
			Candidates: cands, Folds: 5, InnerFolds: 5, Seed: 3, FoldBy: r, NoTimings: true, Threads: 2})
		if err != nil {
			t.Fatal(err)
		}
		if res.FoldBy != rule {
			t.Errorf("result's fold_by %q, want %q", res.FoldBy, rule)
		}
		return find(t, res.Columns[0], "target:eb")
	}
	byRow, byGroup := run("rows"), run("group=sender_account")
	t.Logf("held-out AUC of target:eb: row folds %.4f (unseen %.3f), group folds %.4f (unseen %.3f)",
		byRow.Primary.Mean, byRow.UnseenShare, byGroup.Primary.Mean, byGroup.UnseenShare)
	// Row folds: a level's mean, from about 32 of its sender's 40 rows,
	// gives the sender's flag, which 9 rows in 10 carry: AUC about
	// 0.9*0.9 + (0.9*0.1 + 0.1*0.9)/2 = 0.90. Group folds: every held-out
	// level is unseen, every held-out row gets the prior, and a constant
	// scores exactly 0.5. The expected gap is 0.40; the margin 0.25 leaves
	// 0.15 for the fold-to-fold spread of the row-fold AUC (about 0.01 on
	// 3,200 held-out rows a fold), so the test fails only if group folds
	// let the senders leak or row folds stop showing the leak.
	if gap := byRow.Primary.Mean - byGroup.Primary.Mean; gap < 0.25 {
		t.Errorf("row-fold AUC %.4f - group-fold AUC %.4f = %.4f, want > 0.25", byRow.Primary.Mean, byGroup.Primary.Mean, gap)
	}
	if byRow.Primary.Mean < 0.8 {
		t.Errorf("row-fold AUC %.4f, want the leak to show (about 0.9)", byRow.Primary.Mean)
	}
	if m := byGroup.Primary.Mean; m < 0.45 || m > 0.55 {
		t.Errorf("group-fold AUC %.4f, want about 0.5 (the column tells nothing of a new sender)", m)
	}
	// All rows of a sender share an outer fold: none of its held-out rows
	// has its level in the training rows.
	if byGroup.UnseenShare != 1 {
		t.Errorf("group folds: %.4f of held-out rows have an unseen level, want 1", byGroup.UnseenShare)
	}
	if byRow.UnseenShare > 0.01 {
		t.Errorf("row folds: %.4f of held-out rows have an unseen level, want about 0", byRow.UnseenShare)
	}
}

// testKeys is a column of group keys with no nulls.
type testKeys []string

func (k testKeys) IsNull(int) bool { return false }

func (k testKeys) AppendText(dst []byte, i int) []byte { return append(dst, k[i]...) }

// cellsOf assigns the cells of n rows in batches of 100.
func cellsOf(t *testing.T, rule folds.Rule, seed uint64, ko, ki int, keys testKeys, cls []int32, labels []string) []uint16 {
	t.Helper()
	ca := newCellAssigner(rule, seed, ko, ki, 0)
	cell := make([]uint16, len(keys))
	for lo := 0; lo < len(keys); lo += 100 {
		hi := min(lo+100, len(keys))
		fb := folds.Batch{First: uint64(lo), Group: keys[lo:hi], Labels: labels}
		if cls != nil {
			fb.Class = cls[lo:hi]
		}
		if err := ca.assign(fb, cell[lo:hi]); err != nil {
			t.Fatal(err)
		}
	}
	return cell
}

// TestCells checks the outer and inner folds of each rule: rows gives
// today's row hashes (outer from the seed, inner from the salted seed);
// group=COL gives all rows of a group one cell, and the groups of each
// outer fold spread over every inner fold (the inner folds are drawn
// independently: with the outer's seed and ko = ki, each outer fold's
// groups would all fall in one inner fold); stratified spreads each class
// evenly over the outer folds and over the inner folds.
func TestCells(t *testing.T) {
	const n, ko, ki, seed = 20000, 5, 5, 7
	keys := make(testKeys, n)
	cls := make([]int32, n)
	rng := splitmix64(1)
	for i := range keys {
		keys[i] = fmt.Sprintf("acct-%d", rng.next()%2000)
		cls[i] = int32(rng.next() % 3)
	}
	labels := []string{"a", "b", "c"}

	rowCells := cellsOf(t, folds.RowsRule{}, seed, ko, ki, keys, nil, nil)
	for i, c := range rowCells {
		o, in := folds.Row(seed, uint64(i), ko), folds.Row(seed^innerSalt, uint64(i), ki)
		if int(c) != o*ki+in {
			t.Fatalf("rows: row %d in cell %d, want %d*%d+%d", i, c, o, ki, in)
		}
	}

	groupCells := cellsOf(t, folds.GroupRule{Column: "sender"}, seed, ko, ki, keys, nil, nil)
	cellOf := map[string]uint16{}
	for i, c := range groupCells {
		if prev, ok := cellOf[keys[i]]; ok && prev != c {
			t.Fatalf("group %s in cells %d and %d", keys[i], prev, c)
		}
		cellOf[keys[i]] = c
	}
	perCell := make([]int, ko*ki)
	for _, c := range cellOf {
		perCell[c]++
	}
	// 2000 groups in 25 cells: 80 a cell, sd about 9; 40 is more than 4
	// sd below.
	for c, m := range perCell {
		if m < 40 {
			t.Errorf("group folds: cell %d (outer %d, inner %d) holds %d groups, want about 80: inner folds not independent of outer", c, c/ki, c%ki, m)
		}
	}

	stratCells := cellsOf(t, folds.StratifiedRule{}, seed, ko, ki, keys, cls, labels)
	outer := make([][ko]int, 3)
	inner := make([][ki]int, 3)
	for i, c := range stratCells {
		outer[cls[i]][int(c)/ki]++
		inner[cls[i]][int(c)%ki]++
	}
	for k := range outer {
		for _, counts := range [][]int{outer[k][:], inner[k][:]} {
			lo, hi := counts[0], counts[0]
			for _, m := range counts {
				lo, hi = min(lo, m), max(hi, m)
			}
			if hi-lo > 1 {
				t.Errorf("stratified: class %s fold counts %v differ by more than 1", labels[k], counts)
			}
		}
	}
}

// TestFoldRuleErrors: compare refuses the fold rules it cannot follow and a
// group column it cannot find, with usage errors naming the rule.
func TestFoldRuleErrors(t *testing.T) {
	text := "a,late,cost,acct\nx,1,2.5,p\ny,0,3.5,q\nx,1,1.5,p\ny,0,0.5,q\n"
	rule := func(s string) folds.Rule {
		r, err := folds.ParseRule(s)
		if err != nil {
			t.Fatal(err)
		}
		return r
	}
	tests := []struct {
		target, task string
		rule         folds.Rule
		want         string
	}{
		{"late", "", rule("ordered"), `fold rule "ordered": compare cannot follow it`},
		{"cost", "regression", rule("stratified"), `fold rule "stratified": target "cost" is a regression target`},
		{"cost", "", rule("stratified"), `fold rule "stratified": target "cost" is a regression target`},
		{"late", "", rule("group=late"), `fold rule "group=late": the group column is the target`},
		{"late", "", rule("group=account"), `"account"`},
	}
	for _, tc := range tests {
		_, err := Run(csvReader(t, text), Options{File: "t.csv", Target: tc.target, Task: tc.task, Columns: []string{"a"},
			Folds: 2, InnerFolds: 2, FoldBy: tc.rule})
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s, target %s: error %v, want one containing %q", tc.rule, tc.target, err, tc.want)
		}
	}
}

// TestRowsRuleIsDefault: no fold rule and the rows rule give the same
// result byte for byte, and it says its rule in JSON, text and report.
func TestRowsRuleIsDefault(t *testing.T) {
	path := parcelsFile(t, parcels.Config{Rows: 5000, Seed: 3, Postcodes: 500, Accounts: 800})
	cands, _ := ParseCandidates("prior,target:eb,freq")
	out := func(rule folds.Rule) (string, string, string) {
		res := runFile(t, path, Options{Target: "late", Columns: []string{"dest_postcode"}, Candidates: cands,
			Folds: 3, InnerFolds: 3, Seed: 2, FoldBy: rule, NoTimings: true})
		var a, b, c bytes.Buffer
		if err := WriteText(&a, res); err != nil {
			t.Fatal(err)
		}
		if err := WriteJSON(&b, res); err != nil {
			t.Fatal(err)
		}
		if err := WriteReportTo(&c, res); err != nil {
			t.Fatal(err)
		}
		return a.String(), b.String(), c.String()
	}
	t1, j1, r1 := out(nil)
	t2, j2, r2 := out(folds.RowsRule{})
	if t1 != t2 || j1 != j2 || r1 != r2 {
		t.Errorf("no rule and rows differ:\n%s\n---\n%s", t1, t2)
	}
	if !strings.Contains(t1, "3 outer x 3 inner folds (fold rule rows)") || !strings.Contains(j1, `"fold_by": "rows"`) ||
		!strings.Contains(r1, "Fold rule") {
		t.Errorf("the output does not say the fold rule:\n%s\n%s", t1, j1)
	}
	t3, j3, _ := out(folds.StratifiedRule{})
	if !strings.Contains(t3, "(fold rule stratified)") || !strings.Contains(j3, `"fold_by": "stratified"`) {
		t.Errorf("stratified output does not say its rule:\n%s", t3)
	}
}
