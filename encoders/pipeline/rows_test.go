package pipeline

import (
	"slices"
	"strconv"
	"strings"
	"testing"

	"manyfold/encoders/colstats"
	"manyfold/io/table"
)

// TestFillMatchesRowByRow fills level slots for batches of every column
// form, with nulls, repeated values, a dictionary reused across batches and
// then replaced, and a prefix, and checks that the slots and the order in
// which levels were added are those of looking each row up in turn.
func TestFillMatchesRowByRow(t *testing.T) {
	postcodes := []string{"75570", "63634", "18681", "75570", "", "84394", "63634", "06974"}
	text := textColumn
	dict := func(id uint64, entries []string, idx []int32, nulls []bool) table.Column {
		d := &table.Dict{ID: id, Offsets: []int32{0}}
		for _, e := range entries {
			d.Data = append(d.Data, e...)
			d.Offsets = append(d.Offsets, int32(len(d.Data)))
		}
		return table.Column{Form: table.FormDict, Dict: d, Indices: idx, Nulls: nulls}
	}
	nulls := []bool{false, false, true, false, false, false, true, false}
	entries := []string{"A0727148", "A0390287", "A0748681", "A0612357"}
	cases := []struct {
		name    string
		prefix  int
		batches []table.Column
	}{
		{"text", 0, []table.Column{text(postcodes, nil), text(postcodes, nulls), text([]string{"99999", "75570"}, nil)}},
		{"text prefix", 3, []table.Column{text(postcodes, nulls), text([]string{"7", "755", "75599"}, nil)}},
		{"dict", 0, []table.Column{
			dict(4, entries, []int32{2, 2, 0, 3, 0, 1, 2, 0}, nulls),
			dict(4, entries, []int32{1, 1, 3, 0, 2, 2, 2, 2}, nil),
			dict(5, []string{"A0612357", "A0000001"}, []int32{1, 0, 1}, nil),
			dict(0, []string{"A0000002", "A0727148"}, []int32{0, 1}, []bool{true, false}),
		}},
		{"dict prefix", 6, []table.Column{dict(4, entries, []int32{3, 2, 1, 0, 3, 2, 1, 0}, nulls)}},
		{"ints", 0, []table.Column{
			{Form: table.FormInt64, Ints: []int64{42, -7, 42, 1000000, 5, 5, 0, -7}, Nulls: nulls},
			{Form: table.FormInt64, Ints: []int64{12, 42}},
		}},
		{"ints prefix", 2, []table.Column{{Form: table.FormInt64, Ints: []int64{4211, -7, 4299, 1000000, 5}}}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got, ref := colstats.New(colstats.Binary, 1, 2, 0), colstats.New(colstats.Binary, 1, 2, 0)
			ls := levelSlots{col: 0, prefix: tc.prefix}
			look := levelSlots{col: 0, prefix: tc.prefix, nullSlot: -1}
			var buf []byte
			for bi, col := range tc.batches {
				b := &table.Batch{Cols: []table.Column{col}, Rows: col.Len()}
				want := make([]int32, b.Rows)
				for i := range want {
					if col.IsNull(i) {
						continue
					}
					buf = col.AppendText(buf[:0], i)
					if tc.prefix > 0 && len(buf) > tc.prefix {
						buf = buf[:tc.prefix]
					}
					want[i] = int32(ref.Level(buf))
				}
				slots := ls.fill(b, got, true)
				for i := range want {
					if slots[i] != want[i] {
						t.Fatalf("batch %d row %d: slot %d, want %d", bi, i, slots[i], want[i])
					}
				}
				// Looking the same rows up again finds the same slots,
				// and nulls get the unseen slot.
				again := look.fill(b, got, false)
				for i := range want {
					w := want[i]
					if col.IsNull(i) {
						w = -1
					}
					if again[i] != w {
						t.Fatalf("batch %d row %d: lookup slot %d, want %d", bi, i, again[i], w)
					}
				}
			}
			if got.NumLevels() != ref.NumLevels() {
				t.Fatalf("%d level slots, want %d", got.NumLevels(), ref.NumLevels())
			}
			for l := 1; l < ref.NumLevels(); l++ {
				if string(got.Bytes(l)) != string(ref.Bytes(l)) {
					t.Errorf("slot %d holds %q, want %q", l, got.Bytes(l), ref.Bytes(l))
				}
			}
			miss := &table.Batch{Cols: []table.Column{text([]string{"never-" + strconv.Itoa(len(tc.name))}, nil)}, Rows: 1}
			if s := look.fill(miss, got, false); s[0] != -1 {
				t.Errorf("an unseen level got slot %d, want -1", s[0])
			}
		})
	}
}

