package derive

import (
	"io"
	"strings"
	"testing"

	"manyfold/io/table"
)

// memTable is a table of text columns (an empty value is null).
func memTable(t *testing.T, names []string, rows [][]string) table.Reader {
	t.Helper()
	s := &table.Schema{}
	for _, n := range names {
		s.Fields = append(s.Fields, table.Field{Name: n, Kind: table.String, Nullable: true})
	}
	b := &table.Batch{Rows: len(rows), FirstRow: 1, Cols: make([]table.Column, len(names))}
	for j := range names {
		c := &b.Cols[j]
		c.Form, c.Offsets = table.FormText, []int32{0}
		for i, r := range rows {
			if r[j] == "" {
				if c.Nulls == nil {
					c.Nulls = make([]bool, len(rows))
				}
				c.Nulls[i] = true
			}
			c.Data = append(c.Data, r[j]...)
			c.Offsets = append(c.Offsets, int32(len(c.Data)))
		}
	}
	return table.NewMemReader(s, b)
}

// values reads column name of every row as text ("<null>" for null).
func values(t *testing.T, r table.Reader, name string) []string {
	t.Helper()
	i := r.Schema().Index(name)
	var out []string
	for {
		b, err := r.Next()
		if err == io.EOF {
			return out
		}
		if err != nil {
			t.Fatal(err)
		}
		c := &b.Cols[i]
		for k := 0; k < b.Rows; k++ {
			if c.IsNull(k) {
				out = append(out, "<null>")
			} else {
				out = append(out, string(c.AppendText(nil, k)))
			}
		}
	}
}

func TestCrossValues(t *testing.T) {
	// A separator inside a value must not make two pairs one level:
	// ("a,b", "c") and ("a", "b,c") stay apart; a null part is kept in
	// the tuple; both parts null is null.
	rows := [][]string{{"a,b", "c"}, {"a", "b,c"}, {`q"`, ""}, {"", ""}, {"x", "y"}}
	r, err := Wrap(memTable(t, []string{"p", "q"}, rows), []string{"p*q"})
	if err != nil {
		t.Fatal(err)
	}
	got := values(t, r, "p*q")
	want := []string{`["a,b","c"]`, `["a","b,c"]`, `["q\"",null]`, "<null>", `["x","y"]`}
	if strings.Join(got, "|") != strings.Join(want, "|") {
		t.Errorf("cross values %q, want %q", got, want)
	}
	if !r.Schema().Fields[2].Derived {
		t.Error("the cross is not marked Derived")
	}
}

func TestConditions(t *testing.T) {
	rows := [][]string{{"10"}, {"15"}, {"20"}, {""}, {"15.0"}}
	for _, c := range []struct {
		cond string
		want string
	}{
		{"d>15", "0,0,1,<null>,0"},
		{"d>=15", "0,1,1,<null>,1"},
		{"d<15", "1,0,0,<null>,0"},
		{"d<=15", "1,1,0,<null>,1"},
		{"d=15", "0,1,0,<null>,1"},
		{"d!=15", "1,0,1,<null>,0"},
	} {
		r, err := Wrap(memTable(t, []string{"d"}, rows), []string{c.cond})
		if err != nil {
			t.Fatal(err)
		}
		if got := strings.Join(values(t, r, c.cond), ","); got != c.want {
			t.Errorf("%s: %s, want %s", c.cond, got, c.want)
		}
	}
	r, err := Wrap(memTable(t, []string{"s"}, [][]string{{"late"}, {"on time"}, {""}}), []string{"s=late", "s!=late"})
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(values(t, r, "s=late"), ","); got != "1,0,<null>" {
		t.Errorf("s=late: %s", got)
	}
	if _, err := Wrap(memTable(t, []string{"s"}, nil), []string{"s>late"}); err == nil {
		t.Error("a text compared with > is accepted")
	}
	// A text value in a numeric condition is an error naming the column.
	r, _ = Wrap(memTable(t, []string{"d"}, [][]string{{"x"}}), []string{"d>1"})
	if _, err := r.Next(); err == nil || !strings.Contains(err.Error(), `"d"`) {
		t.Errorf("error %v, want one naming column d", err)
	}
}

func TestSelectReadsParts(t *testing.T) {
	r, err := Wrap(memTable(t, []string{"a", "b", "c"}, [][]string{{"1", "2", "3"}}), []string{"a*c"})
	if err != nil {
		t.Fatal(err)
	}
	if err := r.Select([]int{3, 1}); err != nil { // the cross, then b
		t.Fatal(err)
	}
	if s := r.Schema(); len(s.Fields) != 2 || s.Fields[0].Name != "a*c" || s.Fields[1].Name != "b" {
		t.Fatalf("schema %+v", s.Fields)
	}
	b, err := r.Next()
	if err != nil {
		t.Fatal(err)
	}
	if got := string(b.Cols[0].Bytes(0)) + " " + string(b.Cols[1].Bytes(0)); got != `["1","3"] 2` {
		t.Errorf("batch %q", got)
	}
}

func TestExpand(t *testing.T) {
	s := &table.Schema{}
	for _, n := range []string{"late", "dest_zone", "dest_city", "dest_code", "origin", "fold"} {
		s.Fields = append(s.Fields, table.Field{Name: n})
	}
	for _, c := range []struct {
		in   []string
		want string
		err  bool
	}{
		{[]string{"dest_*"}, "dest_zone,dest_city,dest_code", false},
		{[]string{"dest_*", "!dest_city"}, "dest_zone,dest_code", false},
		{[]string{"*"}, "dest_zone,dest_city,dest_code,origin", false}, // never the target or the fold column
		{[]string{"origin*dest_zone"}, "origin*dest_zone", false},      // a cross, not a glob
		{[]string{"origin", "origin"}, "origin,origin", false},         // for the caller to refuse
		{[]string{"origin", "o*"}, "origin", false},
		{[]string{"nothing_*"}, "", true},
		{[]string{"[x"}, "", true},
	} {
		got, err := Expand(c.in, s, "late", "fold")
		if (err != nil) != c.err || (!c.err && strings.Join(got, ",") != c.want) {
			t.Errorf("Expand(%q) = %q, %v; want %q", c.in, got, err, c.want)
		}
	}
	// A derived target keeps the column it is computed from out of every
	// pattern: origin=ATL is the label, encoding origin would leak it.
	if got, err := Expand([]string{"*"}, s, "origin=ATL", "fold"); err != nil || strings.Join(got, ",") != "late,dest_zone,dest_city,dest_code" {
		t.Errorf("Expand(*) under the target origin=ATL = %q, %v", got, err)
	}
	if got := Sources("delay>=15"); len(got) != 1 || got[0] != "delay" {
		t.Errorf("Sources(delay>=15) = %q", got)
	}
	if got := Sources("late"); got != nil {
		t.Errorf("Sources(late) = %q", got)
	}
}
