package pipeline

import (
	"fmt"
	"sort"

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
		p.Suggest, p.Reason = suggest(&p)
		out[i] = p
	}
	return out, nil
}

// suggest applies the rule the README states, first match wins:
//  1. no level or a single one: drop (empty or constant);
//  2. every non-null row has a level of its own: an identifier; no
//     per-level statistic reaches new rows, so drop it, or use a
//     hierarchical prior if its prefixes mean something;
//  3. a numeric column with more than 1000 levels: a measurement, not a
//     category: use it as a number;
//  4. at most 30 levels: a code each (topk with k = the level count;
//     onehot for a linear model);
//  5. the top 100 levels cover at least 95% of rows: topk:100;
//  6. at least half the levels are seen once: target mean with strong
//     smoothing plus freq (the frequency tells rare from common);
//  7. otherwise: target mean (out of fold, smoothed) plus freq.
func suggest(p *Profile) (string, string) {
	nonNull := p.Rows - p.Nulls
	switch {
	case p.Distinct == 0:
		return "drop", "the column holds no values"
	case p.Distinct == 1:
		return "drop", "a single level carries no information"
	case int64(p.Distinct) == nonNull:
		return "drop", "every row has its own level (an identifier): no statistic of a level reaches new rows; if its prefixes form a hierarchy, try target:eb:prior=prefixN"
	case p.Type != "text" && p.Distinct > 1000:
		return "numeric", fmt.Sprintf("a %s column with %d distinct values is a measurement: use it as a number", p.Type, p.Distinct)
	case p.Distinct <= 30:
		return fmt.Sprintf("topk:%d", p.Distinct), fmt.Sprintf("%d levels: one code each (onehot:%d for a linear model)", p.Distinct, p.Distinct)
	case p.Cover100 >= 0.95:
		k := min(100, p.Distinct)
		if k < 100 {
			return fmt.Sprintf("topk:%d", k), fmt.Sprintf("%d levels: one code each", k)
		}
		return "topk:100", fmt.Sprintf("the top 100 levels cover %.1f%% of rows; the rest share the other code", 100*p.Cover100)
	case p.SeenOnce >= 0.5:
		return "target:eb+freq", fmt.Sprintf("%.0f%% of levels are seen once: smoothed out-of-fold target mean, with the frequency to tell rare levels from common ones", 100*p.SeenOnce)
	}
	return "target:eb+freq", fmt.Sprintf("%d levels with repeats: smoothed out-of-fold target mean plus frequency", p.Distinct)
}

// SuggestedPlan returns the per-column plan of the profiles whose
// suggestion is an encoding (not drop or numeric), leaving out the target.
func SuggestedPlan(ps []Profile, target string) method.Plan {
	var plan method.Plan
	for _, p := range ps {
		if p.Name == target {
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
