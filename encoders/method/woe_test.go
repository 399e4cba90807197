package method_test

import (
	"fmt"
	"math"
	"strconv"
	"testing"
)

// woeRef is the weight of evidence computed from the formula in woe.go's
// doc comment (Good 1950; as used in credit scorecards):
// ln((pos+a)/(P+a*L)) - ln((neg+a)/(N+a*L)).
func woeRef(pos, neg, P, N, L, a float64) float64 {
	return math.Log((pos+a)/(P+a*L)) - math.Log((neg+a)/(N+a*L))
}

// TestWeightOfEvidenceWorkedExample: two levels of four rows, A with three
// positives, B with one, in-sample. Computed by hand from the formula with
// a = 0.5, P = N = 4, L = 2: woe(A) = ln(3.5/5) - ln(1.5/5) = ln(7/3) =
// 0.8472978603872037, and woe(B) = -ln(7/3).
func TestWeightOfEvidenceWorkedExample(t *testing.T) {
	header := []string{"pc", "late"}
	rows := [][]string{{"A", "1"}, {"A", "1"}, {"A", "1"}, {"A", "0"}, {"B", "1"}, {"B", "0"}, {"B", "0"}, {"B", "0"}}
	j := runJob(t, header, rows, []string{"pc"}, "woe", "none")
	want := map[string]float64{"A": 0.8472978603872037, "B": -0.8472978603872037}
	for i, r := range rows {
		for _, out := range []csvTable{j.train, j.apply, j.merged} {
			if got := out.float(t, i, "pc_woe"); math.Abs(got-want[r[0]]) > 1e-15 {
				t.Errorf("row %d (%s): woe %v, want %v", i, r[0], got, want[r[0]])
			}
		}
	}
}

// TestWeightOfEvidenceOutOfFold recomputes every training row's weight
// independently from the raw rows and the fold column the job wrote, for
// the k-fold, leave-one-out and ordered schemes, and checks apply, the
// merged tables and unseen levels.
func TestWeightOfEvidenceOutOfFold(t *testing.T) {
	header := []string{"pc", "late"}
	var rows [][]string
	x := uint64(12345)
	for i := 0; i < 3000; i++ {
		x = x*6364136223846793005 + 1442695040888963407 // a linear congruential stream
		lvl := int(x>>33) % 40
		pc := fmt.Sprintf("P%02d", lvl)
		if lvl == 39 {
			pc = "" // the null level
		}
		if i >= 2000 && i%10 == 0 {
			pc = "NEW" // a level of the second half only
		}
		late := "0"
		rate := float64(lvl%10) / 10 // level 0..9 rates 0 to 0.9; P?0 never late
		if float64((x>>13)%1000)/1000 < rate {
			late = "1"
		}
		rows = append(rows, []string{pc, late})
	}
	const a = 0.5
	levels := map[string]bool{}
	for _, r := range rows {
		levels[r[0]] = true
	}
	L := float64(len(levels))
	type counts struct{ pos, neg float64 }
	for _, scheme := range []string{"kfold", "loo", "ordered"} {
		t.Run(scheme, func(t *testing.T) {
			j := runJob(t, header, rows, []string{"pc"}, "woe", scheme)
			fold := make([]int, len(rows))
			for i := range rows {
				fold[i], _ = strconv.Atoi(j.train.rows[i][j.train.col(t, "fold")])
			}
			byLevel := map[string]*counts{}
			var all counts
			for _, r := range rows {
				c := byLevel[r[0]]
				if c == nil {
					c = &counts{}
					byLevel[r[0]] = c
				}
				if r[1] == "1" {
					c.pos++
					all.pos++
				} else {
					c.neg++
					all.neg++
				}
			}
			running := map[string]*counts{}
			for i, r := range rows {
				var want float64
				switch scheme {
				case "kfold":
					var lv, tot counts
					for k, s := range rows {
						if fold[k] == fold[i] {
							continue
						}
						if s[1] == "1" {
							tot.pos++
						} else {
							tot.neg++
						}
						if s[0] == r[0] {
							if s[1] == "1" {
								lv.pos++
							} else {
								lv.neg++
							}
						}
					}
					want = woeRef(lv.pos, lv.neg, tot.pos, tot.neg, L, a)
				case "loo":
					lv, tot := *byLevel[r[0]], all
					if r[1] == "1" {
						lv.pos--
						tot.pos--
					} else {
						lv.neg--
						tot.neg--
					}
					want = woeRef(lv.pos, lv.neg, tot.pos, tot.neg, L, a)
				case "ordered":
					c := running[r[0]]
					if c == nil {
						c = &counts{}
						running[r[0]] = c
					}
					want = woeRef(c.pos, c.neg, all.pos, all.neg, L, a)
					if r[1] == "1" {
						c.pos++
					} else {
						c.neg++
					}
				}
				if got := j.train.float(t, i, "pc_woe"); math.Abs(got-want) > 1e-12 {
					t.Fatalf("row %d (level %q, fold %d): woe %v, recomputed %v", i, r[0], fold[i], got, want)
				}
				lv := byLevel[r[0]]
				full := woeRef(lv.pos, lv.neg, all.pos, all.neg, L, a)
				for name, out := range map[string]csvTable{"apply": j.apply, "merged": j.merged} {
					if got := out.float(t, i, "pc_woe"); math.Abs(got-full) > 1e-12 {
						t.Fatalf("%s, row %d (level %q): woe %v, recomputed %v", name, i, r[0], got, full)
					}
				}
			}
			// The first half's tables: a level it never saw weighs 0.
			seen := map[string]bool{}
			for _, r := range rows[:len(rows)/2] {
				seen[r[0]] = true
			}
			unseen := 0
			for i, r := range rows {
				if !seen[r[0]] {
					unseen++
					if got := j.half.float(t, i, "pc_woe"); got != 0 {
						t.Fatalf("row %d: unseen level %q weighs %v, want 0", i, r[0], got)
					}
				}
			}
			if unseen == 0 {
				t.Fatal("no row of an unseen level: the check above checked nothing")
			}
		})
	}
}
