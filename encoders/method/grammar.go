package method

import (
	"fmt"
	"strconv"
	"strings"
)

// The grammar of an encoding is METHOD[:PARAM]...: a registered method's
// name, then its parameters, each after a ':'. A list of encodings joins
// them with '+' (target:eb+freq). A plan gives every column the same list
// (target:eb+freq) or each column its own, COLUMN=LIST joined by ','
// (dest_postcode=target:eb+freq,parcel_type=topk:6). A ',' inside a
// parameter (blend=20,10) is followed by a number, which tells it apart.

// Error is a mistake in an encoding's text.
type Error struct {
	Text string // the encoding or list as given
	Msg  string
}

func (e *Error) Error() string { return fmt.Sprintf("encoding %q: %s", e.Text, e.Msg) }

func errorf(text, format string, a ...any) error {
	return &Error{Text: text, Msg: fmt.Sprintf(format, a...)}
}

// Parse parses one encoding.
func Parse(s string) (Encoding, error) {
	fields := strings.Split(strings.TrimSpace(s), ":")
	m, ok := Lookup(fields[0])
	if !ok {
		return nil, errorf(s, "unknown method %q (want one of %s)", fields[0], strings.Join(Names(), ", "))
	}
	e, err := m.Parse(fields[1:])
	if err != nil {
		return nil, errorf(s, "%v", err)
	}
	return e, nil
}

// ParseList parses encodings joined by '+' (or ','), each method at most
// once: two encodings of one method would write columns of the same name.
func ParseList(s string) ([]Encoding, error) {
	var out []Encoding
	for _, part := range splitList(s, "+,") {
		e, err := Parse(part)
		if err != nil {
			return nil, err
		}
		for _, d := range out {
			if d.Method() == e.Method() {
				return nil, errorf(s, "%s is listed twice (%s, %s); one encoding per method and column", e.Method().Name(), d, e)
			}
		}
		out = append(out, e)
	}
	if len(out) == 0 {
		return nil, errorf(s, "no encoding")
	}
	return out, nil
}

// ColumnEncodings is the list of encodings of one column.
type ColumnEncodings struct {
	Column    string
	Encodings []Encoding
}

// Plan is what a run encodes: one list for every column (All), or a list
// per column (PerColumn).
type Plan struct {
	All       []Encoding
	PerColumn []ColumnEncodings
}

// ParsePlan parses a list of encodings for every column, or per-column
// lists COLUMN=LIST joined by ','.
func ParsePlan(s string) (Plan, error) {
	pieces := splitList(s, ",")
	if len(pieces) == 0 {
		return Plan{}, errorf(s, "no encoding")
	}
	var p Plan
	per := 0
	for _, piece := range pieces {
		if _, _, ok := columnPart(piece); ok {
			per++
		}
	}
	switch {
	case per == 0:
		all, err := ParseList(s)
		if err != nil {
			return Plan{}, err
		}
		p.All = all
	case per < len(pieces):
		return Plan{}, errorf(s, "give every column as COLUMN=LIST, or one list for all columns, not both")
	default:
		seen := map[string]bool{}
		for _, piece := range pieces {
			col, list, _ := columnPart(piece)
			if seen[col] {
				return Plan{}, errorf(s, "column %q is named twice", col)
			}
			seen[col] = true
			encs, err := ParseList(list)
			if err != nil {
				return Plan{}, err
			}
			p.PerColumn = append(p.PerColumn, ColumnEncodings{Column: col, Encodings: encs})
		}
	}
	return p, nil
}

// columnPart splits COLUMN=LIST: a '=' before the first ':' and '+', with a
// column name before it that is not a method's name.
func columnPart(piece string) (col, list string, ok bool) {
	eq := strings.IndexByte(piece, '=')
	if eq <= 0 {
		return "", "", false
	}
	if c := strings.IndexAny(piece, ":+"); c >= 0 && c < eq {
		return "", "", false
	}
	return strings.TrimSpace(piece[:eq]), piece[eq+1:], true
}

// splitList splits s at the separators seps, keeping a ',' that is followed
// by a number (the second number of blend=K,F) inside its piece.
func splitList(s string, seps string) []string {
	var out []string
	start := 0
	for i := 0; i < len(s); i++ {
		if !strings.ContainsRune(seps, rune(s[i])) {
			continue
		}
		if s[i] == ',' && continuesNumber(s[i+1:]) {
			continue
		}
		if p := strings.TrimSpace(s[start:i]); p != "" {
			out = append(out, p)
		}
		start = i + 1
	}
	if p := strings.TrimSpace(s[start:]); p != "" {
		out = append(out, p)
	}
	return out
}

// continuesNumber reports whether rest starts with a number (up to the
// next ':', '+' or ',').
func continuesNumber(rest string) bool {
	end := strings.IndexAny(rest, ":+,")
	if end < 0 {
		end = len(rest)
	}
	_, err := strconv.ParseFloat(strings.TrimSpace(rest[:end]), 64)
	return err == nil
}

// ListString returns the canonical text of a list of encodings.
func ListString(encs []Encoding) string {
	parts := make([]string, len(encs))
	for i, e := range encs {
		parts[i] = e.String()
	}
	return strings.Join(parts, "+")
}

// String returns the canonical text of the plan, which ParsePlan reads
// back.
func (p Plan) String() string {
	if p.PerColumn == nil {
		return ListString(p.All)
	}
	parts := make([]string, len(p.PerColumn))
	for i, c := range p.PerColumn {
		parts[i] = c.Column + "=" + ListString(c.Encodings)
	}
	return strings.Join(parts, ",")
}

// formatFloat prints a parameter the way the grammar reads it.
func formatFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// parseUint parses a whole-number parameter within [lo, hi].
func parseUint(name, s string, lo, hi uint64) (uint64, error) {
	v, err := strconv.ParseUint(s, 10, 64)
	if err != nil || v < lo || v > hi {
		return 0, fmt.Errorf("%s %q: want a whole number from %d to %d", name, s, lo, hi)
	}
	return v, nil
}

// SplitCandidates splits a comma-separated list of encoding lists (each
// joined by '+'), keeping the comma of blend=K,F inside its piece.
func SplitCandidates(s string) []string { return splitList(s, ",") }

// noRepeats refuses a parameter given twice (by its name, the part before
// '=').
func noRepeats(args []string) error {
	seen := map[string]bool{}
	for _, a := range args {
		name, _, _ := strings.Cut(a, "=")
		if seen[name] {
			return fmt.Errorf("parameter %q is given twice", name)
		}
		seen[name] = true
	}
	return nil
}
