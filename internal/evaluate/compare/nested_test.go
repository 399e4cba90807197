package compare

import (
	"math"
	"testing"

	"manyfold/encoders/colstats"
	"manyfold/internal/evaluate/linear"
)

// TestNestedEncoding checks the protocol on a hand-sized example with 2
// outer x 2 inner folds (cell = outer*2 + inner) and target:m=1. Expected
// values are computed from the m-estimate formula (s + m·p)/(n + m), p the
// mean target of the fitting cells. For outer fold 0 the training rows are
// those of cells 2 and 3:
//   - a training row of cell 2 (inner 0) sees cell 3 only: rows A1 A0 B1,
//     p = 2/3, A -> (1 + 2/3)/3 = 5/9, B -> (1 + 2/3)/2 = 5/6;
//   - a training row of cell 3 sees cell 2 only: rows A1 B0, p = 1/2,
//     A -> 1.5/2 = 0.75, B -> 0.5/2 = 0.25;
//   - a held-out row sees cells 2 and 3: p = 3/5, A (n 3, s 2) -> 2.6/4 =
//     0.65, B (n 2, s 1) -> 1.6/3 = 8/15;
//   - the in-sample mean of A on cells 2 and 3 is 2/3, of B 1/2;
//   - the frequencies on cells 2 and 3 are A 3, B 2.
func TestNestedEncoding(t *testing.T) {
	rows := []struct {
		lv      string
		y, cell int
	}{{"A", 1, 0}, {"A", 0, 1}, {"A", 1, 2}, {"A", 1, 3}, {"A", 0, 3}, {"B", 0, 2}, {"B", 1, 3}, {"B", 0, 0}}
	st := colstats.New(colstats.Binary, 4, 2, 0)
	smp := &sample{slot: make([][]int32, 1)}
	for _, r := range rows {
		l := st.Level([]byte(r.lv))
		st.AddClass(l, r.cell, r.y)
		smp.cell = append(smp.cell, uint16(r.cell))
		smp.cls = append(smp.cls, int32(r.y))
		smp.slot[0] = append(smp.slot[0], int32(l))
		smp.count++
	}
	ev := &evaluator{smp: smp, task: colstats.Binary, classes: 2, pos: 1, ko: 2, ki: 2}
	if err := ev.prepare(); err != nil {
		t.Fatal(err)
	}
	cs := &colState{st: st, order: st.Sorted(), slot: smp.slot[0], views: make([]foldView, 2)}
	cs.foldRows = [][]uint64{make([]uint64, st.NumLevels()), make([]uint64, st.NumLevels())}
	for l := 0; l < st.NumLevels(); l++ {
		for f := 0; f < 2; f++ {
			cs.foldRows[f][l] = uint64(st.TargetMask(l, 0, 1, ev.useOut[f]).N)
		}
	}
	if got := ev.train[0]; len(got) != 5 || got[0] != 2 || got[4] != 6 {
		t.Fatalf("training rows of fold 0: %v, want [2 3 4 5 6]", got)
	}
	if got := ev.test[0]; len(got) != 3 || got[0] != 0 || got[1] != 1 || got[2] != 7 {
		t.Fatalf("held-out rows of fold 0: %v, want [0 1 7]", got)
	}
	// at returns the design row of sample row i in rows.
	at := func(rows []int, i int) int {
		for r, j := range rows {
			if j == i {
				return r
			}
		}
		t.Fatalf("sample row %d is not among %v", i, rows)
		return -1
	}
	check := func(name string, train map[int]float64, test map[int]float64) {
		t.Helper()
		c, err := ParseCandidate(name)
		if err != nil {
			t.Fatal(err)
		}
		dtr, dte, err := ev.designs(cs, c, 0)
		if err != nil {
			t.Fatal(err)
		}
		for _, set := range []struct {
			d    *linear.Design
			rows []int
			want map[int]float64
			what string
		}{{dtr, ev.train[0], train, "training"}, {dte, ev.test[0], test, "held-out"}} {
			if set.d.NDense != 1 {
				t.Fatalf("%s: %d dense features, want 1", name, set.d.NDense)
			}
			for i, want := range set.want {
				if got := set.d.Dense[at(set.rows, i)]; math.Abs(got-want) > 1e-12 {
					t.Errorf("%s: %s row %d encoded %.6f, want %.6f", name, set.what, i, got, want)
				}
			}
		}
	}
	check("target:m=1",
		map[int]float64{2: 5.0 / 9, 3: 0.75, 4: 0.75, 5: 5.0 / 6, 6: 0.25},
		map[int]float64{0: 0.65, 1: 0.65, 7: 8.0 / 15})
	check("target:insample",
		map[int]float64{2: 2.0 / 3, 3: 2.0 / 3, 5: 0.5, 6: 0.5},
		map[int]float64{0: 2.0 / 3, 7: 0.5})
	check("freq", map[int]float64{2: 3, 5: 2}, map[int]float64{0: 3, 7: 2})
	tk, _ := ParseCandidate("topk:1")
	_, dte, err := ev.designs(cs, tk, 0)
	if err != nil {
		t.Fatal(err)
	}
	// Held-out rows 0 (A) and 7 (B): A has code 1, its indicator column 0;
	// B is other, no indicator.
	a, b := at(ev.test[0], 0), at(ev.test[0], 7)
	if dte.NInd != 1 || dte.IndPtr[a+1]-dte.IndPtr[a] != 1 || dte.IndCol[dte.IndPtr[a]] != 0 || dte.IndPtr[b+1] != dte.IndPtr[b] {
		t.Errorf("topk:1 on fold 0: %d columns, indicators %v at %v; want 1 column, A -> 0, B -> none", dte.NInd, dte.IndCol, dte.IndPtr)
	}
}
