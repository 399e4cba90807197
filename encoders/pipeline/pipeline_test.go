package pipeline

import (
	"errors"
	"reflect"
	"slices"
	"testing"

	"manyfold/encoders/method"
	"manyfold/io/table"
)

func TestClosest(t *testing.T) {
	names := []string{"dest_postcode", "sender_account", "route", "parcel_type", "late"}
	cases := []struct {
		name string
		want []string
	}{
		{"dest_postcde", []string{"dest_postcode"}},
		{"Route", []string{"route", "late"}},
		{"rote", []string{"route", "late"}},
		{"zzzzzzzzzzzzzzzzzzzzzz", nil},
	}
	for _, c := range cases {
		if got := Closest(c.name, names, 3); !slices.Equal(got, c.want) {
			t.Errorf("Closest(%q) = %v, want %v", c.name, got, c.want)
		}
	}
}

// mustPlan parses a plan of encodings (method.ParsePlan) for a test.
func mustPlan(tb testing.TB, s string) method.Plan {
	tb.Helper()
	p, err := method.ParsePlan(s)
	if err != nil {
		tb.Fatal(err)
	}
	return p
}

// textBatch returns a one-column batch of text values ("" is null).
func textBatch(vals ...string) *table.Batch {
	c := table.Column{Form: table.FormText, Offsets: []int32{0}}
	for i, v := range vals {
		if v == "" {
			if c.Nulls == nil {
				c.Nulls = make([]bool, len(vals))
			}
			c.Nulls[i] = true
		}
		c.Data = append(c.Data, v...)
		c.Offsets = append(c.Offsets, int32(len(c.Data)))
	}
	return &table.Batch{Rows: len(vals), Cols: []table.Column{c}, FirstRow: 1}
}

// TestTaskProbe: the task rule, one batch at a time, and the same probe
// whatever batches or shards cut the rows (Add batch by batch, and Append
// of the shards' probes, equal Add over one batch).
func TestTaskProbe(t *testing.T) {
	many := make([]string, TaskRows+20)
	for i := range many {
		many[i] = "1"
	}
	lateFrac := slices.Clone(many)
	lateFrac[TaskRows] = "2.5" // row TaskRows+1: not looked at
	edgeFrac := slices.Clone(many)
	edgeFrac[TaskRows-1] = "2.5" // row TaskRows: looked at
	cases := []struct {
		name string
		kind table.Kind
		vals []string
		want bool
	}{
		{"binary ints", table.Int64, []string{"0", "1", "", "1"}, false},
		{"few classes", table.Int64, []string{"1", "2", "3", "2"}, false},
		{"fractions", table.Float64, []string{"1.5", "2", "3"}, true},
		{"late fraction", table.Float64, []string{"1", "2", "", "3", "0.25"}, true},
		{"many integers", table.Int64, []string{"1", "2", "3", "4", "5", "6", "7", "8", "9", "10", "11"}, true},
		{"ten integers", table.Int64, []string{"1", "2", "3", "4", "5", "6", "7", "8", "9", "10", "1"}, false},
		{"text labels", table.String, []string{"yes", "no"}, false},
		{"text after a fraction", table.Float64, []string{"1.5", "n/a"}, true},
		{"fraction after text", table.Float64, []string{"1", "n/a", "1.5"}, false},
		{"fraction beyond the rows looked at", table.Float64, lateFrac, false},
		{"fraction in the last row looked at", table.Float64, edgeFrac, true},
		{"no rows", table.Float64, nil, false},
	}
	for _, c := range cases {
		var whole TaskProbe
		whole.Add(textBatch(c.vals...), 0, c.kind)
		if whole.Regression() != c.want {
			t.Errorf("%s: regression = %v, want %v (%+v)", c.name, whole.Regression(), c.want, whole)
		}
		if len(c.vals) > 0 && len(c.vals) < TaskRows && !whole.Decided() && c.want {
			t.Errorf("%s: not decided", c.name)
		}
		// Every cut into two, and one into single rows.
		cuts := [][]int{}
		for k := 0; k <= len(c.vals) && k < 30; k++ {
			cuts = append(cuts, []int{k})
		}
		if len(c.vals) > 0 && len(c.vals) < 30 {
			var ones []int
			for k := 1; k < len(c.vals); k++ {
				ones = append(ones, k)
			}
			cuts = append(cuts, ones)
		}
		cuts = append(cuts, []int{len(c.vals) - 3, len(c.vals) - 2},
			[]int{TaskRows - 1}, []int{TaskRows}, []int{TaskRows + 1}, []int{5, TaskRows - 1, TaskRows + 1})
		for _, cut := range cuts {
			var batched, appended TaskProbe
			at := 0
			for _, k := range append(slices.Clone(cut), len(c.vals)) {
				if k < at || k > len(c.vals) {
					continue
				}
				b := textBatch(c.vals[at:k]...)
				batched.Add(b, 0, c.kind)
				var shard TaskProbe
				shard.Add(b, 0, c.kind)
				appended.Append(shard)
				at = k
			}
			if !reflect.DeepEqual(batched, whole) {
				t.Errorf("%s, cut at %v: batch by batch %+v, in one batch %+v", c.name, cut, batched, whole)
			}
			if !reflect.DeepEqual(appended, whole) {
				t.Errorf("%s, cut at %v: shards appended %+v, in one batch %+v", c.name, cut, appended, whole)
			}
		}
	}
}

