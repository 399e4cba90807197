package method

import "manyfold/encoders/colstats"

// Before is what an encoder of the ordered scheme starts from when it
// encodes a part of the table (a shard of a sharded fit, see package
// pipeline): the statistics of the column's rows in the parts before it.
// St's level bl is the column's slot Slots[bl] (-1 for a level the
// encoder does not know, whose rows are not counted).
type Before struct {
	St    *colstats.Stats
	Slots []int32
}

// A Starter is an Encoder whose values depend on the rows before a row
// (the ordered scheme): Start, called before the first batch, makes it
// encode as if the rows of b had been read first.
type Starter interface {
	Start(b Before)
}

// start adds the rows of every level of b to running statistics; pos is
// a binary target's positive class slot.
func (b Before) start(r *colstats.Running, pos int) {
	for bl, l := range b.Slots {
		if l >= 0 {
			r.Start(int(l), b.St, bl, pos)
		}
	}
}

// boolFloat returns 1 for true, 0 for false.
func boolFloat(b bool) float64 {
	if b {
		return 1
	}
	return 0
}
