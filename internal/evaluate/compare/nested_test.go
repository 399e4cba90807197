package compare

import (
	"math"
	"testing"

	"manyfold/encoders/colstats"
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
	cs := &colState{st: st, order: st.Sorted(), slot: smp.slot[0], parents: map[int]*parentStats{}, buckets: map[uint64][]int32{}}
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
	check := func(name string, enc encoding, train map[int]float64, test map[int]float64) {
		t.Helper()
		var x [1]float64
		for i, want := range train {
			enc.train(i, x[:])
			if math.Abs(x[0]-want) > 1e-12 {
				t.Errorf("%s: training row %d encoded %.6f, want %.6f", name, i, x[0], want)
			}
		}
		for i, want := range test {
			enc.test(i, x[:])
			if math.Abs(x[0]-want) > 1e-12 {
				t.Errorf("%s: held-out row %d encoded %.6f, want %.6f", name, i, x[0], want)
			}
		}
	}
	m1, _ := ParseCandidate("target:m=1")
	check("target:m=1", ev.encode(cs, m1, 0),
		map[int]float64{2: 5.0 / 9, 3: 0.75, 4: 0.75, 5: 5.0 / 6, 6: 0.25},
		map[int]float64{0: 0.65, 1: 0.65, 7: 8.0 / 15})
	in, _ := ParseCandidate("target:insample")
	check("target:insample", ev.encode(cs, in, 0),
		map[int]float64{2: 2.0 / 3, 3: 2.0 / 3, 5: 0.5, 6: 0.5},
		map[int]float64{0: 2.0 / 3, 7: 0.5})
	fr, _ := ParseCandidate("freq")
	check("freq", ev.encode(cs, fr, 0), map[int]float64{2: 3, 5: 2}, map[int]float64{0: 3, 7: 2})
	tk, _ := ParseCandidate("topk:1")
	enc := ev.encode(cs, tk, 0)
	if enc.nind != 1 || enc.ind(0) != 0 || enc.ind(7) != -1 {
		t.Errorf("topk:1 on fold 0: %d columns, A -> %d, B -> %d; want 1 column, A -> 0, B -> none", enc.nind, enc.ind(0), enc.ind(7))
	}
}