// TestTargetReaderInts reads an integer target over two batches: classes
// are numbered in order of appearance, nulls are -1, and values met again
// (served from the integer cache) keep their class.
func TestTargetReaderInts(t *testing.T) {
	tr := &targetReader{labels: map[string]int{}, numeric: true}
	batches := []table.Column{
		{Form: table.FormInt64, Ints: []int64{1, 0, 0, 7, 1, 3}, Nulls: []bool{false, false, false, true, false, false}},
		{Form: table.FormInt64, Ints: []int64{3, 0, 1, -2}},
	}
	want := [][]int32{{0, 1, 1, -1, 0, 2}, {2, 1, 0, 3}}
	for bi, col := range batches {
		b := &table.Batch{Cols: []table.Column{col}, Rows: len(col.Ints)}
		if err := tr.read(b); err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(tr.cls, want[bi]) {
			t.Errorf("batch %d: classes %v, want %v", bi, tr.cls, want[bi])
		}
	}
	if got := strings.Join(tr.order, ","); got != "1,0,3,-2" {
		t.Errorf("labels in order of appearance %q, want 1,0,3,-2", got)
	}
	if tr.missing != 1 {
		t.Errorf("missing = %d, want 1", tr.missing)
	}
}

// textColumn returns a text column of vals with the given null flags.
func textColumn(vals []string, nulls []bool) table.Column {
	c := table.Column{Form: table.FormText, Nulls: nulls, Offsets: []int32{0}}
	for _, v := range vals {
		c.Data = append(c.Data, v...)
		c.Offsets = append(c.Offsets, int32(len(c.Data)))
	}
	return c
}

// TestTargetReaderTexts reads text targets (a CSV's cells) over two
// batches: a numeric target's texts that denote one number share its class
// and canonical label, whether met first or again (served from the text
// cache); a text target keeps its labels as they are.
func TestTargetReaderTexts(t *testing.T) {
	for _, tc := range []struct {
		name    string
		numeric bool
		batches [][]string
		nulls   [][]bool
		want    [][]int32
		labels  string
	}{
		{"numeric", true,
			[][]string{{"1", "0", "1.0", "", "0", "1", "1e0", "0.00"}, {"0.00", "1.0", "2", "1", "-0.5"}},
			[][]bool{{false, false, false, true, false, false, false, false}, nil},
			[][]int32{{0, 1, 0, -1, 1, 0, 0, 1}, {1, 0, 2, 0, 3}}, "1,0,2,-0.5"},
		{"text", false,
			[][]string{{"late", "on time", "late", "Late"}, {"on time", "late", "Late", "lost"}},
			[][]bool{nil, nil},
			[][]int32{{0, 1, 0, 2}, {1, 0, 2, 3}}, "late,on time,Late,lost"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			tr := &targetReader{labels: map[string]int{}, numeric: tc.numeric}
			for bi, vals := range tc.batches {
				b := &table.Batch{Cols: []table.Column{textColumn(vals, tc.nulls[bi])}, Rows: len(vals)}
				if err := tr.read(b); err != nil {
					t.Fatal(err)
				}
				if !slices.Equal(tr.cls, tc.want[bi]) {
					t.Errorf("batch %d: classes %v, want %v", bi, tr.cls, tc.want[bi])
				}
			}
			if got := strings.Join(tr.order, ","); got != tc.labels {
				t.Errorf("labels in order of appearance %q, want %q", got, tc.labels)
			}
		})
	}
}

// TestTargetReaderTextsNoAlloc: once its classes are known, a text
// target is read without an allocation, labels longer than 32 bytes
// included.
func TestTargetReaderTextsNoAlloc(t *testing.T) {
	long := strings.Repeat("delivered after the promised window, ", 2)
	b := &table.Batch{Cols: []table.Column{textColumn([]string{long, "on time", long, "on time"}, nil)}, Rows: 4}
	tr := &targetReader{labels: map[string]int{}}
	if err := tr.read(b); err != nil {
		t.Fatal(err)
	}
	if allocs := testing.AllocsPerRun(100, func() { tr.read(b) }); allocs > 0 {
		t.Errorf("%.1f allocations per batch", allocs)
	}
}
