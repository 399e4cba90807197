package colstats

import (
	"bytes"
	"errors"
	"fmt"
	"math/rand/v2"
	"testing"
)

// shardRows is one row of a generated table: its level (-1 null), fold,
// class and value.
type shardRows struct {
	level, fold, class int
	y                  float64
	known              bool
}

func genRows(n int, seed uint64) []shardRows {
	rng := rand.New(rand.NewPCG(seed, 7))
	out := make([]shardRows, n)
	for i := range out {
		lv := int(rng.ExpFloat64() * 40)
		if rng.IntN(30) == 0 {
			lv = -1
		}
		// Cents: sums of them depend on their order in float64.
		out[i] = shardRows{level: lv, fold: rng.IntN(5), class: rng.IntN(3), y: float64(rng.IntN(100000))/100 + 1e6, known: rng.IntN(20) != 0}
	}
	return out
}

// fill counts rows into statistics of the task with origin o.
func fill(task Task, rows []shardRows, o float64) *Stats {
	classes := 3
	if task == Regression {
		classes = 0
	}
	s := New(task, 5, classes, 0)
	s.Origin = o
	for _, r := range rows {
		l := 0
		if r.level >= 0 {
			l = s.Level([]byte(fmt.Sprintf("PC%04d", r.level)))
		}
		switch {
		case !r.known:
			s.AddRow(l)
		case task == Regression:
			s.AddValue(l, r.fold, r.y)
		default:
			s.AddClass(l, r.fold, r.class)
		}
	}
	return s
}

// TestPartialsMergeToWhole: statistics counted shard by shard, cut into
// partitions, written in the partial form and merged partition by
// partition hold, level by level and cell by cell, what the whole table
// counted at once holds: row counts, class counts and (sealed) a
// regression target's rounded sums, bit for bit, with shards whose
// origins differ from the whole's.
func TestPartialsMergeToWhole(t *testing.T) {
	rows := genRows(5000, 1)
	cuts := []int{0, 700, 700, 2900, 5000} // one empty shard
	for _, task := range []Task{Multiclass, Regression} {
		for _, parts := range []int{1, 4, 64} {
			whole := fill(task, rows, rows[0].y)
			merged := make([]*Stats, parts)
			for p := range merged {
				merged[p] = fill(task, nil, rows[0].y)
			}
			for i := 0; i+1 < len(cuts); i++ {
				shard := fill(task, rows[cuts[i]:cuts[i+1]], float64(i)*3.25)
				for p := 0; p < parts; p++ {
					var extraSeen int
					b := shard.AppendPartial(nil, p, parts, func(b []byte, l int) []byte { return append(b, shard.Bytes(l)...) })
					err := merged[p].MergePartial(b, func(l int, data []byte) error {
						extraSeen++
						if !bytes.Equal(data, merged[p].Bytes(l)) {
							return fmt.Errorf("extra %q for level %q", data, merged[p].Bytes(l))
						}
						return nil
					})
					if err != nil {
						t.Fatalf("%s, %d parts: %v", task, parts, err)
					}
				}
			}
			whole.Seal()
			levels := 0
			for p, m := range merged {
				m.Seal()
				for l := 0; l < m.NumLevels(); l++ {
					if m.RowCount(l) == 0 {
						continue
					}
					levels++
					w := 0
					if l > 0 {
						w = whole.Lookup(m.Bytes(l))
						if Partition(m.Bytes(l), false, parts) != p {
							t.Fatalf("level %q in partition %d", m.Bytes(l), p)
						}
					}
					if m.RowCount(l) != whole.RowCount(w) {
						t.Fatalf("%s: level %q: %d rows, whole %d", task, m.Bytes(l), m.RowCount(l), whole.RowCount(w))
					}
					for f := 0; f < 5; f++ {
						for o := 0; o < max(1, m.Classes); o++ {
							if a, b := m.Target(l, o, f, 0), whole.Target(w, o, f, 0); a != b {
								t.Fatalf("%s, %d parts: level %q fold %d output %d: %+v, whole %+v", task, parts, m.Bytes(l), f, o, a, b)
							}
						}
					}
				}
			}
			if want := whole.NumLevels(); levels != want && levels != want-1 {
				t.Errorf("%s, %d parts: %d levels merged, the whole has %d slots", task, parts, levels, want)
			}
		}
	}
}

// TestPartialRefused: a partial of other statistics, and damaged bytes,
// are refused with ErrPartial.
func TestPartialRefused(t *testing.T) {
	rows := genRows(300, 2)
	b := fill(Regression, rows, 1e6).AppendPartial(nil, 0, 1, nil)
	if err := fill(Multiclass, nil, 0).MergePartial(b, nil); !errors.Is(err, ErrPartial) {
		t.Errorf("regression into classification: %v", err)
	}
	if err := New(Regression, 4, 0, 0).MergePartial(b, nil); !errors.Is(err, ErrPartial) {
		t.Errorf("5 folds into 4: %v", err)
	}
	for _, cut := range []int{0, 3, 4, 10, 20, len(b) / 2, len(b) - 1} {
		if err := fill(Regression, nil, 1e6).MergePartial(b[:cut], nil); !errors.Is(err, ErrPartial) {
			t.Errorf("cut at %d of %d: %v", cut, len(b), err)
		}
	}
	if err := fill(Regression, nil, 1e6).MergePartial(append(b, 0), nil); !errors.Is(err, ErrPartial) {
		t.Errorf("a byte after the last level: %v", err)
	}
}

// FuzzMergePartial: any bytes merged as a partial give nil or ErrPartial,
// never a panic, and an accepted partial written again (all levels, one
// partition) merges to the same statistics. PartialKeys never panics
// either, and lists every level of an accepted partial (written again:
// levels listed twice merge into one).
func FuzzMergePartial(f *testing.F) {
	for _, task := range []Task{Multiclass, Regression} {
		f.Add(uint8(task), fill(task, genRows(50, 3), 1e6).AppendPartial(nil, 0, 1, nil))
		f.Add(uint8(task), fill(task, genRows(20, 4), 0).AppendPartial(nil, 1, 2, nil))
	}
	f.Fuzz(func(t *testing.T, task uint8, b []byte) {
		tk := Task(task % 3)
		s := fill(tk, nil, 0)
		keysErr := PartialKeys(b, func([]byte, bool) {})
		if err := s.MergePartial(b, nil); err != nil {
			if !errors.Is(err, ErrPartial) {
				t.Fatalf("error %v does not wrap ErrPartial", err)
			}
			return
		}
		if keysErr != nil {
			t.Fatalf("PartialKeys refuses a partial MergePartial takes: %v", keysErr)
		}
		again := s.AppendPartial(nil, 0, 1, nil)
		listed := 0
		if err := PartialKeys(again, func([]byte, bool) { listed++ }); err != nil {
			t.Fatal(err)
		}
		with := 0
		for l := 0; l < s.NumLevels(); l++ {
			if s.RowCount(l) > 0 {
				with++
			}
		}
		if listed != with {
			t.Fatalf("PartialKeys lists %d levels, the partial holds %d", listed, with)
		}
		s2 := fill(tk, nil, 0)
		if err := s2.MergePartial(again, nil); err != nil {
			t.Fatalf("a partial written again is refused: %v", err)
		}
		if !bytes.Equal(s2.AppendPartial(nil, 0, 1, nil), again) {
			t.Fatal("a partial written again and merged does not write the same bytes")
		}
	})
}
