package main

import (
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"time"

	"manyfold/internal/evaluate/compare"
	"manyfold/io/table"
)

// progress draws one line on standard error, redrawn in place at most ten
// times a second, when standard error is a terminal, and nothing
// otherwise: the phase, the rows done and, when the input tells how far
// through it the run is, the share done and the time left at the rate so
// far. A Parquet input knows its rows (table.RowCounter); a CSV file its
// size and the bytes read of it (table.InputCounter); standard input and
// Arrow show the rows and the rate only.
type progress struct {
	w     io.Writer
	on    bool
	label string
	width int // the terminal's columns; 0 when not known
	now   func() time.Time
	start time.Time
	last  time.Time
	drawn bool
	model int                // compare's column in the model phase, from 1; 0 before
	total int64              // rows of the input; 0 when not known
	input table.InputCounter // bytes read of the input's size; nil when not known
}

// progressEvery is the least time between two redraws.
const progressEvery = 100 * time.Millisecond

// newProgress returns the progress line of a phase (label) that reads r,
// drawn on standard error when it is a terminal; r may be nil.
func newProgress(label string, r table.Reader) *progress {
	on := isTerminal(os.Stderr) && os.Getenv("TERM") != "dumb"
	p := startProgress(os.Stderr, on, label, r, time.Now)
	if on {
		p.width = terminalWidth(os.Stderr)
	}
	return p
}

// startProgress returns the progress line of a phase reading r, written
// to w when on, timed by now.
func startProgress(w io.Writer, on bool, label string, r table.Reader, now func() time.Time) *progress {
	p := &progress{w: w, on: on, label: label, now: now, start: now()}
	if r == nil || !on {
		return p
	}
	if p.total = table.RowCount(r); p.total > 0 {
		return p
	}
	if ic, ok := table.Find[table.InputCounter](r); ok {
		if _, size := ic.InputBytes(); size > 0 {
			p.input = ic
		}
	}
	return p
}

// update is the phase's Progress callback: rows read so far.
func (p *progress) update(rows int64) {
	if !p.due() {
		return
	}
	var read, size int64
	if p.input != nil {
		read, size = p.input.InputBytes()
	}
	p.draw(rowsLine(p.label, rows, p.total, read, size, p.now().Sub(p.start)))
}

// models is compare's Options.Models callback: the model phase, which
// starts with its first call; the first call of each column is drawn
// whatever the time since the last.
func (p *progress) models(s compare.ModelStep) {
	if !p.on {
		return
	}
	if s.ModelsDone == 0 && s.ColumnNum == 1 {
		p.start = p.now()
	}
	if s.ColumnNum != p.model { // a new column is always shown
		p.model, p.last = s.ColumnNum, time.Time{}
	}
	if !p.due() {
		return
	}
	p.draw(modelsLine(p.label, s, p.now().Sub(p.start)))
}

// due reports whether the line should be drawn now, and if so notes the
// time.
func (p *progress) due() bool {
	if !p.on {
		return false
	}
	t := p.now()
	if !p.last.IsZero() && t.Sub(p.last) < progressEvery {
		return false
	}
	p.last = t
	return true
}

// draw writes line over the previous one, cut to the terminal's width so
// that it never wraps (a wrapped line could not be redrawn in place).
func (p *progress) draw(line string) {
	if p.width > 1 && len(line) > p.width-1 {
		line = line[:p.width-1]
	}
	fmt.Fprint(p.w, "\r"+line+"\033[K")
	p.drawn = true
}

// done clears the line, if one was drawn.
func (p *progress) done() {
	if p.drawn {
		fmt.Fprint(p.w, "\r\033[K")
		p.drawn = false
	}
}

// rowsLine is the line of a pass over a table: rows done; of total rows
// when total > 0, else of the input's bytes when size > 0; the rate; and
// the share done and time left when either is known.
//
//	fit: 4,500,000 of 10,000,000 rows (45%), 2.1 M rows/s, 3s left
//	fit: 4,500,000 rows, 540 MB of 1.2 GB (45%), 2.1 M rows/s, 3s left
//	fit: 4,500,000 rows, 2.1 M rows/s
func rowsLine(label string, rows, total, read, size int64, elapsed time.Duration) string {
	var b strings.Builder
	b.WriteString(label + ": " + thousands(rows))
	frac := -1.0
	switch {
	case total > 0:
		frac = float64(rows) / float64(total)
		b.WriteString(" of " + thousands(total) + " rows")
	case size > 0:
		frac = float64(read) / float64(size)
		b.WriteString(" rows, " + bytesText(read) + " of " + bytesText(size))
	default:
		b.WriteString(" rows")
	}
	if frac >= 0 {
		fmt.Fprintf(&b, " (%d%%)", int(100*min(frac, 1)))
	}
	if s := elapsed.Seconds(); s > 0 && rows > 0 {
		fmt.Fprintf(&b, ", %.1f M rows/s", float64(rows)/s/1e6)
	}
	b.WriteString(timeLeft(frac, elapsed))
	return b.String()
}

// modelsLine is the line of compare's model phase.
//
//	compare: models, column 1 of 2 (dest_postcode), candidate 3 of 7, 12 of 70 fits (17%), 41s left
func modelsLine(label string, s compare.ModelStep, elapsed time.Duration) string {
	frac := -1.0
	if s.Models > 0 {
		frac = float64(s.ModelsDone) / float64(s.Models)
	}
	return fmt.Sprintf("%s: models, column %d of %d (%s), candidate %d of %d, %d of %d fits (%d%%)%s",
		label, s.ColumnNum, s.Columns, s.Column, s.Candidate, s.Candidates, s.ModelsDone, s.Models,
		int(100*max(0, min(frac, 1))), timeLeft(frac, elapsed))
}

// timeLeft is ", 3s left" at the rate so far, for a share frac done after
// elapsed: nothing before a second has passed or 1% is done (too early to
// tell), nor when frac is not known (< 0) or everything is done.
func timeLeft(frac float64, elapsed time.Duration) string {
	if frac < 0.01 || frac >= 1 || elapsed < time.Second {
		return ""
	}
	left := time.Duration(float64(elapsed) * (1 - frac) / frac)
	return ", " + durationText(left) + " left"
}

// durationText writes d as 42s, 3m05s or 2h07m.
func durationText(d time.Duration) string {
	s := int64(d.Round(time.Second) / time.Second)
	switch {
	case s < 60:
		return fmt.Sprintf("%ds", s)
	case s < 3600:
		return fmt.Sprintf("%dm%02ds", s/60, s%60)
	}
	return fmt.Sprintf("%dh%02dm", s/3600, s%3600/60)
}

// thousands writes n with commas between groups of three digits.
func thousands(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	if neg {
		b.WriteByte('-')
	}
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	return b.String()
}

// bytesText writes n bytes in decimal units with two or three
// significant digits: 950 B, 12 kB, 540 MB, 1.2 GB.
func bytesText(n int64) string {
	units := []string{"B", "kB", "MB", "GB", "TB", "PB"}
	v, u := float64(n), 0
	for v >= 999.5 && u < len(units)-1 {
		v /= 1000
		u++
	}
	if u > 0 && v < 9.95 {
		return fmt.Sprintf("%.1f %s", v, units[u])
	}
	return fmt.Sprintf("%.0f %s", v, units[u])
}
