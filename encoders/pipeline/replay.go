package pipeline

// replay records, during the fit, the level slot of every row of a column
// whose levels are nearly all distinct (an id), so that the encode pass over
// the same table gets the slots back in file order without hashing and
// looking up each value again, and visits the level statistics in slot
// order, not at random.
//
// New levels get slots in the order they first appear, so a row whose
// level is new at that row has the slot after the last new one: one bit
// records it. Only the rows whose level was seen before keep their slot.
// The record is dropped as soon as those rows pass a sixteenth of the rows
// read, so it never holds more than about 0.4 bytes a row, and the rows are
// then at least fifteen sixteenths levels: its memory stays a small part of
// the level table's, and grows with the levels, not the rows.
type replay struct {
	rows  int64    // rows recorded
	first int32    // the slot the first new level got
	next  int32    // the slot the next new level gets
	isNew []uint64 // bit r: row r's level was new at that row
	seen  []int32  // the slots of the other rows, in row order
}

// replayMinRows is how many rows a column is recorded for before its
// record may be dropped for holding too many repeated levels.
const replayMinRows = 1 << 16

// newReplay starts a record whose first new level gets slot next.
func newReplay(next int) *replay { return &replay{first: int32(next), next: int32(next)} }

// record appends the slots of a batch's rows. It returns false, and the
// record should be dropped, when too many rows repeat a level.
func (r *replay) record(slots []int32) bool {
	for _, s := range slots {
		w, bit := r.rows>>6, uint(r.rows&63)
		if int(w) == len(r.isNew) {
			r.isNew = append(r.isNew, 0)
		}
		if s == r.next {
			r.isNew[w] |= 1 << bit
			r.next++
		} else {
			r.seen = append(r.seen, s)
		}
		r.rows++
	}
	return r.rows < replayMinRows || int64(len(r.seen))*16 <= r.rows
}

// cursor walks a record from its first row.
type cursor struct {
	r    *replay
	row  int64
	next int32
	seen int
}

// start returns a cursor at the first row.
func (r *replay) start() *cursor { return &cursor{r: r, next: r.first} }

// has says whether the record holds the next n rows.
func (c *cursor) has(n int) bool { return c.row+int64(n) <= c.r.rows }

// fill writes the slots of the next len(dst) rows to dst. It returns false
// if the record holds fewer rows.
func (c *cursor) fill(dst []int32) bool {
	r := c.r
	if !c.has(len(dst)) {
		return false
	}
	for i := range dst {
		if r.isNew[c.row>>6]&(1<<uint(c.row&63)) != 0 {
			dst[i] = c.next
			c.next++
		} else {
			dst[i] = r.seen[c.seen]
			c.seen++
		}
		c.row++
	}
	return true
}
