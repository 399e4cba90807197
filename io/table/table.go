// Package table defines the column batches that manyfold's readers yield and
// its writers take, and the errors they report.
//
// A reader yields a Schema once and then a sequence of Batches. A Batch holds
// the same rows of every column; each Column stores its values in one of a
// few physical forms (text as bytes plus offsets, text as a dictionary plus
// indices, int64, float64, bool) with nulls marked explicitly. The logical
// kind of a column (Field.Kind) may differ from the physical form: a CSV
// reader delivers every column as text and records the kind it inferred.
//
// Categorical code reads a column through Text, which gives the canonical
// text of a value whatever the physical form, so the integer 501 read from
// Parquet and the text "501" read from CSV are the same level.
package table

import (
	"fmt"
	"io"
	"math"
	"strconv"
)

// Kind is the logical type of a column.
type Kind uint8

// The kinds a column can have.
const (
	String  Kind = iota // text; every categorical column can be read as text
	Int64               // 64-bit signed integer
	Float64             // IEEE 754 double
	Bool                // true or false
)

var kindNames = [...]string{String: "text", Int64: "int", Float64: "float", Bool: "bool"}

// String returns the name of the kind as manyfold prints it: text, int,
// float or bool.
func (k Kind) String() string {
	if int(k) < len(kindNames) {
		return kindNames[k]
	}
	return "kind(" + strconv.Itoa(int(k)) + ")"
}

// ParseKind parses a kind name as printed by Kind.String. "string" is
// accepted for text, "int64" for int, "float64" and "double" for float.
func ParseKind(s string) (Kind, error) {
	switch s {
	case "text", "string", "str":
		return String, nil
	case "int", "int64", "integer":
		return Int64, nil
	case "float", "float64", "double", "number":
		return Float64, nil
	case "bool", "boolean":
		return Bool, nil
	}
	return 0, fmt.Errorf("unknown type %q (want text, int, float or bool)", s)
}

// Field names one column and gives its logical kind.
type Field struct {
	Name string
	Kind Kind
	// Nullable reports whether the column may hold nulls. Readers set it
	// from the file's schema (CSV: always true); writers use it to declare
	// the output column.
	Nullable bool
	// Derived marks a column computed from others (a cross, a condition;
	// see io/derive), not read from the file: it is not written back as a
	// kept input column.
	Derived bool
}

// Schema is the ordered list of a table's columns.
type Schema struct {
	Fields []Field
}

// Index returns the position of the column named name, or -1.
func (s *Schema) Index(name string) int {
	for i, f := range s.Fields {
		if f.Name == name {
			return i
		}
	}
	return -1
}

// Names returns the column names in order.
func (s *Schema) Names() []string {
	out := make([]string, len(s.Fields))
	for i, f := range s.Fields {
		out[i] = f.Name
	}
	return out
}

// Form is the physical representation of a Column's values.
type Form uint8

// The physical forms of a column.
const (
	FormText    Form = iota // Data and Offsets
	FormDict                // Dict and Indices
	FormInt64               // Ints
	FormFloat64             // Floats
	FormBool                // Bools
)

// Dict is a dictionary of text values: entry i is
// Data[Offsets[i]:Offsets[i+1]]. ID identifies the dictionary: two Dicts
// with the same non-zero ID from the same reader hold the same entries, so a
// consumer may cache work done per entry (a Parquet reader gives a new ID
// for each column chunk).
type Dict struct {
	Data    []byte
	Offsets []int32
	ID      uint64
}

// Len returns the number of entries.
func (d *Dict) Len() int { return len(d.Offsets) - 1 }

// Entry returns entry i. The slice aliases the dictionary's storage.
func (d *Dict) Entry(i int) []byte { return d.Data[d.Offsets[i]:d.Offsets[i+1]] }

