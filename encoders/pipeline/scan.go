package pipeline

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/io/table"
)

// Profile describes one column of a scanned table.
type Profile struct {
	Name      string       `json:"name"`
	Type      string       `json:"type"`
	Rows      int64        `json:"rows"`
	Nulls     int64        `json:"nulls"`
	Distinct  int          `json:"distinct"`
	Top       []LevelCount `json:"top"`
	SeenOnce  float64      `json:"share_levels_seen_once"`
	RowsOnce  float64      `json:"share_rows_level_seen_once"`
	Cover10   float64      `json:"share_rows_top_10"`
	Cover100  float64      `json:"share_rows_top_100"`
	Cover1000 float64      `json:"share_rows_top_1000"`
	Suggest   string       `json:"suggested"` // an encoding list in encode's grammar, or drop, or numeric
	Reason    string       `json:"reason"`
}

// LevelCount is a level with its row count and share of rows.
type LevelCount struct {
	Level string  `json:"level"`
	Rows  uint64  `json:"rows"`
	Share float64 `json:"share"`
}

// Scan reads every batch of r and profiles the columns at positions cols:
// exact distinct counts (memory grows with the distinct levels, not the
// rows), the top levels, the share of levels seen once, the share of rows
// the top 10, 100 and 1000 levels cover, and a suggested encoding. Nulls are
// counted apart and are not a level here.
func Scan(r table.Reader, cols []int, top int, progress func(int64)) ([]Profile, error) {
	schema := r.Schema()
	sts := make([]*colstats.Stats, len(cols))
	slots := make([]levelSlots, len(cols))
	for i, c := range cols {
		sts[i] = colstats.New(colstats.Binary, 1, 0, 1024)
		slots[i] = levelSlots{col: c}
	}
	var rows int64
	if err := table.ForEach(r, func(b *table.Batch) error {
		for i := range cols {
			for _, l := range slots[i].fill(b, sts[i], true) {
				sts[i].AddRow(int(l))
			}
		}
		rows += int64(b.Rows)
		if progress != nil {
			progress(rows)
		}
		return nil
	}); err != nil {
		return nil, err
	}
	out := make([]Profile, len(cols))
	for i, c := range cols {
		st := sts[i]
		p := Profile{Name: schema.Fields[c].Name, Type: schema.Fields[c].Kind.String(), Rows: rows, Nulls: int64(st.RowCount(0)), Distinct: st.Levels.Len()}
		counts := make([]int, 0, p.Distinct)
		once := 0
		for l := 1; l < st.NumLevels(); l++ {
			counts = append(counts, l)
			if st.RowCount(l) == 1 {
				once++
			}
		}
		sort.Slice(counts, func(a, b int) bool {
			x, y := counts[a], counts[b]
			if st.RowCount(x) != st.RowCount(y) {
				return st.RowCount(x) > st.RowCount(y)
			}
			return string(st.Bytes(x)) < string(st.Bytes(y))
		})
		nonNull := float64(rows - p.Nulls)
		var cum uint64
		for r, l := range counts {
			cum += st.RowCount(l)
			if r < top {
				p.Top = append(p.Top, LevelCount{Level: string(st.Bytes(l)), Rows: st.RowCount(l), Share: float64(st.RowCount(l)) / float64(rows)})
			}
			switch r + 1 {
			case 10:
				p.Cover10 = float64(cum) / nonNull
			case 100:
				p.Cover100 = float64(cum) / nonNull
			case 1000:
				p.Cover1000 = float64(cum) / nonNull
			}
		}
		if nonNull > 0 {
			full := float64(cum) / nonNull
			if len(counts) < 10 {
				p.Cover10 = full
			}
			if len(counts) < 100 {
				p.Cover100 = full
			}
			if len(counts) < 1000 {
				p.Cover1000 = full
			}
		}
		if p.Distinct > 0 {
			p.SeenOnce = float64(once) / float64(p.Distinct)
		}
		if nonNull > 0 {
			p.RowsOnce = float64(once) / nonNull
		}
		p.Suggest, p.Reason = suggest(&p, levelValues(st, schema.Fields[c].Kind))
		out[i] = p
	}
	return out, nil
}

