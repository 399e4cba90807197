package table

import (
	"errors"
	"math"
	"testing"
)

func TestAppendText(t *testing.T) {
	d := &Dict{Data: []byte("northsouth"), Offsets: []int32{0, 5, 10}, ID: 1}
	cases := []struct {
		name string
		col  Column
		want []string // "" with a null
	}{
		{"text", Column{Form: FormText, Data: []byte("00501ab"), Offsets: []int32{0, 5, 7}}, []string{"00501", "ab"}},
		{"dict with null", Column{Form: FormDict, Dict: d, Indices: []int32{1, 0, 0}, Nulls: []bool{false, false, true}}, []string{"south", "north", ""}},
		{"ints", Column{Form: FormInt64, Ints: []int64{501, -3}}, []string{"501", "-3"}},
		// Shortest form that parses back (strconv 'g', -1), as documented.
		{"floats", Column{Form: FormFloat64, Floats: []float64{0.1, 1e21, math.NaN(), math.Inf(-1)}}, []string{"0.1", "1e+21", "NaN", "-Inf"}},
		{"bools", Column{Form: FormBool, Bools: []bool{true, false}}, []string{"true", "false"}},
	}
	for _, c := range cases {
		if c.col.Len() != len(c.want) {
			t.Errorf("%s: Len %d, want %d", c.name, c.col.Len(), len(c.want))
		}
		for i, w := range c.want {
			if got := string(c.col.AppendText(nil, i)); got != w {
				t.Errorf("%s row %d: %q, want %q", c.name, i, got, w)
			}
		}
	}
}

func TestFloat(t *testing.T) {
	c := Column{Form: FormText, Data: []byte("2.5x1"), Offsets: []int32{0, 3, 4, 5}, Nulls: []bool{false, false, false}}
	if v, ok, err := c.Float(0); v != 2.5 || !ok || err != nil {
		t.Errorf("row 0: %v %v %v", v, ok, err)
	}
	if _, _, err := c.Float(1); err == nil {
		t.Error("row 1: x parsed as a number")
	}
	c.Nulls[2] = true
	if _, ok, err := c.Float(2); ok || err != nil {
		t.Errorf("null row: ok %v err %v", ok, err)
	}
}

func TestDataError(t *testing.T) {
	cause := errors.New("7 fields, header has 8")
	cases := []struct {
		e    DataError
		want string
	}{
		{DataError{File: "shipments.csv", Line: 1234, Err: cause}, "shipments.csv:1234: 7 fields, header has 8"},
		{DataError{File: "s.parquet", Row: 9, Column: "late", Err: errors.New("bad")}, `s.parquet: row 9: column "late": bad`},
		{DataError{File: "s.csv", Line: 3, Row: 2, Column: "route", Err: errors.New("bad")}, `s.csv:3: column "route": bad`},
	}
	for _, c := range cases {
		if got := c.e.Error(); got != c.want {
			t.Errorf("got %q, want %q", got, c.want)
		}
	}
	e := &DataError{File: "x", Err: cause}
	if !errors.Is(e, cause) {
		t.Error("DataError does not unwrap")
	}
}

func TestParseKind(t *testing.T) {
	for in, want := range map[string]Kind{"text": String, "int": Int64, "float": Float64, "bool": Bool, "double": Float64} {
		if k, err := ParseKind(in); err != nil || k != want {
			t.Errorf("ParseKind(%q) = %v, %v", in, k, err)
		}
		if k, _ := ParseKind(in); k.String() != map[Kind]string{String: "text", Int64: "int", Float64: "float", Bool: "bool"}[want] {
			t.Errorf("%v prints as %q", k, k.String())
		}
	}
	if _, err := ParseKind("colour"); err == nil {
		t.Error("colour parsed as a kind")
	}
}

// TestParseInt: what every writer accepts as an int. The limits are
// int64's (computed from the type: 2^63-1 and -2^63).
func TestParseInt(t *testing.T) {
	cases := []struct {
		in   string
		want int64
		ok   bool
	}{
		{"501", 501, true}, {"-7", -7, true}, {"+3", 3, true}, {"007", 7, true},
		{"3.0", 3, true}, {"1e3", 1000, true}, {"-0", 0, true},
		{"9223372036854775807", 9223372036854775807, true},
		{"-9223372036854775808", -9223372036854775808, true},
		{"9223372036854775808", 0, false}, {"3.5", 0, false}, {"", 0, false},
		{"PC1", 0, false}, {"1e300", 0, false}, {"NaN", 0, false}, {"-", 0, false},
	}
	for _, c := range cases {
		got, err := ParseInt([]byte(c.in))
		if (err == nil) != c.ok || (c.ok && got != c.want) {
			t.Errorf("ParseInt(%q) = %d, %v; want %d, ok %v", c.in, got, err, c.want, c.ok)
		}
	}
}
