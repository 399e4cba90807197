package colstats

// Collapse returns the statistics of the rows of some folds, regrouped:
// fold f of s becomes fold group[f] of the result, which has k folds, and
// the rows of a fold with group[f] < 0 are left out, as are rows whose
// target is unknown (they have no fold). Levels keep their slots: the
// level table is shared, and must not change while the result is used.
//
// compare keeps its outer and inner folds as the cells of one Stats; the
// view of outer fold f groups its training cells by inner fold, so that
// the methods fit it as they fit k folds (a training row of inner fold g
// from the groups other than g, a held-out row from all). Each group's
// sums are added in fold order, so the result does not depend on anything
// but s and group. A regression target's sums are s's rounded ones (s
// must be sealed), added in floating point: the result has no exact sums.
func (s *Stats) Collapse(group []int, k int) *Stats {
	c := &Stats{Task: s.Task, Folds: k, Classes: s.Classes, Levels: s.Levels, Origin: s.Origin, sealed: s.Task == Regression}
	c.grow(s.n)
	for l := 0; l < s.n; l++ {
		if s.Task == Regression {
			oc, os, oq := s.cnt.row(l), s.sum.row(l), s.sumSq.row(l)
			dc, ds, dq := c.cnt.row(l), c.sum.row(l), c.sumSq.row(l)
			var rows uint64
			for f := 0; f < s.Folds; f++ {
				if g := group[f]; g >= 0 {
					dc[g] += oc[f]
					ds[g] += os[f]
					dq[g] += oq[f]
					rows += uint64(oc[f])
				}
			}
			c.rows.set(l, rows)
			continue
		}
		for f := 0; f < s.Folds; f++ {
			g := group[f]
			if g < 0 {
				continue
			}
			for cl := 0; cl < s.Classes; cl++ {
				if v := s.cls.get(l, f*s.Classes+cl); v > 0 {
					c.cls.add(l, g*s.Classes+cl, v)
				}
			}
		}
	}
	return c
}