// Column holds one column's values for the rows of a Batch. Only the fields
// of its Form are meaningful. Slices alias reader buffers that are reused:
// they are valid until the reader's next call to Next.
type Column struct {
	Form Form
	// Nulls[i] is true when row i is null; a nil Nulls means no row is null.
	// The value slots of null rows hold arbitrary data (empty text, 0).
	Nulls []bool

	// FormText: row i is Data[Offsets[i]:Offsets[i+1]]; len(Offsets) = rows+1.
	Data    []byte
	Offsets []int32

	// FormDict: row i is Dict.Entry(Indices[i]) unless it is null.
	Dict    *Dict
	Indices []int32

	Ints   []int64   // FormInt64
	Floats []float64 // FormFloat64
	Bools  []bool    // FormBool
}

// Len returns the number of rows in the column.
func (c *Column) Len() int {
	switch c.Form {
	case FormText:
		if len(c.Offsets) == 0 {
			return 0
		}
		return len(c.Offsets) - 1
	case FormDict:
		return len(c.Indices)
	case FormInt64:
		return len(c.Ints)
	case FormFloat64:
		return len(c.Floats)
	case FormBool:
		return len(c.Bools)
	}
	return 0
}

// IsNull reports whether row i is null.
// ResetFloats makes c a float64 column of n values without nulls, reusing
// its storage, and returns the values to fill.
func (c *Column) ResetFloats(n int) []float64 {
	c.Form, c.Nulls, c.Floats = FormFloat64, nil, resize(c.Floats, n)
	return c.Floats
}

// ResetInts makes c an int64 column of n values without nulls, reusing its
// storage, and returns the values to fill.
func (c *Column) ResetInts(n int) []int64 {
	c.Form, c.Nulls, c.Ints = FormInt64, nil, resize(c.Ints, n)
	return c.Ints
}

// resize returns s with length n, reallocated only when its capacity is
// short.
func resize[T any](s []T, n int) []T {
	if cap(s) < n {
		return make([]T, n)
	}
	return s[:n]
}

func (c *Column) IsNull(i int) bool { return c.Nulls != nil && c.Nulls[i] }

// Bytes returns the text of row i when the column is in text or dictionary
// form, aliasing the column's storage, and nil otherwise. Null rows give an
// empty slice.
func (c *Column) Bytes(i int) []byte {
	switch c.Form {
	case FormText:
		return c.Data[c.Offsets[i]:c.Offsets[i+1]]
	case FormDict:
		if c.IsNull(i) {
			return c.Data[:0]
		}
		return c.Dict.Entry(int(c.Indices[i]))
	}
	return nil
}

// AppendText appends the canonical text of row i to dst: the bytes of a
// text value; an integer in decimal; a float in the shortest form that
// round-trips (strconv 'g', -1); true or false. A null row appends nothing.
func (c *Column) AppendText(dst []byte, i int) []byte {
	if c.IsNull(i) {
		return dst
	}
	switch c.Form {
	case FormText, FormDict:
		return append(dst, c.Bytes(i)...)
	case FormInt64:
		return strconv.AppendInt(dst, c.Ints[i], 10)
	case FormFloat64:
		return AppendFloat(dst, c.Floats[i])
	case FormBool:
		return strconv.AppendBool(dst, c.Bools[i])
	}
	return dst
}

// Float returns row i as a float64. Text is parsed with strconv.ParseFloat
// (surrounding spaces are not allowed); booleans give 0 or 1. ok is false
// for a null row. A text value that is not a number gives an error.
func (c *Column) Float(i int) (v float64, ok bool, err error) {
	if c.IsNull(i) {
		return 0, false, nil
	}
	switch c.Form {
	case FormInt64:
		return float64(c.Ints[i]), true, nil
	case FormFloat64:
		return c.Floats[i], true, nil
	case FormBool:
		if c.Bools[i] {
			return 1, true, nil
		}
		return 0, true, nil
	}
	b := c.Bytes(i)
	v, err = ParseFloat(b)
	if err != nil {
		return 0, false, err
	}
	return v, true, nil
}