// levelShape is what suggest needs to know of a column's levels beyond
// their counts: for a numeric column, its values' signs and fractions and
// how alike the row counts of neighbouring values are; for a text column,
// whether every level is a date or a time.
type levelShape struct {
	numeric  bool    // an int or float column
	negative bool    // a value below zero
	fraction bool    // a finite value that is not a whole number
	pairs    int     // neighbouring pairs of distinct finite values
	rough    float64 // mean |ln c(v_i+1) - ln c(v_i)| over neighbouring values
	far      float64 // the same over values half the levels apart
	times    bool    // text: every level is an ISO 8601 date or date and time
}

// levelValues reads the shape of a scanned column's levels (once per
// distinct level, after the pass).
func levelValues(st *colstats.Stats, kind table.Kind) levelShape {
	var sh levelShape
	switch kind {
	case table.Int64, table.Float64:
		sh.numeric = true
		type vc struct {
			v float64
			c uint64
		}
		vals := make([]vc, 0, st.NumLevels())
		for l := 1; l < st.NumLevels(); l++ {
			v, err := strconv.ParseFloat(string(st.Bytes(l)), 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				continue
			}
			sh.negative = sh.negative || v < 0
			sh.fraction = sh.fraction || v != math.Trunc(v)
			vals = append(vals, vc{v, st.RowCount(l)})
		}
		sort.Slice(vals, func(a, b int) bool { return vals[a].v < vals[b].v })
		n := len(vals)
		if n < 3 {
			return sh
		}
		lc := func(i int) float64 { return math.Log(float64(vals[i].c)) }
		for i := 0; i+1 < n; i++ {
			sh.rough += math.Abs(lc(i+1) - lc(i))
		}
		sh.pairs = n - 1
		sh.rough /= float64(n - 1)
		h := n / 2
		for i := 0; i+h < n; i++ {
			sh.far += math.Abs(lc(i+h) - lc(i))
		}
		sh.far /= float64(n - h)
	case table.String:
		sh.times = st.NumLevels() > 1
		for l := 1; l < st.NumLevels() && sh.times; l++ {
			sh.times = isDateTime(st.Bytes(l))
		}
	}
	return sh
}

// smooth reports whether neighbouring values have row counts far more
// alike than values half the levels apart: the smooth distribution of a
// measurement (a delay, a weight, a count of items), where codes (store or
// region numbers) have counts that do not depend on their neighbours. Our
// own rule: the mean log-count step between neighbours at most half the
// step between values n/2 apart, over at least 20 neighbouring pairs.
func (sh levelShape) smooth() bool {
	return sh.pairs >= 20 && sh.far > 0 && sh.rough <= sh.far/2
}

// isDateTime reports whether b is an ISO 8601 date (2026-12-04), possibly
// followed by T or a space and a time of at least hours and minutes
// (2026-12-04T17:58, 2026-12-04 17:58:01.5Z), as Parquet and Arrow dates
// and timestamps are read.
func isDateTime(b []byte) bool {
	digits := func(s []byte) bool {
		for _, c := range s {
			if c < '0' || c > '9' {
				return false
			}
		}
		return true
	}
	if len(b) < 10 || !digits(b[0:4]) || b[4] != '-' || !digits(b[5:7]) || b[7] != '-' || !digits(b[8:10]) {
		return false
	}
	if len(b) == 10 {
		return true
	}
	return len(b) >= 16 && (b[10] == 'T' || b[10] == ' ') && digits(b[11:13]) && b[13] == ':' && digits(b[14:16])
}

