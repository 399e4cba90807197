package pipeline

import (
	"fmt"
	"slices"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/internal/param"
)

// Merge combines models loaded from mapping tables fitted with the same
// parameters on shards of one table into the model of the whole table:
// per-level statistics add (colstats.Stats.Merge), and every derived value
// (prior, smoothing weight, frequency, top-k code, hierarchical parents) is
// computed again from the sums. The result equals the tables fitted on the
// whole table when the shards kept every level (--min-level-rows 0), bit
// for bit: a regression target's sums add exactly (the tables carry them,
// encoders/exactsum). minRows applies --min-level-rows to the merged
// tables.
func Merge(models []*Model, names []string, minRows uint64) (*Model, error) {
	base := models[0]
	out := &Model{Spec: base.Spec, Input: base.Input, Task: base.Task, Classes: base.Classes, Pos: base.Pos, Origin: base.Origin}
	out.Spec.MinLevelRows = minRows
	for i, m := range models {
		if err := compatible(base, m); err != nil {
			return nil, &ManifestError{Dir: names[i], Msg: err.Error() + " than " + names[0] + "; only tables fitted with the same parameters merge"}
		}
		if m.Spec.MinLevelRows > 0 {
			return nil, &ManifestError{Dir: names[i], Err: param.Errorf("fitted with %s %d, so its small levels are missing; merge tables fitted with %s 0", ParamMinLevelRows, m.Spec.MinLevelRows, ParamMinLevelRows)}
		}
		out.Rows += m.Rows
		out.Missing += m.Missing
	}
	for ci, bc := range base.Cols {
		supervised := bc.info.Supervised
		task := base.Task
		if !supervised {
			task = colstats.Binary
		}
		st := colstats.New(task, 1, len(base.Classes), bc.St.NumLevels())
		st.Origin = base.Origin // shards' sums are moved to it (Stats.Merge)
		for _, m := range models {
			if err := st.Merge(m.Cols[ci].St); err != nil {
				return nil, err
			}
		}
		st.Seal()
		c := &Col{Name: bc.Name, Kind: bc.Kind, Index: bc.Index, St: st, supervised: supervised}
		prior := base.Spec.prior(ci)
		if prior.Prefix > 0 && supervised {
			c.rollup(prior.Prefix)
		}
		if prior.Column != "" && supervised {
			ps := colstats.New(task, 1, len(base.Classes), 0)
			ps.Origin = base.Origin
			for _, m := range models {
				if err := ps.Merge(m.Cols[ci].Parent.St); err != nil {
					return nil, err
				}
			}
			ps.Seal()
			c.Parent = &Col{Name: prior.Column, St: ps, supervised: true}
			var shards []*Col
			for _, m := range models {
				shards = append(shards, m.Cols[ci])
			}
			st.Parents = mergeNests(st, ps, shards)
			c.nest = st.Parents
		}
		out.derive(ci, c)
		out.Cols = append(out.Cols, c)
	}
	return out, nil
}

// compatible reports how two models' parameters differ, if they do.
func compatible(a, b *Model) error {
	x, y := a.Spec, b.Spec
	switch {
	case !slices.Equal(x.Columns, y.Columns):
		return fmt.Errorf("other columns")
	case x.Target != y.Target || a.Task != b.Task:
		return fmt.Errorf("another target or task")
	case !slices.Equal(a.Classes, b.Classes):
		return fmt.Errorf("other target classes")
	case x.NullsUnseen != y.NullsUnseen:
		return fmt.Errorf("other null handling")
	}
	for i, c := range x.Columns {
		if a, b := method.ListString(x.EncodingsOf(i)), method.ListString(y.EncodingsOf(i)); a != b {
			return fmt.Errorf("other encodings of %q (%s, not %s)", c, b, a)
		}
	}
	return nil
}

// mergeNests returns the parent of every level of the merged statistics st
// (see Stats.Parents), whose parents are ps, from the shards' columns: a
// level's parent is the one all its rows had in every shard, or
// mixedParents when they had several or a shard did not know.
func mergeNests(st, ps *colstats.Stats, shards []*Col) []int32 {
	nest := make([]int32, st.NumLevels())
	for i := range nest {
		nest[i] = noParent
	}
	for _, c := range shards {
		for l := 0; l < c.St.NumLevels(); l++ {
			if c.St.RowCount(l) == 0 {
				continue
			}
			d := 0
			if l > 0 {
				d = st.Level(c.St.Bytes(l))
			}
			p := int32(mixedParents)
			if l < len(c.St.Parents) && c.St.Parents[l] >= 0 {
				pl := int(c.St.Parents[l])
				p = int32(0)
				if pl > 0 {
					p = int32(ps.Level(c.Parent.St.Bytes(pl)))
				}
			}
			switch cur := nest[d]; {
			case cur == noParent:
				nest[d] = p
			case cur != p:
				nest[d] = mixedParents
			}
		}
	}
	for i, p := range nest {
		if p == noParent {
			nest[i] = mixedParents
		}
	}
	return nest
}