// ParseInt parses an integer the way every manyfold writer reads text into
// an int column: an optionally signed decimal integer (leading zeros
// allowed), or a number with no fractional part ("12.0", "1e3") that fits
// in an int64.
func ParseInt(b []byte) (int64, error) {
	s := b
	neg := false
	if len(s) > 0 && (s[0] == '-' || s[0] == '+') {
		neg = s[0] == '-'
		s = s[1:]
	}
	if len(s) > 0 && len(s) <= 18 {
		// The common case without strconv: at most 18 digits cannot wrap.
		var v int64
		ok := true
		for _, c := range s {
			if c < '0' || c > '9' {
				ok = false
				break
			}
			v = v*10 + int64(c-'0')
		}
		if ok {
			if neg {
				v = -v
			}
			return v, nil
		}
	}
	if v, err := strconv.ParseInt(string(b), 10, 64); err == nil {
		return v, nil
	}
	f, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not an integer", b)
	}
	v, err := FloatToInt(f)
	if err != nil {
		return 0, fmt.Errorf("%q is not an integer", b)
	}
	return v, nil
}

// FloatToInt converts f to an integer when it has no fractional part and
// fits in an int64.
func FloatToInt(f float64) (int64, error) {
	if f != math.Trunc(f) || f < -(1<<63) || f >= 1<<63 {
		return 0, fmt.Errorf("%s is not an integer", AppendFloat(nil, f))
	}
	return int64(f), nil
}

// ParseBool parses a boolean the way every manyfold writer reads text into
// a bool column: what strconv.ParseBool accepts, 1, t, T, TRUE, true, True
// and 0, f, F, FALSE, false, False.
func ParseBool(b []byte) (bool, error) {
	switch string(b) {
	case "1", "t", "T", "TRUE", "true", "True":
		return true, nil
	case "0", "f", "F", "FALSE", "false", "False":
		return false, nil
	}
	return false, fmt.Errorf("%q is not a boolean", b)
}

// ParseFloat parses a decimal or scientific number. It accepts what
// strconv.ParseFloat accepts, including NaN and Inf, and the booleans
// true and false as 1 and 0.
func ParseFloat(b []byte) (float64, error) {
	switch string(b) {
	case "true", "TRUE", "True":
		return 1, nil
	case "false", "FALSE", "False":
		return 0, nil
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not a number", b)
	}
	return v, nil
}

// AppendFloat appends f in the shortest decimal form that parses back to
// the same float64; NaN and infinities as NaN, +Inf and -Inf.
func AppendFloat(dst []byte, f float64) []byte {
	switch {
	case math.IsNaN(f):
		return append(dst, "NaN"...)
	case math.IsInf(f, 1):
		return append(dst, "+Inf"...)
	case math.IsInf(f, -1):
		return append(dst, "-Inf"...)
	}
	return strconv.AppendFloat(dst, f, 'g', -1, 64)
}

// Batch holds the same rows of every column of a schema.
type Batch struct {
	Rows int
	Cols []Column
	// FirstRow is the 1-based number of the batch's first data row in the
	// table (the header, if any, is not a row).
	FirstRow int64
	// Lines, when not nil, gives for each row the 1-based line of the file
	// on which the row starts (CSV readers set it; it counts the header).
	Lines []int64
}

// Reader yields a table's schema and then its rows in batches.
type Reader interface {
	// Schema returns the table's columns. It is valid before the first Next.
	Schema() *Schema
	// Next returns the next batch, or io.EOF after the last one. The batch
	// and its slices are valid until the following call to Next.
	Next() (*Batch, error)
	// Select restricts the schema and every later batch to the columns at
	// the given positions of the full schema, in that order. It must be
	// called before the first Next.
	Select(cols []int) error
	// Close releases the reader's resources.
	Close() error
}

// Writer takes batches and writes them as one table. Close completes the
// table; a writer whose Write failed must still be closed.
type Writer interface {
	// Write appends the rows of b. Columns match the writer's schema by
	// position; their physical forms may differ from the schema's kinds (a
	// text column is parsed when the output kind is numeric).
	Write(b *Batch) error
	// Close flushes and completes the output.
	Close() error
}

// ForEach calls f with every batch of r that holds rows, in order, and
// returns the first error of r or f. It does not close r.
func ForEach(r Reader, f func(b *Batch) error) error {
	for {
		b, err := r.Next()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
		if b.Rows == 0 {
			continue
		}
		if err := f(b); err != nil {
			return err
		}
	}
}
