package table

import (
	"errors"
	"strings"
	"testing"
)

// textCol makes a text column of vals.
func textCol(vals ...string) *Column {
	c := &Column{Form: FormText, Offsets: []int32{0}}
	for _, v := range vals {
		c.Data = append(c.Data, v...)
		c.Offsets = append(c.Offsets, int32(len(c.Data)))
	}
	return c
}

func TestUTF8CheckText(t *testing.T) {
	var u UTF8Check
	for _, c := range []struct {
		vals  []string
		start int
		want  int
	}{
		{[]string{"Zürich", "", "Genève", "a"}, 0, -1},
		{[]string{"Zürich", "Gen\xe8ve", "a"}, 0, 1},
		// Each half of "é" is invalid, though their bytes together are
		// valid UTF-8.
		{[]string{"ok", "\xc3", "\xa9"}, 0, 1},
		{[]string{"\xc3", "\xa9", "x"}, 1, 0},
		{[]string{"abc", "d\xff"}, 1, 0},
	} {
		col := textCol(c.vals...)
		if got := u.Invalid(col, c.start, len(c.vals)-c.start); got != c.want {
			t.Errorf("%q from %d: Invalid = %d, want %d", c.vals, c.start, got, c.want)
		}
	}
	// A null row's bytes are not checked.
	col := textCol("a", "\xff", "b")
	col.Nulls = []bool{false, true, false}
	if got := u.Invalid(col, 0, 3); got != -1 {
		t.Errorf("null row: Invalid = %d", got)
	}
}

func TestUTF8CheckDict(t *testing.T) {
	d := &Dict{ID: 7}
	d.Offsets = []int32{0}
	for _, v := range []string{"Basel", "Z\xfcrich", "Bern"} {
		d.Data = append(d.Data, v...)
		d.Offsets = append(d.Offsets, int32(len(d.Data)))
	}
	var u UTF8Check
	// The bad entry is not used: no error.
	if got := u.Invalid(&Column{Form: FormDict, Dict: d, Indices: []int32{0, 2, 2, 0}}, 0, 4); got != -1 {
		t.Fatalf("unused bad entry: Invalid = %d", got)
	}
	col := &Column{Form: FormDict, Dict: d, Indices: []int32{0, 2, 1, 1}, Nulls: []bool{false, false, false, false}}
	if got := u.Invalid(col, 1, 3); got != 1 {
		t.Fatalf("Invalid = %d, want 1", got)
	}
	col.Nulls[2] = true
	if got := u.Invalid(col, 0, 4); got != 3 {
		t.Fatalf("with a null: Invalid = %d, want 3", got)
	}
	// Without an ID, each row's entry is checked.
	d.ID = 0
	if got := u.Invalid(&Column{Form: FormDict, Dict: d, Indices: []int32{2, 1}}, 0, 2); got != 1 {
		t.Fatalf("no ID: Invalid = %d, want 1", got)
	}
}

func TestNotUTF8Errors(t *testing.T) {
	err := NotUTF8([]byte("Gen\xe8ve"))
	if !errors.Is(err, ErrNotUTF8) || !strings.Contains(err.Error(), `"Gen\xe8ve" is not valid UTF-8`) {
		t.Fatalf("NotUTF8: %v", err)
	}
	err = NameNotUTF8(1, "ort\xe9")
	if !errors.Is(err, ErrNotUTF8) || !strings.HasPrefix(err.Error(), `output column 2: its name "ort\xe9" is not valid UTF-8`) {
		t.Fatalf("NameNotUTF8: %v", err)
	}
}