func TestSortedClasses(t *testing.T) {
	labels, pos := sortedClasses([]string{"10", "2", "1"}, true)
	if !slices.Equal(labels, []string{"1", "2", "10"}) || !slices.Equal(pos, []int{2, 1, 0}) {
		t.Errorf("numeric: %v %v", labels, pos)
	}
	labels, _ = sortedClasses([]string{"yes", "no"}, false)
	if !slices.Equal(labels, []string{"no", "yes"}) {
		t.Errorf("text: %v (the positive class is the last)", labels)
	}
}

func TestCheckOutputNames(t *testing.T) {
	s := &table.Schema{Fields: []table.Field{{Name: "route"}, {Name: "route_freq"}, {Name: "late"}}}
	sp := DefaultSpec()
	sp.Target, sp.Columns, sp.Encodings = "late", []string{"route"}, mustPlan(t, "target:eb+freq")
	if err := sp.Validate(); err != nil {
		t.Fatal(err)
	}
	if err := sp.CheckOutputNames("x.csv", s); err == nil {
		t.Error("route_freq clash not reported")
	}
	sp.KeepAll, sp.Keep = false, []string{"route", "late"}
	if err := sp.CheckOutputNames("x.csv", s); err != nil {
		t.Errorf("clash reported for a column that is not kept: %v", err)
	}
	sp.KeepAll, sp.Keep = true, nil
	sp.Encodings = mustPlan(t, "route=target:eb")
	if err := sp.Validate(); err != nil {
		t.Fatal(err)
	}
	if err := sp.CheckOutputNames("x.csv", s); err != nil {
		t.Errorf("clash reported for a column whose encodings write no freq: %v", err)
	}
}

// errAfter is a reader of the given batches, then err.
type errAfter struct {
	batches []*table.Batch
	err     error
}

func (r *errAfter) Schema() *table.Schema {
	return &table.Schema{Fields: []table.Field{{Name: "y", Kind: table.Int64}}}
}
func (r *errAfter) Select([]int) error { return nil }
func (r *errAfter) Close() error       { return nil }
func (r *errAfter) Next() (*table.Batch, error) {
	if len(r.batches) == 0 {
		return nil, r.err
	}
	b := r.batches[0]
	r.batches = r.batches[1:]
	return b, nil
}

// TestProbeTaskReplays: the reader probeTask returns gives the batches it
// read ahead, in order and intact, then the error the reader met ahead,
// where a plain read meets it.
func TestProbeTaskReplays(t *testing.T) {
	bad := errors.New("line 5: broken")
	r := &errAfter{batches: []*table.Batch{textBatch("1", "0"), textBatch("1", "")}, err: bad}
	p, replay := probeTask(r, 0, table.Int64)
	if p.Regression() || p.Rows != 4 {
		t.Errorf("probe %+v, want classification over 4 rows", p)
	}
	var got []string
	for {
		b, err := replay.Next()
		if err != nil {
			if err != bad {
				t.Errorf("error %v, want %v", err, bad)
			}
			break
		}
		for i := 0; i < b.Rows; i++ {
			got = append(got, string(b.Cols[0].AppendText(nil, i)))
		}
	}
	if !slices.Equal(got, []string{"1", "0", "1", ""}) {
		t.Errorf("replayed %q", got)
	}
}
