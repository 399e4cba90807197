package csvio

import (
	"strconv"

	"manyfold/io/table"
)

// inferKind returns the kind of the first rows values of c, ignoring
// nulls: int, float or bool when every value has that form (see the
// package doc), text otherwise or when every value is null.
func inferKind(c *colBuf, rows int) table.Kind {
	isInt, isFloat, isBool, seen := true, true, true, false
	for i := 0; i < rows && (isInt || isFloat || isBool); i++ {
		if c.nulls[i] {
			continue
		}
		v := c.value(i)
		seen = true
		if isInt && !intText(v) {
			isInt = false
		}
		if isFloat && (!floatText(v) || bigInt(v)) {
			isFloat = false
		}
		if isBool && !boolText(v) {
			isBool = false
		}
	}
	switch {
	case !seen:
		return table.String
	case isInt:
		return table.Int64
	case isFloat:
		return table.Float64
	case isBool:
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
