package colstats

import (
	"math"

	"manyfold/encoders/exactsum"
	"math/big"
	"testing"
)

// TestRunningExactAndSplit: a regression target's running statistics of
// a level are its rows' sums of y - origin and (y - origin)^2 rounded once
// to nearest (checked against math/big with enough precision to hold the
// sums exactly, an independent reference), and starting from statistics of
// the first k rows (Start), then adding the rest, gives the same bits as
// adding every row, whatever k. Class counts start the same way.
func TestRunningExactAndSplit(t *testing.T) {
	const origin = 12.34
	ys := make([]float64, 40)
	for i := range ys {
		ys[i] = float64(i*37%1000)/100 + 1e-3*float64(i%7) + float64(i)*1e6*float64(i%2)
	}
	exact := func(rows []float64) (sum, sq float64) {
		s, q := new(big.Float).SetPrec(4096), new(big.Float).SetPrec(4096)
		for _, y := range rows {
			d := new(big.Float).SetPrec(4096).Sub(big.NewFloat(y), big.NewFloat(origin))
			s.Add(s, d)
			q.Add(q, new(big.Float).SetPrec(4096).Mul(d, d))
		}
		sum, _ = s.Float64()
		sq, _ = q.Float64()
		return sum, sq
	}
	// From ys[3] on, the first row's y - origin rounds (3000001.113 less
	// 12.34 needs more than 53 bits); from ys[0], it is exact.
	all := ys
	if _, e := exactsum.TwoSum(all[3], -origin); e == 0 {
		t.Fatalf("%v - %v is exact", all[3], origin)
	}
	for _, k := range []int{0, 1, 2, 17, 40, -1} {
		ys := all
		if k < 0 {
			ys, k = all[3:], 0
		}
		st := New(Regression, 3, 0, 1)
		st.Origin = origin
		l := st.Level([]byte("PC1"))
		for i, y := range ys[:k] {
			st.AddValue(l, i%3, y)
		}
		r := NewRunning(4, 1, Regression, origin)
		r.Start(2, st, l, 0)
		for i := k; i <= len(ys); i++ {
			a := r.Agg(2, 0)
			sum, sq := exact(ys[:i])
			if a.N != float64(i) || math.Float64bits(a.Sum) != math.Float64bits(sum) || math.Float64bits(a.SumSq) != math.Float64bits(sq) {
				t.Fatalf("start at %d, after %d rows: %+v, want n %d, sum %v, sum of squares %v", k, i, a, i, sum, sq)
			}
			if i < len(ys) {
				r.AddValue(2, ys[i])
			}
		}
		if a := r.Agg(1, 0); a != (Agg{}) {
			t.Errorf("another level has rows: %+v", a)
		}
	}

	// Three classes: output o counts class o; started from counts of
	// the rows before, the running counts are those of every row.
	st := New(Multiclass, 2, 3, 1)
	st.AddClasses(3)
	l := st.Level([]byte("R1"))
	cls := []int{0, 2, 2, 1, 0, 2}
	for i, c := range cls[:4] {
		st.AddClass(l, i%2, c)
	}
	r := NewRunning(2, 3, Multiclass, 0)
	r.Start(1, st, l, 0)
	for _, c := range cls[4:] {
		for o := range 3 {
			r.AddClass(1, o, boolFloat(c == o))
		}
	}
	for o, want := range []float64{2, 1, 3} {
		if a := r.Agg(1, o); a != (Agg{N: 6, Sum: want, SumSq: want}) {
			t.Errorf("class %d: %+v, want 6 rows, %v of the class", o, a, want)
		}
	}
}

func boolFloat(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// BenchmarkRunningAddValue: a regression target's running sums, one row
// of a level read then added, over levels of many rows (postcodes) and of
// one row each (shipment ids).
func BenchmarkRunningAddValue(b *testing.B) {
	for _, c := range []struct {
		name   string
		levels int
	}{{"postcodes", 1000}, {"ids", 1 << 20}} {
		b.Run(c.name, func(b *testing.B) {
			r := NewRunning(c.levels, 1, Regression, 7.31)
			var sink float64
			for i := 0; i < b.N; i++ {
				l := (i * 7919) % c.levels
				if c.levels > 1000 && i%c.levels == 0 {
					r = NewRunning(c.levels, 1, Regression, 7.31)
				}
				sink += r.Agg(l, 0).Sum
				r.AddValue(l, float64(i%4000)/100)
			}
			_ = sink
		})
	}
}
