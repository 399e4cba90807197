package table

import (
	"errors"
	"fmt"
	"unicode/utf8"
)

// ErrNotUTF8 is wrapped by the errors of writers whose format requires
// UTF-8 text (Parquet's STRING columns, Arrow's utf8 type) when a text value
// or a column name is not valid UTF-8. A CSV output keeps bytes as they are.
var ErrNotUTF8 = errors.New("not valid UTF-8, which Parquet and Arrow text must be (a CSV output keeps the bytes as they are)")

// maxQuoted bounds the bytes of a value quoted in an error.
const maxQuoted = 40

// NotUTF8 returns the error for text value v (quoted, cut to 40 bytes).
func NotUTF8(v []byte) error {
	if len(v) > maxQuoted {
		return fmt.Errorf("%q... is %w", v[:maxQuoted], ErrNotUTF8)
	}
	return fmt.Errorf("%q is %w", v, ErrNotUTF8)
}

// NameNotUTF8 returns the error for the name of the output's column at
// position pos (0-based), counted in the output.
func NameNotUTF8(pos int, name string) error {
	return fmt.Errorf("output column %d: its name %q is %w", pos+1, name, ErrNotUTF8)
}

// UTF8Check finds the text values of a column that are not valid UTF-8. It
// checks a dictionary's entries once per dictionary (by its ID), and the
// rows of a text column a batch at a time. The zero value is ready; a
// check holds the state of one column.
type UTF8Check struct {
	id  uint64 // the dictionary last checked (0: none)
	n   int    // its entries
	bad []bool // its entries that are not valid, nil when all are
}

// Invalid returns the index (from start) of the first row of rows
// [start, start+n) of c whose text is not valid UTF-8, or -1 when there is
// none. Null rows, and columns not in text or dictionary form, are valid.
func (u *UTF8Check) Invalid(c *Column, start, n int) int {
	switch c.Form {
	case FormText:
		return invalidText(c, start, n)
	case FormDict:
		return u.invalidDict(c, start, n)
	}
	return -1
}

// invalidText checks the rows' bytes at once: valid UTF-8 whose values
// each start on a character's first byte (not a continuation byte 10xxxxxx)
// is valid value by value. Only a failure looks at the rows one by one.
func invalidText(c *Column, start, n int) int {
	offs := c.Offsets[start : start+n+1]
	if utf8.Valid(c.Data[offs[0]:offs[n]]) {
		ok := true
		for _, o := range offs[:n] {
			if int(o) < len(c.Data) && c.Data[o]&0xC0 == 0x80 {
				ok = false
				break
			}
		}
		if ok {
			return -1
		}
	}
	for i := 0; i < n; i++ {
		if !c.IsNull(start+i) && !utf8.Valid(c.Data[offs[i]:offs[i+1]]) {
			return i
		}
	}
	return -1
}

// invalidDict checks the dictionary's entries once per ID (each row's
// entry when the dictionary has no ID), then looks up the rows' entries
// only when one entry is bad.
func (u *UTF8Check) invalidDict(c *Column, start, n int) int {
	d := c.Dict
	if d.ID == 0 {
		for i, x := range c.Indices[start : start+n] {
			if !c.IsNull(start+i) && x >= 0 && int(x) < d.Len() && !utf8.Valid(d.Entry(int(x))) {
				return i
			}
		}
		return -1
	}
	if d.ID != u.id || d.Len() != u.n {
		u.id, u.n, u.bad = d.ID, d.Len(), nil
		for e := 0; e < d.Len(); e++ {
			if !utf8.Valid(d.Entry(e)) {
				if u.bad == nil {
					u.bad = make([]bool, d.Len())
				}
				u.bad[e] = true
			}
		}
	}
	if u.bad == nil {
		return -1
	}
	for i, x := range c.Indices[start : start+n] {
		if !c.IsNull(start+i) && x >= 0 && int(x) < len(u.bad) && u.bad[x] {
			return i
		}
	}
	return -1
}
