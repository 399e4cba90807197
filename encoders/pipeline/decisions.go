package pipeline

import (
	"strconv"

	"manyfold/encoders/colstats"
)

// ClassRows is one class of a classification target as the fit counted
// it, for the commands' summaries (encode's summary line and --json).
type ClassRows struct {
	Class string  `json:"class"`
	Rows  int64   `json:"rows"`  // rows of the class
	Share float64 `json:"share"` // of the rows whose target is known
	// Stray flags a class that is perhaps a stray value that turned a
	// binary target into a multi-class one: of a target of three classes
	// or more, a class of fewer than strayRows rows or under strayShare
	// of the rows, with at most 1/strayRatio of the largest class's rows.
	// Of a binary target no class is flagged (a rare positive class is
	// what many binary targets have), nor are classes all alike small (a
	// small table).
	Stray bool `json:"stray"`
}

// The bounds under which a class is flagged as perhaps a stray value.
const (
	strayRows  = 10
	strayShare = 0.001
	strayRatio = 20
)

// TargetUsed reports whether the fit read the target: a target is named
// and an encoding or the fold rule reads it.
func (m *Model) TargetUsed() bool {
	return m.Spec.Target != "" && (m.supervised() || m.Spec.FoldBy.Needs().Class)
}

// TargetClasses returns each class of a classification target with its
// rows among those whose target is known, in the order of m.Classes (the
// positive class of a binary target is m.Pos). It returns nil for a
// regression target, without a target, and when no encoded column's
// statistics hold the target (a stratified fold rule alone reads it).
func (m *Model) TargetClasses() []ClassRows {
	if !m.TargetUsed() || m.Task == colstats.Regression {
		return nil
	}
	var counts []uint64
	for _, c := range m.Cols {
		if c.supervised {
			tot := c.St.CellTotals()
			counts = make([]uint64, c.St.Classes)
			for i, n := range tot {
				counts[i%c.St.Classes] += n
			}
			break
		}
	}
	if counts == nil || len(counts) != len(m.Classes) {
		return nil
	}
	var all, most uint64
	for _, n := range counts {
		all += n
		most = max(most, n)
	}
	out := make([]ClassRows, len(counts))
	for i, n := range counts {
		small := n < strayRows || float64(n) < strayShare*float64(all)
		stray := len(counts) > 2 && small && n*strayRatio <= most
		out[i] = ClassRows{Class: m.Classes[i], Rows: int64(n), Stray: stray}
		if all > 0 {
			out[i].Share = float64(n) / float64(all)
		}
	}
	return out
}

// EncodingOutputs returns the names of the output columns that encoding
// ei of column ci writes, in output order.
func (m *Model) EncodingOutputs(ci, ei int) []string {
	c := m.Cols[ci]
	var out []string
	for _, o := range c.Fits[ei].Outputs() {
		out = append(out, outputName(c, o.Name))
	}
	return out
}

// outputName is the name of an encoded column: the input column's name,
// "_" and the encoding's suffix.
func outputName(c *Col, suffix string) string { return c.Name + "_" + suffix }

// plural writes n and noun, in the plural unless n is 1: "1 row", "3 rows".
func plural(n int64, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return strconv.FormatInt(n, 10) + " " + noun + "s"
}
