package method

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"manyfold/encoders/colstats"
	"manyfold/io/table"
)

// foldsColumn returns the statistics of a generated column of a binary
// target over k folds: about 500 levels of some 25 rows, one level of
// thousands of rows (more than 255 of a class in a fold: wide cells), a
// null level, and rows whose target is unknown (counted in the level's
// rows, not in its classes). keep decides which slots count as seen.
func foldsColumn(k int, keep func(st *colstats.Stats, l int) bool) *Column {
	st := colstats.New(colstats.Binary, k, 2, 0)
	for i := 0; i < 20000; i++ {
		l := st.Level([]byte(fmt.Sprintf("A%04d", (i*i)%997)))
		switch {
		case i%3 == 0:
			l = st.Level([]byte("A-big"))
		case i%211 == 5:
			l = 0 // the null level
		}
		if i%97 == 11 {
			st.AddRow(l)
			continue
		}
		st.AddClass(l, (i*7+i/13)%k, (i/7+i%5)%2)
	}
	c := &Column{Name: "account", St: st, Supervised: true, Task: colstats.Binary, Classes: []string{"0", "1"}, Pos: 1,
		Order: st.Sorted}
	c.Keep = make([]bool, st.NumLevels())
	for l := range c.Keep {
		c.Keep[l] = keep(st, l)
		c.Total += float64(st.RowCount(l))
		if st.RowCount(l) > 0 {
			c.Distinct++
		}
	}
	return c
}

// TestEncodeFoldsMatchesValue checks the k-fold pass's fast path for a
// binary target (targetEncoder.encodeFolds) against the general path
// (encodeOutput) for every level slot, unseen and left-out ones among
// them, in every fold, in an order that mixes levels and folds: the values
// must be bit-identical, for rates and log-odds, m-estimate and
// empirical-Bayes smoothing, narrow and wide cells. The fast path also
// publishes the rows of each row's level (Rows.LevelRows), which the other
// encodings read: RowCount for a kept level, 0 otherwise.
func TestEncodeFoldsMatchesValue(t *testing.T) {
	const k = 5
	seen := func(st *colstats.Stats, l int) bool { return st.RowCount(l) > 0 }
	for _, tc := range []struct {
		encoding string
		keep     func(st *colstats.Stats, l int) bool
	}{
		{"target:m=20", seen},
		{"target:m=5:logodds", seen},
		// Levels of fewer than 30 rows and the null level left out.
		{"target:eb", func(st *colstats.Stats, l int) bool { return l > 0 && st.RowCount(l) >= 30 }},
	} {
		t.Run(tc.encoding, func(t *testing.T) {
			c := foldsColumn(k, tc.keep)
			left, kept := 0, 0
			for l := range c.Keep {
				if c.Keep[l] {
					kept++
				} else if c.St.RowCount(l) > 0 {
					left++
				}
			}
			if kept == 0 || (tc.encoding == "target:eb" && left == 0) {
				t.Fatalf("%d levels kept, %d with rows left out", kept, left)
			}
			e, err := Parse(tc.encoding)
			if err != nil {
				t.Fatal(err)
			}
			f := e.Fit(c).(*targetFit)
			if !f.fast() {
				t.Fatal("the fast path does not take this column")
			}

			// Every slot (-1: unseen) in every fold, shuffled.
			var slots, folds []int32
			for l := -1; l < c.St.NumLevels(); l++ {
				for fold := 0; fold < k; fold++ {
					slots, folds = append(slots, int32(l)), append(folds, int32(fold))
				}
			}
			rng := rand.New(rand.NewPCG(1, 2))
			rng.Shuffle(len(slots), func(i, j int) {
				slots[i], slots[j] = slots[j], slots[i]
				folds[i], folds[j] = folds[j], folds[i]
			})
			n := len(slots)
			if n <= 512 {
				t.Fatalf("%d rows: fewer than one part of the fast path", n)
			}

			fast := &Rows{Slots: slots, Fold: folds}
			fast.Reset(n)
			dst := make([]table.Column, 1)
			f.Encoder(KFold).Encode(fast, dst)
			if !fast.haveRows {
				t.Fatal("the fast path did not publish the rows of the levels")
			}
			rows := fast.LevelRows(c)

			general := &Rows{Slots: slots, Fold: folds}
			general.Reset(n)
			want := make([]float64, n)
			f.Encoder(KFold).(*targetEncoder).encodeOutput(general, 0, want)

			got := dst[0].Floats
			if len(got) != n {
				t.Fatalf("%d values for %d rows", len(got), n)
			}
			// The folds must matter: most kept levels have a value of
			// their own in each fold, so a fold mixed up would show.
			first := map[int32]float64{}
			differ := map[int32]bool{}
			for i, l := range slots {
				if v, ok := first[l]; !ok {
					first[l] = got[i]
				} else if v != got[i] {
					differ[l] = true
				}
			}
			if len(differ) < kept/2 {
				t.Fatalf("%d of %d kept levels have values that differ between folds", len(differ), kept)
			}
			for i, l := range slots {
				if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
					t.Fatalf("slot %d, fold %d: %v; the general path gives %v", l, folds[i], got[i], want[i])
				}
				var wantRows uint64
				if l >= 0 && c.Keep[l] {
					wantRows = c.St.RowCount(int(l))
				}
				if rows[i] != wantRows {
					t.Fatalf("slot %d, fold %d: level rows %d, want %d", l, folds[i], rows[i], wantRows)
				}
			}
		})
	}
}
