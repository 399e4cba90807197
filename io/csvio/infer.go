package csvio

import (
	"strconv"

	"manyfold/io/table"
)

// inferKind returns the kind of the first rows values of c, ignoring
// nulls: int, float or bool when every value has that form (see the
// package doc), text otherwise or when every value is null.
func inferKind(c *colBuf, rows int) table.Kind {
	var in Inference
	for i := 0; i < rows && in.open(); i++ {
		if !c.nulls[i] {
			in.Add(c.value(i))
		}
	}
	return in.Kind()
}

// Inference infers a column's kind from its non-null values, given one at
// a time, as NewReader infers it from its sample (see the package doc):
// int, float or bool when every value has that form, text otherwise or
// when no value was given. The zero Inference has seen no value. Other
// readers of text (ndjson) use it so that their kinds agree with CSV's.
type Inference struct {
	notInt, notFloat, notBool, seen bool
}

// Add counts the non-null value v, as written.
func (in *Inference) Add(v []byte) {
	in.seen = true
	if !in.notInt && !intText(v) {
		in.notInt = true
	}
	if !in.notFloat && (!floatText(v) || bigInt(v)) {
		in.notFloat = true
	}
	if !in.notBool && !boolText(v) {
		in.notBool = true
	}
}

// AddText counts a value that is text whatever its bytes (a quoted string
// of a format that types its values), which makes the column text.
func (in *Inference) AddText() {
	in.seen, in.notInt, in.notFloat, in.notBool = true, true, true, true
}

// open reports whether a value could still change the kind.
func (in *Inference) open() bool { return !in.notInt || !in.notFloat || !in.notBool }

// Kind returns the kind of the values counted so far.
func (in *Inference) Kind() table.Kind {
	switch {
	case !in.seen:
		return table.String
	case !in.notInt:
		return table.Int64
	case !in.notFloat:
		return table.Float64
	case !in.notBool:
		return table.Bool
	}
	return table.String
}

// valueKind returns the kind one value v would be inferred as alone.
func valueKind(v []byte) table.Kind {
	switch {
	case intText(v):
		return table.Int64
	case floatText(v) && !bigInt(v):
		return table.Float64
	case boolText(v):
		return table.Bool
	}
	return table.String
}

// intText reports whether v is a decimal int64: an optional minus sign,
// then digits with no leading zero unless the number is 0.
func intText(v []byte) bool {
	neg := len(v) > 0 && v[0] == '-'
	if neg {
		v = v[1:]
	}
	if len(v) == 0 || len(v) > 19 || (v[0] == '0' && len(v) > 1) {
		return false
	}
	var n uint64
	for _, c := range v {
		if c < '0' || c > '9' {
			return false
		}
		n = n*10 + uint64(c-'0') // at most 19 digits: cannot wrap
	}
	if neg {
		return n <= 1<<63
	}
	return n <= 1<<63-1
}

// bigInt reports whether v is a decimal integer (an optional sign, then
// digits) outside the range of int64: as a float it would lose digits and
// distinct values would collapse, so its column is text.
func bigInt(v []byte) bool {
	if len(v) < 19 {
		return false // 18 digits always fit
	}
	d := v
	if d[0] == '-' || d[0] == '+' {
		d = d[1:]
	}
	for _, c := range d {
		if c < '0' || c > '9' {
			return false
		}
	}
	if len(d) == 0 {
		return false
	}
	_, err := strconv.ParseInt(string(v), 10, 64)
	return err != nil
}

// floatText reports whether v is a decimal number with an optional sign,
// digits with an optional point, and an optional exponent, and no zero
// followed by another digit at the start; or NaN or an infinity.
func floatText(v []byte) bool {
	switch string(v) {
	case "NaN", "nan", "NAN", "Inf", "+Inf", "-Inf", "inf", "+inf", "-inf", "INF", "+INF", "-INF":
		return true
	}
	i := 0
	if i < len(v) && (v[i] == '+' || v[i] == '-') {
		i++
	}
	if i+1 < len(v) && v[i] == '0' && v[i+1] >= '0' && v[i+1] <= '9' {
		return false
	}
	digits := 0
	for i < len(v) && v[i] >= '0' && v[i] <= '9' {
		i++
		digits++
	}
	if i < len(v) && v[i] == '.' {
		i++
		for i < len(v) && v[i] >= '0' && v[i] <= '9' {
			i++
			digits++
		}
	}
	if digits == 0 {
		return false
	}
	exp := false
	if i < len(v) && (v[i] == 'e' || v[i] == 'E') {
		exp = true
		i++
		if i < len(v) && (v[i] == '+' || v[i] == '-') {
			i++
		}
		ed := 0
		for i < len(v) && v[i] >= '0' && v[i] <= '9' {
			i++
			ed++
		}
		if ed == 0 {
			return false
		}
	}
	if i != len(v) {
		return false
	}
	if exp || digits > 300 {
		// The value could overflow to an infinity, which later parsing
		// rejects: let strconv decide.
		_, err := strconv.ParseFloat(string(v), 64)
		return err == nil
	}
	return true
}

// boolText reports whether v is true or false (also TRUE, True, FALSE,
// False).
func boolText(v []byte) bool {
	switch string(v) {
	case "true", "TRUE", "True", "false", "FALSE", "False":
		return true
	}
	return false
}
