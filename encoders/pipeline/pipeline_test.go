package pipeline

import (
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

func TestDetectRegression(t *testing.T) {
	cases := []struct {
		name string
		kind table.Kind
		vals []string
		want bool
	}{
		{"binary ints", table.Int64, []string{"0", "1", "", "1"}, false},
		{"few classes", table.Int64, []string{"1", "2", "3", "2"}, false},
		{"fractions", table.Float64, []string{"1.5", "2", "3"}, true},
		{"many integers", table.Int64, []string{"1", "2", "3", "4", "5", "6", "7", "8", "9", "10", "11"}, true},
		{"text labels", table.String, []string{"yes", "no"}, false},
	}
	for _, c := range cases {
		if got := detectRegression(textBatch(c.vals...), 0, c.kind); got != c.want {
			t.Errorf("%s: regression = %v, want %v", c.name, got, c.want)
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
