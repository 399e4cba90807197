package pipeline

import (
	"math"

	"manyfold/io/table"
)

// TaskRows is the number of rows, from the top of the input, whose target
// decides the task when the user gives none (TaskProbe).
const TaskRows = 65536

// maxClassValues is the most distinct integer values a numeric target may
// show in its first TaskRows rows and still be read as class labels.
const maxClassValues = 10

// TaskProbe decides the task of a target the user gave no task for, from
// its first TaskRows rows, whatever batches or shards carry them:
//
//   - a text or boolean target is a classification target;
//   - a numeric target is a regression target when one of those rows holds
//     a number that is not an integer, or when they hold more than 10
//     distinct integers; otherwise it is a classification target.
//
// Empty, NaN and infinite values count as rows but not as values. The
// rows after the first value that does not read as a number (text in a
// column read as numeric) are not looked at: that value makes the target a
// classification target unless the rows before it made it a regression
// target. (A rule of common practice in tabular tools: few distinct
// integers are labels, anything else a quantity.)
//
// A probe is a pure function of the values of those rows: the probe of a
// table equals the probes of its shards appended in order (Append), so a
// sharded fit decides as the one pass over the whole does. Its fields are
// exported for the shard facts that carry it between processes; row
// numbers count from 1, 0 meaning none.
type TaskProbe struct {
	Rows int64     // rows looked at, at most TaskRows
	Frac int64     // row of the first number that is not an integer
	Stop int64     // row of the first value that does not read as a number
	Ints []float64 // distinct integers, in order of first appearance (at most 11)
	At   []int64   // row of each one's first appearance
}

// Decided reports whether more rows would not change the task.
func (p *TaskProbe) Decided() bool {
	return p.Regression() || p.Stop > 0 || p.Rows >= TaskRows
}

// Regression reports whether the rows looked at make the target a
// regression target.
func (p *TaskProbe) Regression() bool { return p.Frac > 0 || len(p.Ints) > maxClassValues }

// Add looks at the rows of b, the next batch of the table, in the column
// at position col of kind kind, until the task is decided.
func (p *TaskProbe) Add(b *table.Batch, col int, kind table.Kind) {
	if p.Decided() || b.Rows == 0 {
		return
	}
	if kind == table.String || kind == table.Bool {
		p.Rows++
		p.Stop = p.Rows
		return
	}
	c := &b.Cols[col]
	for i := 0; i < b.Rows && p.Rows < TaskRows; i++ {
		p.Rows++
		v, ok, err := c.Float(i)
		switch {
		case err != nil:
			p.Stop = p.Rows
			return
		case !ok || math.IsNaN(v) || math.IsInf(v, 0):
			continue
		case v != math.Trunc(v):
			p.Frac = p.Rows
			return
		}
		if p.addInt(v, p.Rows) {
			return
		}
	}
}

// addInt records v, met at row, unless it was met before; it reports
// whether that makes the target a regression target.
func (p *TaskProbe) addInt(v float64, row int64) bool {
	for _, w := range p.Ints {
		if w == v {
			return false
		}
	}
	p.Ints, p.At = append(p.Ints, v), append(p.At, row)
	if p.Regression() {
		p.Rows = row
		return true
	}
	return false
}

// Append makes p the probe of p's rows followed by q's: the rows of the
// next shard. What q found beyond TaskRows rows of the two together is
// passed over.
func (p *TaskProbe) Append(q TaskProbe) {
	if p.Decided() || q.Rows == 0 {
		return
	}
	off := p.Rows
	for j, v := range q.Ints {
		if j >= len(q.At) || off+q.At[j] > TaskRows {
			break
		}
		if p.addInt(v, off+q.At[j]) {
			return
		}
	}
	switch {
	case q.Frac > 0 && off+q.Frac <= TaskRows:
		p.Frac, p.Rows = off+q.Frac, off+q.Frac
	case q.Stop > 0 && off+q.Stop <= TaskRows:
		p.Stop, p.Rows = off+q.Stop, off+q.Stop
	default:
		p.Rows = min(TaskRows, off+q.Rows)
	}
}

// probeReader reads the batches of a table ahead until its task is
// decided, then gives them again in order, followed by the rest of the
// table. An error of the reader met ahead is returned after the batches
// before it, where a plain read would return it.
type probeReader struct {
	table.Reader
	kept []*table.Batch
	held *table.Batch // the last batch read ahead, not copied
	err  error
}

// probeTask decides the task of the target at position col (of kind kind)
// of r's batches (TaskProbe) and returns a reader that gives r's batches
// from the first. Only the batches read before the decision are kept, as
// copies: a table whose first batch holds TaskRows rows, or a fraction or
// an 11th integer, keeps none; at most TaskRows rows are kept (a numeric
// classification target read in smaller batches: small row groups, or a
// dataset of small files).
func probeTask(r table.Reader, col int, kind table.Kind) (*TaskProbe, table.Reader) {
	p := &TaskProbe{}
	pr := &probeReader{Reader: r}
	for !p.Decided() {
		if pr.held != nil {
			c := &table.Batch{}
			table.CopyBatch(c, pr.held)
			pr.kept[len(pr.kept)-1] = c
			pr.held = nil
		}
		b, err := r.Next()
		if err != nil {
			pr.err = err // io.EOF too: r is not read again
			break
		}
		p.Add(b, col, kind)
		pr.kept = append(pr.kept, b)
		pr.held = b
	}
	return p, pr
}

func (pr *probeReader) Next() (*table.Batch, error) {
	if len(pr.kept) > 0 {
		b := pr.kept[0]
		pr.kept[0] = nil
		pr.kept = pr.kept[1:]
		return b, nil
	}
	if pr.err != nil {
		return nil, pr.err
	}
	return pr.Reader.Next()
}

// Unwrap returns the reader read ahead, for inspection only.
func (pr *probeReader) Unwrap() table.Reader { return pr.Reader }