// suggest applies the rule the README states, first match wins:
//  1. no level or a single one: drop (empty or constant);
//  2. a numeric column of more than two levels with fractional values or
//     values below zero: a quantity, not a code: use it as a number;
//  3. text levels that are all dates or times, more than 30 of them: a
//     moment is not a category (time);
//  4. at least 99% of the non-null rows have a level seen once: an
//     identifier; no per-level statistic reaches new rows, so drop it, or
//     use a hierarchical prior if its prefixes mean something;
//  5. a numeric column of more than 1000 levels: a measurement: a number;
//  6. a numeric column of more than 30 levels whose neighbouring values
//     have alike row counts (levelShape.smooth): a measurement: a number;
//  7. at most 30 levels: a code each (topk with k = the level count;
//     onehot for a linear model);
//  8. the top 100 levels cover at least 95% of rows: topk:100;
//  9. at least half the levels are seen once: target mean with strong
//     smoothing plus freq (the frequency tells rare from common);
//  10. otherwise: target mean (out of fold, smoothed) plus freq.
//
// The reasons hold no parentheses, so that a printer may wrap them in its
// own.
func suggest(p *Profile, sh levelShape) (string, string) {
	nonNull := p.Rows - p.Nulls
	kind := "a " + p.Type
	if p.Type == "int" {
		kind = "an int"
	}
	switch {
	case p.Distinct == 0:
		return "drop", "the column holds no values"
	case p.Distinct == 1:
		return "drop", "a single level carries no information"
	case sh.numeric && p.Distinct > 2 && sh.fraction:
		return "numeric", fmt.Sprintf("%s column with fractional values is a quantity, not a code: use it as a number", kind)
	case sh.numeric && p.Distinct > 2 && sh.negative:
		return "numeric", fmt.Sprintf("%s column with values below zero is a quantity, not a code: use it as a number", kind)
	case sh.times && p.Distinct > 30:
		return "time", fmt.Sprintf("%d distinct dates or times: a moment is not a category, and new rows bring new ones; sort the rows by it for ordered folds, or derive its parts as columns", p.Distinct)
	case int64(p.Distinct) == nonNull:
		return "drop", "every row has a level of its own, an identifier: no statistic of a level reaches new rows; if its prefixes form a hierarchy, try target:eb:prior=prefixN"
	case p.RowsOnce >= 0.99:
		return "drop", fmt.Sprintf("%.1f%% of rows have a level seen once, an identifier: no statistic of a level reaches new rows; if its prefixes form a hierarchy, try target:eb:prior=prefixN", 100*p.RowsOnce)
	case sh.numeric && p.Distinct > 1000:
		return "numeric", fmt.Sprintf("%s column with %d distinct values is a measurement: use it as a number", kind, p.Distinct)
	case sh.numeric && p.Distinct > 30 && sh.smooth():
		return "numeric", fmt.Sprintf("%s column whose neighbouring values have alike row counts, as a measurement's do: use it as a number", kind)
	case p.Distinct <= 30:
		why := fmt.Sprintf("%d levels: one code each; onehot:%d for a linear model", p.Distinct, p.Distinct)
		if sh.numeric {
			why += "; if the values are amounts, use the column as a number instead"
		}
		return fmt.Sprintf("topk:%d", p.Distinct), why
	case p.Cover100 >= 0.95 && p.Distinct < 100:
		return fmt.Sprintf("topk:%d", p.Distinct), fmt.Sprintf("%d levels: one code each", p.Distinct)
	case p.Cover100 >= 0.95:
		return "topk:100", fmt.Sprintf("the top 100 levels cover %.1f%% of rows; the rest share the other code", 100*p.Cover100)
	case p.SeenOnce >= 0.5:
		return "target:eb+freq", fmt.Sprintf("%.0f%% of levels are seen once: smoothed out-of-fold target mean, with the frequency to tell rare levels from common ones", 100*p.SeenOnce)
	}
	return "target:eb+freq", fmt.Sprintf("%d levels with repeats: smoothed out-of-fold target mean plus frequency", p.Distinct)
}

// MarkTarget gives the profile of the target column the suggestion
// "target": it is what the encodings predict, not a column to encode. The
// columns a derived target is computed from (delay of delay>15) are
// marked too: encoding them would hand the model its own label.
func MarkTarget(ps []Profile, target string, sources ...string) {
	for i := range ps {
		switch {
		case target != "" && ps[i].Name == target:
			ps[i].Suggest, ps[i].Reason = "target", "the target column: the encodings of the other columns predict it"
		case slices.Contains(sources, ps[i].Name):
			ps[i].Suggest, ps[i].Reason = "target", "the column the target "+target+" is computed from: encoding it would leak the label"
		}
	}
}

// SuggestedPlan returns the per-column plan of the profiles whose
// suggestion is an encoding (not drop or numeric), leaving out the target.
func SuggestedPlan(ps []Profile, target string) method.Plan {
	var plan method.Plan
	for _, p := range ps {
		if p.Name == target || p.Suggest == "target" {
			continue
		}
		encs, err := method.ParseList(p.Suggest)
		if err != nil {
			continue // drop, numeric
		}
		plan.PerColumn = append(plan.PerColumn, method.ColumnEncodings{Column: p.Name, Encodings: encs})
	}
	return plan
}
