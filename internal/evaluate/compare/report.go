package compare

import (
	"bufio"
	"fmt"
	"html/template"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	"manyfold/io/atomicfile"
)

// WriteReport writes r as one self-contained HTML file at path: inline CSS
// and inline SVG charts, no scripts, no fonts or styles fetched from
// anywhere, and a print stylesheet. The markup is also well-formed XML.
// The file appears at path only when complete.
//
// For every column the report shows a bar chart of the candidates' primary
// metric (mean over the outer folds, with ±1 standard deviation and the
// per-fold values), the rank-frequency curve of the column's levels on
// log-log axes, the raw against the smoothed target mean of sampled levels,
// and a table of every metric.
//
// The value axis of a bar chart starts at its axis minimum, and a bar's
// height is proportional to its mean minus that minimum, so heights are
// ordered like the means. The minimum is:
//   - for an AUC (a metric whose name contains "auc"): the largest tick
//     strictly below min(0.5, smallest mean), so the chance level 0.5 is
//     always on the axis and a chance-level bar is still visible;
//   - for any other metric (log loss, Brier, RMSE, MAE, accuracy, R²):
//     min(0, smallest mean) rounded down to a tick, which is 0 for losses
//     and errors.
func WriteReport(path string, r *Result) error {
	if r == nil {
		return fmt.Errorf("write report %s: no result", path)
	}
	f, err := atomicfile.Create(path)
	if err != nil {
		return fmt.Errorf("write report: %w", err)
	}
	if err := WriteReportTo(f, r); err != nil {
		f.Abort()
		return fmt.Errorf("write report %s: %w", path, err)
	}
	if err := f.Commit(); err != nil {
		return fmt.Errorf("write report: %w", err)
	}
	return nil
}

// WriteReportTo writes the report that WriteReport writes to w.
func WriteReportTo(w io.Writer, r *Result) error {
	if r == nil {
		return fmt.Errorf("no result")
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	if err := reportTemplate.Execute(bw, buildView(r)); err != nil {
		return err
	}
	return bw.Flush()
}

// ---- view model: every string is final text; the template escapes it ----

type reportView struct {
	Title     string
	Header    []headerItem
	Command   string // the encode command that carries out the verdict
	NoCommand string // what the last section says when there is none
	Columns   []columnView
	Joint     *jointView // the model over every column's winner (--joint)
	Generator string
}

// jointView is the joint model's section: its scores and those of each
// column's winner alone on the same folds, in the text's figures.
type jointView struct {
	Encodings string
	Table     tableView // nil rows when fewer than two columns had a winner
	Reading   string
}

type headerItem struct{ Key, Value string }

type columnView struct {
	Anchor  string
	Name    string
	Levels  string
	Reading string
	Bars    barChart
	Rank    *logChart
	Shrink  *shrinkChart
	Table   tableView
}

type tick struct {
	Pos   string // position along the axis, in SVG units
	Label string
	Minor bool
	Mark  string // the far end of the tick mark, off the axis
}

type barChart struct {
	Column         string
	Width, Height  int
	HatchID        string
	HatchURL       string
	X0, X1, Y0, Y1 string // plot area: left, right, top, bottom
	YTicks         []tick
	AxisTitle      string
	BarsFrom       string // what the bars' base is, for the caption
	AxisTitleX     string
	AxisTitleY     string
	Bars           []barView
	LegendY        string
	Legend         []legendItem
}

type legendItem struct {
	X, TextX, Y, TextY string
	Fill, Stroke       string
	Label              string
}

type barView struct {
	Name, Value, Kind, Fill, Stroke  string
	X, Y, W, H                       string
	Tip                              string
	HasErr                           bool
	ErrX, ErrY0, ErrY1, CapX0, CapX1 string
	ValueX, ValueY, ValueText        string
	ValueAnchor, ValueTransform      string
	LabelX, LabelY, Label            string
	LabelAnchor, LabelTransform      string
	LabelWeight                      string
	Note                             string // "baseline" or "winner", under the name
	NoteY                            string
	Folds                            []point
}

type point struct{ X, Y, R string }

type logChart struct {
	Width, Height  int
	X0, X1, Y0, Y1 string
	XTicks, YTicks []tick
	Points         string
	Caption        string
	XTitleY        string
	YTitleX        string
	YTitleY        string
	XTitleX        string
}

type shrinkChart struct {
	Width, Height  int
	X0, X1, Y0, Y1 string
	XTicks, YTicks []tick
	Circles        []point
	Caption        string
	XTitleX        string
	XTitleY        string
	YTitleX        string
	YTitleY        string
}

type tableView struct {
	Heads []string
	Rows  []tableRow
}

type tableRow struct {
	Kind  string // winner, tie, baseline, candidate; joint for the joint model
	Cells []string
	// Group, when set, heads a group of rows that starts here (the
	// baselines, apart from the ranked candidates); Span is the table's
	// column count, which its heading cell spans.
	Group string
	Span  int
}

// ---- building the view ----

func buildView(r *Result) reportView {
	dir := "lower is better"
	if r.HigherBetter {
		dir = "higher is better"
	}
	with := "none"
	if len(r.With) > 0 {
		ws := make([]string, len(r.With))
		for i, w := range r.With {
			ws[i] = clean(w)
		}
		with = strings.Join(ws, ", ")
	}
	v := reportView{
		Title: "manyfold compare: " + clean(r.Target) + " in " + clean(r.File),
		Header: []headerItem{
			{"Tool", clean(r.Tool)},
			{"Command", clean(r.CommandLine)},
			{"File", clean(r.File)},
			{"Target", clean(r.Target)},
			{"Task", clean(r.Task)},
			{"Primary metric", metricLabel(clean(r.Metric)) + " (" + dir + ")"},
			{"Folds", fmt.Sprintf("%d outer × %d inner", r.Folds, r.InnerFolds)},
			{"Fold rule", clean(r.FoldBy)},
			{"Test", testName},
			{"Seed", strconv.FormatUint(r.Seed, 10)},
			{"Rows", groupDigits(r.Rows)},
			{"Model rows", groupDigits(r.ModelRows)},
			{"Numeric columns added", with},
		},
		Command:   r.EncodeCommand,
		NoCommand: noCommand,
		Generator: "manyfold compare",
	}
	for i := range r.Columns {
		v.Columns = append(v.Columns, buildColumn(r, i))
	}
	v.Joint = buildJoint(r)
	return v
}

// buildJoint is the joint model's section, nil without --joint: a table of
// every metric, the joint model first, then each joined column's winner
// alone (the best column marked), with the figures as the text prints
// them (four decimals), and the joint reading, which gives the gain over
// the best column with its interval and p-value.
func buildJoint(r *Result) *jointView {
	j := r.Joint
	if j == nil {
		return nil
	}
	jv := &jointView{Encodings: clean(j.Encodings), Reading: clean(j.Reading)}
	if len(j.Metrics) == 0 {
		return jv
	}
	jv.Table.Heads = []string{"model"}
	for _, m := range j.Metrics {
		h := metricLabel(m.Name)
		if m.Name == r.Metric {
			h += " mean ± sd"
		}
		jv.Table.Heads = append(jv.Table.Heads, h)
	}
	row := func(kind, name string, ms []Metric) tableRow {
		tr := tableRow{Kind: kind, Cells: []string{name}}
		for _, m := range j.Metrics {
			cell := "–"
			if i := slices.IndexFunc(ms, func(x Metric) bool { return x.Name == m.Name }); i >= 0 {
				cell = num(ms[i].Mean) + " ± " + num(ms[i].Std)
			}
			tr.Cells = append(tr.Cells, cell)
		}
		return tr
	}
	jv.Table.Rows = append(jv.Table.Rows, row("joint", fmt.Sprintf("one model over the %d winners", len(j.Columns)), j.Metrics))
	for _, col := range j.Columns {
		ci := slices.IndexFunc(r.Columns, func(c ColumnResult) bool { return c.Column == col })
		if ci < 0 {
			continue
		}
		w := winnerOf(&r.Columns[ci])
		if w == nil {
			continue
		}
		name := clean(col + "=" + w.Name + " alone")
		if col == j.BestColumn {
			name += " (best column)"
		}
		jv.Table.Rows = append(jv.Table.Rows, row("candidate", name, w.Metrics))
	}
	return jv
}

func buildColumn(r *Result, i int) columnView {
	c := &r.Columns[i]
	cv := columnView{
		Anchor:  "column-" + strconv.Itoa(i+1),
		Name:    clean(c.Column),
		Levels:  groupDigits(int64(c.Levels)),
		Reading: clean(c.Reading),
		Bars:    buildBars(r, c, i),
		Rank:    buildRankFreq(c),
		Shrink:  buildShrink(c),
		Table:   buildTable(r, c),
	}
	return cv
}

const (
	colorWinner    = "#1f5fa8"
	colorCandidate = "#8fb1d9"
	colorBaseline  = "#9a9a9a"
	colorStroke    = "#2b2b2b"
)

func isAUC(metric string) bool { return strings.Contains(strings.ToLower(metric), "auc") }

// barAxis returns the value range and tick step of a bar chart, following
// the rule in WriteReport's comment.
func barAxis(metric string, cands []CandidateResult) (lo, hi, step float64) {
	minMean, maxTop := math.Inf(1), math.Inf(-1)
	for _, c := range cands {
		m, s := c.Primary.Mean, c.Primary.Std
		if !finite(m) {
			continue
		}
		minMean = math.Min(minMean, m)
		top := m
		if finite(s) && s > 0 {
			top = m + s
		}
		for _, f := range c.PerFold {
			if finite(f) {
				top = math.Max(top, f)
			}
		}
		maxTop = math.Max(maxTop, top)
	}
	if !finite(minMean) {
		return 0, 1, 0.2
	}
	auc := isAUC(metric)
	base := math.Min(0, minMean)
	if auc {
		base = math.Min(0.5, minMean)
	}
	span := maxTop - base
	if !(span > 0) {
		span = math.Max(math.Abs(maxTop), 1) * 0.1
	}
	step = niceStep(span / 5)
	if auc {
		lo = (math.Ceil(base/step-1e-9) - 1) * step // strictly below
	} else {
		lo = math.Floor(base/step+1e-9) * step
	}
	hi = math.Ceil(maxTop/step-1e-9) * step
	if hi <= maxTop-step*1e-9 || hi <= lo {
		hi = math.Max(lo, hi) + step
	}
	return lo, hi, step
}

func buildBars(r *Result, c *ColumnResult, idx int) barChart {
	n := len(c.Candidates)
	const (
		width  = 760
		right  = 16.0
		plotH  = 250.0
		charW  = 6.4 // average width of an 11px label character
		legend = 28.0
	)
	// Labels are rotated when the longest name does not fit its slot; a
	// rotated label also carries its note, " (winner)" or " (baseline)", so
	// its length counts the note too.
	maxLen, firstLen := 0, 0
	for j, cand := range c.Candidates {
		l := utf8.RuneCountInString(displayName(cand.Name)) + len(barNote(cand))
		maxLen = max(maxLen, l)
		if j == 0 {
			firstLen = l
		}
	}
	left := 70.0
	slot := (width - left - right) / math.Max(float64(n), 1)
	rotate := float64(maxLen)*charW > slot-6
	if rotate {
		// A label rotated by 35 degrees reaches cos(35°) of its length to
		// the left of its bar's centre: widen the margin so the first one
		// is not cut off.
		if need := float64(firstLen)*charW*1.1*math.Cos(35*math.Pi/180) - slot/2 + 8; need > left {
			left = math.Min(need, 220)
			slot = (width - left - right) / math.Max(float64(n), 1)
		}
	}
	barW := math.Min(slot*0.62, 72)
	valueW, rotateValues := valueLabels(c.Candidates, slot)
	top := 24.0
	if rotateValues {
		// An upright value label reaches valueW above its bar's top (and
		// 5 more): the plot starts low enough for the highest bar's.
		top = valueW + 12
	}
	labelH := 34.0
	if rotate {
		// A label rotated by 35 degrees drops sin(35°) of its length
		// below the axis: the legend goes below the longest.
		labelH = 22 + float64(maxLen)*charW*math.Sin(35*math.Pi/180)
	}
	y1 := top + plotH
	height := int(math.Ceil(y1 + labelH + legend + 8))

	lo, hi, step := barAxis(r.Metric, c.Candidates)
	ypos := func(v float64) float64 {
		v = math.Max(lo, math.Min(hi, v))
		return y1 - (v-lo)/(hi-lo)*plotH
	}

	b := barChart{
		Column:  clean(c.Column),
		Width:   width,
		Height:  height,
		HatchID: fmt.Sprintf("hatch-%d", idx+1),
		X0:      px(left), X1: px(width - right), Y0: px(top), Y1: px(y1),
		AxisTitle:  metricLabel(r.Metric),
		AxisTitleX: px(16),
		AxisTitleY: px(top + plotH/2),
		LegendY:    px(float64(height) - legend/2 - 4),
	}
	b.HatchURL = "url(#" + b.HatchID + ")"
	if lo == 0 {
		b.BarsFrom = "Bars start at zero."
	} else {
		b.BarsFrom = "Bars start at the axis minimum, " + tickLabel(lo, step) + ", not at zero: compare their tops, not their lengths."
	}
	if r.HigherBetter {
		b.AxisTitle += " (higher is better)"
	} else {
		b.AxisTitle += " (lower is better)"
	}
	for k := 0; ; k++ {
		v := lo + float64(k)*step
		if v > hi+step*1e-6 || k > 40 {
			break
		}
		b.YTicks = append(b.YTicks, tick{Pos: px(ypos(v)), Label: tickLabel(v, step)})
	}

	for j, cand := range c.Candidates {
		cx := left + slot*(float64(j)+0.5)
		m := cand.Primary.Mean
		h := 0.0
		if finite(m) {
			h = (math.Max(lo, math.Min(hi, m)) - lo) / (hi - lo) * plotH
		}
		bv := barView{
			Name:   clean(cand.Name),
			Value:  strconv.FormatFloat(m, 'g', -1, 64),
			Kind:   "candidate",
			Fill:   colorCandidate,
			Stroke: "#5d7fa6",
			X:      px(cx - barW/2), W: px(barW),
			Y: px(y1 - h), H: px(h),
			ValueX:      px(cx),
			ValueText:   sig4(m),
			ValueAnchor: "middle",
			LabelWeight: "normal",
		}
		switch {
		case cand.Baseline:
			bv.Kind, bv.Fill, bv.Stroke, bv.Note = "baseline", b.HatchURL, "#6b6b6b", "baseline"
		case cand.Winner:
			bv.Kind, bv.Fill, bv.Stroke, bv.Note, bv.LabelWeight = "winner", colorWinner, colorStroke, "winner", "bold"
		}
		bv.Tip = bv.Name + ": " + meanStd(m, cand.Primary.Std)
		topY := y1 - h
		if s := cand.Primary.Std; finite(m) && finite(s) && s > 0 {
			bv.HasErr = true
			bv.ErrX = px(cx)
			bv.ErrY0 = px(ypos(m - s))
			bv.ErrY1 = px(ypos(m + s))
			bv.CapX0 = px(cx - math.Min(barW/4, 8))
			bv.CapX1 = px(cx + math.Min(barW/4, 8))
			topY = math.Min(topY, ypos(m+s))
		}
		for fi, f := range cand.PerFold {
			if !finite(f) {
				continue
			}
			// Spread the fold dots a little so equal values stay visible.
			off := 0.0
			if len(cand.PerFold) > 1 {
				off = (float64(fi)/float64(len(cand.PerFold)-1) - 0.5) * barW * 0.5
			}
			fy := ypos(f)
			bv.Folds = append(bv.Folds, point{X: px(cx + off), Y: px(fy), R: "2.2"})
			topY = math.Min(topY, fy)
		}
		bv.ValueY = px(math.Max(topY-5, 10))
		if rotateValues {
			// Upright, reading upwards from 5 px above the bar's top; the
			// glyphs lie left of the baseline, so it sits 4 px right of
			// the centre.
			bv.ValueX, bv.ValueY, bv.ValueAnchor = px(cx+4), px(topY-5), "start"
			bv.ValueTransform = fmt.Sprintf("rotate(-90 %s %s)", bv.ValueX, bv.ValueY)
		}
		label := displayName(bv.Name)
		if rotate {
			bv.LabelX, bv.LabelY = px(cx+4), px(y1+14)
			bv.LabelAnchor = "end"
			bv.LabelTransform = fmt.Sprintf("rotate(-35 %s %s)", px(cx+4), px(y1+14))
			label += barNote(cand)
			bv.Note = ""
		} else {
			bv.LabelX, bv.LabelY = px(cx), px(y1+16)
			bv.LabelAnchor = "middle"
			bv.NoteY = px(y1 + 29)
		}
		bv.Label = label
		b.Bars = append(b.Bars, bv)
	}

	items := []struct{ fill, stroke, label string }{
		{colorWinner, colorStroke, "winner"},
		{colorCandidate, "#5d7fa6", "other candidates"},
		{b.HatchURL, "#6b6b6b", "baselines"},
		{"", "", "● outer folds   ┃ ±1 standard deviation"},
	}
	x := 70.0 // the legend keeps the narrow margin, so it fits however wide the left one grew
	ly := float64(height) - legend/2 - 4
	for _, it := range items {
		li := legendItem{X: px(x), Y: px(ly - 6), TextX: px(x + 18), TextY: px(ly + 4), Fill: it.fill, Stroke: it.stroke, Label: it.label}
		if it.fill == "" {
			li.TextX = px(x)
		}
		b.Legend = append(b.Legend, li)
		x += 150
	}
	return b
}

// valueLabels returns the estimated width of the widest bar value label
// and whether the labels are set upright: when the widest, with a 4 px gap,
// is wider than a bar's slot, labels side by side at equal heights would
// overlap.
func valueLabels(cands []CandidateResult, slot float64) (width float64, upright bool) {
	const valueCharW = 6.7 // a figure of the 10.5px value font: 0.64 em, the widest common sans
	n := 0
	for _, c := range cands {
		n = max(n, utf8.RuneCountInString(sig4(c.Primary.Mean)))
	}
	width = float64(n) * valueCharW
	return width, width+4 > slot
}

// barNote is the note a candidate's bar label carries: " (winner)" for the
// winner, " (baseline)" for a baseline.
func barNote(c CandidateResult) string {
	switch {
	case c.Baseline:
		return " (baseline)"
	case c.Winner:
		return " (winner)"
	}
	return ""
}

// displayName shortens a very long candidate name for an axis label; the
// full name stays in the table and the bar's tooltip.
func displayName(s string) string {
	const limit = 28
	if utf8.RuneCountInString(s) <= limit {
		return s
	}
	rs := []rune(s)
	return string(rs[:limit-1]) + "…"
}

func buildRankFreq(c *ColumnResult) *logChart {
	pts := make([]RankPoint, 0, len(c.RankFreq))
	for _, p := range c.RankFreq {
		if p.Rank >= 1 && p.Rows >= 1 {
			pts = append(pts, p)
		}
	}
	if len(pts) == 0 {
		return nil
	}
	slices.SortFunc(pts, func(a, b RankPoint) int { return a.Rank - b.Rank })
	maxRank, minRows, maxRows := 1, uint64(math.MaxUint64), uint64(1)
	for _, p := range pts {
		maxRank = max(maxRank, p.Rank)
		minRows = min(minRows, p.Rows)
		maxRows = max(maxRows, p.Rows)
	}
	xd1 := max(1, int(math.Ceil(math.Log10(float64(maxRank))-1e-9)))
	yd0 := int(math.Floor(math.Log10(float64(minRows)) + 1e-9))
	yd1 := int(math.Ceil(math.Log10(float64(maxRows)) - 1e-9))
	if yd1 <= yd0 {
		yd1 = yd0 + 1
	}
	const (
		width, height = 380, 300
		left, right   = 58.0, 14.0
		top, bottom   = 14.0, 48.0
	)
	x0, x1, y0, y1 := left, float64(width)-right, top, float64(height)-bottom
	xpos := func(lg float64) float64 { return x0 + lg/float64(xd1)*(x1-x0) }
	ypos := func(lg float64) float64 { return y1 - (lg-float64(yd0))/float64(yd1-yd0)*(y1-y0) }
	ch := &logChart{
		Width: width, Height: height,
		X0: px(x0), X1: px(x1), Y0: px(y0), Y1: px(y1),
		XTitleX: px((x0 + x1) / 2), XTitleY: px(float64(height) - 10),
		YTitleX: px(14), YTitleY: px((y0 + y1) / 2),
	}
	ch.XTicks = decadeTicks(0, xd1, xpos, y1+5, y1+3)
	ch.YTicks = decadeTicks(yd0, yd1, ypos, x0-5, x0-3)
	var sb strings.Builder
	for i, p := range pts {
		if i > 0 {
			sb.WriteByte(' ')
		}
		sb.WriteString(px(xpos(math.Log10(float64(p.Rank)))))
		sb.WriteByte(',')
		sb.WriteString(px(ypos(math.Log10(float64(p.Rows)))))
	}
	ch.Points = sb.String()
	ch.Caption = fmt.Sprintf("Rows per level against the level's rank, both on log scales: %s levels, the most frequent with %s rows, the rarest shown with %s.",
		groupDigits(int64(c.Levels)), groupDigitsU(maxRows), groupDigitsU(minRows))
	return ch
}

// decadeTicks returns major ticks at 10^d for d in [d0, d1] and unlabelled
// minor ticks at 2..9 × 10^d in between, when there are few decades; major
// and minor are where the tick marks end, off the axis.
func decadeTicks(d0, d1 int, pos func(float64) float64, major, minor float64) []tick {
	var ts []tick
	for d := d0; d <= d1; d++ {
		ts = append(ts, tick{Pos: px(pos(float64(d))), Label: decadeLabel(d), Mark: px(major)})
		if d < d1 && d1-d0 <= 6 {
			for m := 2; m <= 9; m++ {
				ts = append(ts, tick{Pos: px(pos(float64(d) + math.Log10(float64(m)))), Minor: true, Mark: px(minor)})
			}
		}
	}
	return ts
}

func decadeLabel(d int) string {
	switch {
	case d >= 0 && d <= 3:
		return strconv.FormatFloat(math.Pow(10, float64(d)), 'f', 0, 64)
	default:
		const sup = "⁰¹²³⁴⁵⁶⁷⁸⁹"
		digits := []rune(sup)
		var sb strings.Builder
		sb.WriteString("10")
		if d < 0 {
			sb.WriteRune('⁻')
			d = -d
		}
		for _, ch := range strconv.Itoa(d) {
			sb.WriteRune(digits[ch-'0'])
		}
		return sb.String()
	}
}

func buildShrink(c *ColumnResult) *shrinkChart {
	pts := make([]ShrinkPoint, 0, len(c.Shrinkage))
	lo, hi := math.Inf(1), math.Inf(-1)
	var maxRows uint64
	for _, p := range c.Shrinkage {
		if !finite(p.Raw) || !finite(p.Smoothed) {
			continue
		}
		pts = append(pts, p)
		lo = math.Min(lo, math.Min(p.Raw, p.Smoothed))
		hi = math.Max(hi, math.Max(p.Raw, p.Smoothed))
		maxRows = max(maxRows, p.Rows)
	}
	if len(pts) == 0 {
		return nil
	}
	if hi-lo <= 0 {
		d := math.Max(math.Abs(lo)*0.1, 0.5)
		lo, hi = lo-d, hi+d
	}
	step := niceStep((hi - lo) / 5)
	lo = math.Floor(lo/step+1e-9) * step
	hi = math.Ceil(hi/step-1e-9) * step
	const (
		width, height = 380, 300
		left, top     = 58.0, 14.0
		bottom        = 48.0
	)
	size := float64(height) - top - bottom
	x0, y0 := left, top
	x1, y1 := x0+size, y0+size
	xpos := func(v float64) float64 { return x0 + (v-lo)/(hi-lo)*size }
	ypos := func(v float64) float64 { return y1 - (v-lo)/(hi-lo)*size }
	ch := &shrinkChart{
		Width: width, Height: height,
		X0: px(x0), X1: px(x1), Y0: px(y0), Y1: px(y1),
		XTitleX: px((x0 + x1) / 2), XTitleY: px(float64(height) - 10),
		YTitleX: px(14), YTitleY: px((y0 + y1) / 2),
	}
	for k := 0; k <= 40; k++ {
		v := lo + float64(k)*step
		if v > hi+step*1e-6 {
			break
		}
		lab := tickLabel(v, step)
		ch.XTicks = append(ch.XTicks, tick{Pos: px(xpos(v)), Label: lab})
		ch.YTicks = append(ch.YTicks, tick{Pos: px(ypos(v)), Label: lab})
	}
	// Large levels first, so that small ones are drawn on top.
	slices.SortStableFunc(pts, func(a, b ShrinkPoint) int {
		switch {
		case a.Rows > b.Rows:
			return -1
		case a.Rows < b.Rows:
			return 1
		}
		return 0
	})
	for _, p := range pts {
		r := 1.5
		if maxRows > 0 {
			r += 6.5 * math.Sqrt(float64(p.Rows)/float64(maxRows))
		}
		ch.Circles = append(ch.Circles, point{X: px(xpos(p.Raw)), Y: px(ypos(p.Smoothed)), R: px(r)})
	}
	ch.Caption = fmt.Sprintf("%d sampled levels: raw mean target (x) against the smoothed value of target:eb fitted on all rows (y); the circle grows with the level's rows. On the diagonal a level keeps its raw mean; the further a circle sits from it, the more its mean was pulled toward the prior.", len(pts))
	return ch
}

func buildTable(r *Result, c *ColumnResult) tableView {
	var names []string
	for _, cand := range c.Candidates {
		for _, m := range cand.Metrics {
			if !slices.Contains(names, m.Name) {
				names = append(names, m.Name)
			}
		}
	}
	t := tableView{Heads: []string{"candidate"}}
	for _, n := range names {
		h := metricLabel(n)
		if n == r.Metric {
			h += " (primary)"
		}
		t.Heads = append(t.Heads, h)
	}
	timed := hasTimings(c)
	t.Heads = append(t.Heads, "train "+metricLabel(r.Metric))
	if timed {
		t.Heads = append(t.Heads, "fit seconds")
	}
	t.Heads = append(t.Heads, "output columns", "unseen share")
	for i, cand := range c.Candidates {
		row := tableRow{Kind: "candidate"}
		name := clean(cand.Name)
		switch {
		case cand.Baseline:
			row.Kind = "baseline"
			name += " (baseline)"
			if i == 0 || !c.Candidates[i-1].Baseline {
				row.Group, row.Span = "baselines (not ranked)", len(t.Heads)
			}
		case cand.Winner:
			row.Kind = "winner"
			name += " (winner)"
		case cand.Tie:
			row.Kind = "tie"
			name += " (tie with the best)"
		}
		row.Cells = append(row.Cells, name)
		for _, n := range names {
			cell := "–"
			for _, m := range cand.Metrics {
				if m.Name == n {
					cell = meanStd(m.Mean, m.Std)
					break
				}
			}
			row.Cells = append(row.Cells, cell)
		}
		row.Cells = append(row.Cells, meanStd(cand.TrainPrimary.Mean, cand.TrainPrimary.Std))
		if timed {
			row.Cells = append(row.Cells, strconv.FormatFloat(cand.FitSeconds, 'f', 2, 64))
		}
		row.Cells = append(row.Cells, strconv.Itoa(cand.OutputColumns), percent(cand.UnseenShare))
		t.Rows = append(t.Rows, row)
	}
	return t
}

// hasTimings reports whether the column's candidates were timed
// (--timings): only then are fit seconds shown.
func hasTimings(c *ColumnResult) bool {
	for _, k := range c.Candidates {
		if k.FitSeconds > 0 {
			return true
		}
	}
	return false
}

// ---- formatting ----

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// px formats an SVG coordinate.
func px(v float64) string {
	if !finite(v) {
		return "0"
	}
	s := strconv.FormatFloat(v, 'f', 3, 64)
	s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	if s == "-0" {
		s = "0"
	}
	return s
}

// sig4 formats v with 4 significant digits, in fixed notation for
// magnitudes from 1e-4 to below 1e7.
func sig4(v float64) string {
	if math.IsNaN(v) {
		return "n/a"
	}
	if math.IsInf(v, 0) {
		if v > 0 {
			return "∞"
		}
		return "−∞"
	}
	if v == 0 {
		return "0"
	}
	rounded, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 4, 64), 64)
	e := int(math.Floor(math.Log10(math.Abs(rounded))))
	if e < -4 || e >= 7 {
		return strconv.FormatFloat(rounded, 'g', 4, 64)
	}
	return strconv.FormatFloat(rounded, 'f', max(0, 3-e), 64)
}

// meanStd formats "mean ± std": the mean with 4 significant digits and the
// standard deviation with the same decimals, or with 2 significant digits
// when those decimals would round it to zero.
func meanStd(mean, std float64) string {
	m := sig4(mean)
	if !finite(std) {
		return m + " ± " + sig4(std)
	}
	dec := 0
	if i := strings.IndexByte(m, '.'); i >= 0 && !strings.ContainsAny(m, "e∞") {
		dec = len(m) - i - 1
	} else if strings.ContainsAny(m, "e") || !finite(mean) {
		return m + " ± " + sig4(std)
	}
	sd := strconv.FormatFloat(std, 'f', dec, 64)
	if std != 0 && strings.Trim(sd, "0.") == "" {
		sd = strconv.FormatFloat(std, 'g', 2, 64)
	}
	return m + " ± " + sd
}

func percent(share float64) string {
	if !finite(share) {
		return "n/a"
	}
	if share == 0 {
		return "0%"
	}
	return sig4(share*100) + "%"
}

// niceStep rounds x up to 1, 2, 2.5 or 5 times a power of ten.
func niceStep(x float64) float64 {
	if !(x > 0) || !finite(x) {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(x)))
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if x <= m*p*(1+1e-9) {
			return m * p
		}
	}
	return 10 * p
}

// tickLabel formats a tick value with just the decimals its step needs.
func tickLabel(v, step float64) string {
	dec := 0
	for s := step; dec < 12 && math.Abs(s-math.Round(s)) > 1e-9*math.Max(1, math.Abs(s)); s *= 10 {
		dec++
	}
	if math.Abs(v) < step*1e-9 {
		v = 0
	}
	return strconv.FormatFloat(v, 'f', dec, 64)
}

func groupDigits(n int64) string {
	if n < 0 {
		return "−" + groupDigitsU(uint64(-n))
	}
	return groupDigitsU(uint64(n))
}

func groupDigitsU(n uint64) string {
	s := strconv.FormatUint(n, 10)
	if len(s) <= 3 {
		return s
	}
	var sb strings.Builder
	lead := len(s) % 3
	if lead > 0 {
		sb.WriteString(s[:lead])
	}
	for i := lead; i < len(s); i += 3 {
		if sb.Len() > 0 {
			sb.WriteByte(' ')
		}
		sb.WriteString(s[i : i+3])
	}
	return sb.String()
}

// clean makes user text safe to embed in XML-compatible markup: invalid
// UTF-8 and characters XML 1.0 forbids (most control characters) become
// U+FFFD. Markup characters are left to the template's escaping.
func clean(s string) string {
	s = strings.ToValidUTF8(s, "\uFFFD")
	return strings.Map(func(r rune) rune {
		switch {
		case r == '\t' || r == '\n' || r == '\r':
			return r
		case r < 0x20, r >= 0xFFFE && r <= 0xFFFF, r >= 0xD800 && r <= 0xDFFF:
			return '\uFFFD'
		}
		return r
	}, s)
}

var reportTemplate = template.Must(template.New("report").Parse(reportHTML))

const reportHTML = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8" />
<meta name="viewport" content="width=device-width, initial-scale=1" />
<meta name="generator" content="{{.Generator}}" />
<title>{{.Title}}</title>
<style>
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; color: #1d1d1d; background: #ffffff; max-width: 1000px; margin: 0 auto; padding: 24px 28px 48px; line-height: 1.45; }
h1 { font-size: 1.5em; margin: 0 0 0.6em; }
h2 { font-size: 1.25em; margin: 0 0 0.3em; }
h3 { font-size: 1em; margin: 1.2em 0 0.3em; color: #333333; }
.meta { display: grid; grid-template-columns: max-content 1fr; gap: 2px 18px; margin: 0 0 1.2em; }
.meta dt { color: #555555; }
.meta dd { margin: 0; overflow-wrap: anywhere; }
nav ul { margin: 0.2em 0 1em; padding-left: 1.2em; }
section.column, section.joint, section.next { border-top: 2px solid #d8d8d8; padding-top: 1em; margin-top: 1.6em; }
.levels { color: #555555; margin: 0 0 0.6em; }
figure { margin: 0.4em 0 1em; break-inside: avoid; page-break-inside: avoid; }
figcaption { font-size: 0.85em; color: #444444; margin-top: 0.2em; }
svg { display: block; max-width: 100%; height: auto; }
svg.metric-chart { width: 100%; max-width: 900px; }
svg text { font-size: 11px; fill: #333333; font-family: inherit; }
svg .axis { stroke: #333333; stroke-width: 1; fill: none; }
svg .grid { stroke: #e4e4e4; stroke-width: 1; }
svg .title { font-size: 12px; fill: #222222; }
svg .value { font-size: 10.5px; fill: #222222; }
svg .note { font-size: 10px; fill: #666666; font-style: italic; }
svg .err { stroke: #1d1d1d; stroke-width: 1.4; }
svg .fold { fill: #ffffff; stroke: #1d1d1d; stroke-width: 0.9; }
svg .curve { fill: none; stroke: #1f5fa8; stroke-width: 2; }
svg .diag { stroke: #b04a2f; stroke-width: 1.2; stroke-dasharray: 5 4; }
svg .level { fill: #1f5fa8; fill-opacity: 0.35; stroke: #1f5fa8; stroke-width: 0.8; }
.pair { display: flex; flex-wrap: wrap; gap: 12px 24px; }
.pair figure { flex: 1 1 360px; max-width: 460px; }
.none { color: #666666; font-style: italic; }
table { border-collapse: collapse; font-size: 0.88em; font-variant-numeric: tabular-nums; margin: 0.3em 0 0.6em; break-inside: avoid; page-break-inside: avoid; }
th, td { border-bottom: 1px solid #dddddd; padding: 4px 8px; text-align: right; white-space: nowrap; }
th:first-child, td:first-child { text-align: left; white-space: normal; overflow-wrap: anywhere; min-width: 8em; }
th { background: #f2f2f2; font-weight: 600; white-space: normal; vertical-align: bottom; }
tr.winner td, tr.joint td { font-weight: 700; background: #eef4fb; }
tr.baseline td { color: #666666; font-style: italic; }
th.group { background: #ffffff; color: #555555; font-weight: 600; text-align: left; padding-top: 10px; }
.candidates { break-inside: avoid; page-break-inside: avoid; }
.reading { margin: 0.4em 0 0; padding: 0.5em 0.8em; border-left: 4px solid #1f5fa8; background: #f6f8fb; }
footer { margin-top: 2em; font-size: 0.8em; color: #777777; }
@page { margin: 14mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  nav { display: none; }
  section.column { border-top: none; margin-top: 0; }
  section.column + section.column, section.joint { break-before: page; page-break-before: always; }
  svg.metric-chart { width: 100%; }
  .pair { flex-wrap: nowrap; }
  .pair figure { flex: 1 1 50%; max-width: 50%; }
  tr.winner td, tr.joint td, th, .reading { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  figure svg { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
</style>
</head>
<body>
<header>
<h1>{{.Title}}</h1>
<dl class="meta">
{{- range .Header}}{{if .Value}}
<dt>{{.Key}}</dt><dd>{{.Value}}</dd>
{{- end}}{{end}}
</dl>
{{- if .Columns}}
<nav><ul>
{{- range .Columns}}
<li><a href="#{{.Anchor}}">{{.Name}}</a></li>
{{- end}}
{{- if .Joint}}
<li><a href="#joint">joint model</a></li>
{{- end}}
<li><a href="#next">the encode command</a></li>
</ul></nav>
{{- else}}
<p class="none">No categorical columns were compared.</p>
{{- end}}
</header>
{{- range .Columns}}
<section class="column" id="{{.Anchor}}">
<h2>{{.Name}}</h2>
<p class="levels">{{.Levels}} levels</p>
{{- with .Bars}}
<figure>
<svg class="metric-chart" data-column="{{.Column}}" viewBox="0 0 {{.Width}} {{.Height}}" width="{{.Width}}" height="{{.Height}}" role="img">
<title>{{.AxisTitle}} of each candidate for {{.Column}}</title>
<defs><pattern id="{{.HatchID}}" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="6" height="6" fill="#e6e6e6"></rect><line x1="0" y1="0" x2="0" y2="6" stroke="#8a8a8a" stroke-width="2.2"></line></pattern></defs>
{{- $x0 := .X0}}{{$x1 := .X1}}
{{- range .YTicks}}
<line class="grid" x1="{{$x0}}" x2="{{$x1}}" y1="{{.Pos}}" y2="{{.Pos}}"></line>
<text x="{{$x0}}" y="{{.Pos}}" dx="-6" dy="3.5" text-anchor="end">{{.Label}}</text>
{{- end}}
<text class="title" x="{{.AxisTitleX}}" y="{{.AxisTitleY}}" text-anchor="middle" transform="rotate(-90 {{.AxisTitleX}} {{.AxisTitleY}})">{{.AxisTitle}}</text>
{{- range .Bars}}
<g class="candidate" data-kind="{{.Kind}}">
<rect class="bar" data-candidate="{{.Name}}" data-value="{{.Value}}" data-kind="{{.Kind}}" x="{{.X}}" y="{{.Y}}" width="{{.W}}" height="{{.H}}" fill="{{.Fill}}" stroke="{{.Stroke}}" stroke-width="1"><title>{{.Tip}}</title></rect>
{{- if .HasErr}}
<line class="err" x1="{{.ErrX}}" x2="{{.ErrX}}" y1="{{.ErrY0}}" y2="{{.ErrY1}}"></line>
<line class="err" x1="{{.CapX0}}" x2="{{.CapX1}}" y1="{{.ErrY0}}" y2="{{.ErrY0}}"></line>
<line class="err" x1="{{.CapX0}}" x2="{{.CapX1}}" y1="{{.ErrY1}}" y2="{{.ErrY1}}"></line>
{{- end}}
{{- range .Folds}}
<circle class="fold" cx="{{.X}}" cy="{{.Y}}" r="{{.R}}"></circle>
{{- end}}
<text class="value" x="{{.ValueX}}" y="{{.ValueY}}" text-anchor="{{.ValueAnchor}}"{{if .ValueTransform}} transform="{{.ValueTransform}}"{{end}}>{{.ValueText}}</text>
<text x="{{.LabelX}}" y="{{.LabelY}}" text-anchor="{{.LabelAnchor}}" font-weight="{{.LabelWeight}}"{{if .LabelTransform}} transform="{{.LabelTransform}}"{{end}}>{{.Label}}</text>
{{- if .Note}}
<text class="note" x="{{.LabelX}}" y="{{.NoteY}}" text-anchor="middle">{{.Note}}</text>
{{- end}}
</g>
{{- end}}
<line class="axis" x1="{{.X0}}" x2="{{.X0}}" y1="{{.Y0}}" y2="{{.Y1}}"></line>
<line class="axis" x1="{{.X0}}" x2="{{.X1}}" y1="{{.Y1}}" y2="{{.Y1}}"></line>
{{- range .Legend}}
{{- if .Fill}}
<rect x="{{.X}}" y="{{.Y}}" width="13" height="12" fill="{{.Fill}}" stroke="{{.Stroke}}"></rect>
{{- end}}
<text x="{{.TextX}}" y="{{.TextY}}">{{.Label}}</text>
{{- end}}
</svg>
<figcaption>Mean {{.AxisTitle}} over the outer folds; the whisker spans ±1 standard deviation and the dots are the single folds. {{.BarsFrom}}</figcaption>
</figure>
{{- end}}
<div class="pair">
<figure>
{{- with .Rank}}
<svg class="rank-frequency" viewBox="0 0 {{.Width}} {{.Height}}" width="{{.Width}}" height="{{.Height}}" role="img">
<title>Rank-frequency curve</title>
{{- $x0 := .X0}}{{$x1 := .X1}}{{$y0 := .Y0}}{{$y1 := .Y1}}
{{- range .XTicks}}
{{- if .Minor}}
<line class="axis" x1="{{.Pos}}" x2="{{.Pos}}" y1="{{$y1}}" y2="{{.Mark}}"></line>
{{- else}}
<line class="grid" x1="{{.Pos}}" x2="{{.Pos}}" y1="{{$y0}}" y2="{{$y1}}"></line>
<line class="axis" x1="{{.Pos}}" x2="{{.Pos}}" y1="{{$y1}}" y2="{{.Mark}}"></line>
<text x="{{.Pos}}" y="{{$y1}}" dy="17" text-anchor="middle">{{.Label}}</text>
{{- end}}
{{- end}}
{{- range .YTicks}}
{{- if .Minor}}
<line class="axis" x1="{{.Mark}}" x2="{{$x0}}" y1="{{.Pos}}" y2="{{.Pos}}"></line>
{{- else}}
<line class="grid" x1="{{$x0}}" x2="{{$x1}}" y1="{{.Pos}}" y2="{{.Pos}}"></line>
<line class="axis" x1="{{.Mark}}" x2="{{$x0}}" y1="{{.Pos}}" y2="{{.Pos}}"></line>
<text x="{{$x0}}" y="{{.Pos}}" dx="-8" dy="3.5" text-anchor="end">{{.Label}}</text>
{{- end}}
{{- end}}
<polyline class="curve" points="{{.Points}}"></polyline>
<line class="axis" x1="{{.X0}}" x2="{{.X0}}" y1="{{.Y0}}" y2="{{.Y1}}"></line>
<line class="axis" x1="{{.X0}}" x2="{{.X1}}" y1="{{.Y1}}" y2="{{.Y1}}"></line>
<text class="title" x="{{.XTitleX}}" y="{{.XTitleY}}" text-anchor="middle">rank of level (log)</text>
<text class="title" x="{{.YTitleX}}" y="{{.YTitleY}}" text-anchor="middle" transform="rotate(-90 {{.YTitleX}} {{.YTitleY}})">rows (log)</text>
</svg>
<figcaption>{{.Caption}}</figcaption>
{{- else}}
<p class="none">No rank-frequency data for this column.</p>
{{- end}}
</figure>
<figure>
{{- with .Shrink}}
<svg class="shrinkage" viewBox="0 0 {{.Width}} {{.Height}}" width="{{.Width}}" height="{{.Height}}" role="img">
<title>Raw against smoothed target mean</title>
{{- $x0 := .X0}}{{$x1 := .X1}}{{$y0 := .Y0}}{{$y1 := .Y1}}
{{- range .XTicks}}
<line class="grid" x1="{{.Pos}}" x2="{{.Pos}}" y1="{{$y0}}" y2="{{$y1}}"></line>
<text x="{{.Pos}}" y="{{$y1}}" dy="15" text-anchor="middle">{{.Label}}</text>
{{- end}}
{{- range .YTicks}}
<line class="grid" x1="{{$x0}}" x2="{{$x1}}" y1="{{.Pos}}" y2="{{.Pos}}"></line>
<text x="{{$x0}}" y="{{.Pos}}" dx="-6" dy="3.5" text-anchor="end">{{.Label}}</text>
{{- end}}
<line class="diag" x1="{{.X0}}" y1="{{.Y1}}" x2="{{.X1}}" y2="{{.Y0}}"></line>
{{- range .Circles}}
<circle class="level" cx="{{.X}}" cy="{{.Y}}" r="{{.R}}"></circle>
{{- end}}
<line class="axis" x1="{{.X0}}" x2="{{.X0}}" y1="{{.Y0}}" y2="{{.Y1}}"></line>
<line class="axis" x1="{{.X0}}" x2="{{.X1}}" y1="{{.Y1}}" y2="{{.Y1}}"></line>
<text class="title" x="{{.XTitleX}}" y="{{.XTitleY}}" text-anchor="middle">raw mean target of the level</text>
<text class="title" x="{{.YTitleX}}" y="{{.YTitleY}}" text-anchor="middle" transform="rotate(-90 {{.YTitleX}} {{.YTitleY}})">smoothed (target:eb)</text>
</svg>
<figcaption>{{.Caption}}</figcaption>
{{- else}}
<p class="none">No shrinkage plot: the smoothed target mean is shown for binary and numeric targets only.</p>
{{- end}}
</figure>
</div>
<div class="candidates">
<h3>Candidates</h3>
<table>
<thead><tr>{{range .Table.Heads}}<th>{{.}}</th>{{end}}</tr></thead>
<tbody>
{{- range .Table.Rows}}
{{- if .Group}}
<tr><th class="group" colspan="{{.Span}}">{{.Group}}</th></tr>
{{- end}}
<tr class="{{.Kind}}">{{range .Cells}}<td>{{.}}</td>{{end}}</tr>
{{- end}}
</tbody>
</table>
{{- if .Reading}}
<p class="reading">{{.Reading}}</p>
{{- end}}
</div>
</section>
{{- end}}
{{- with .Joint}}
<section class="joint" id="joint">
<h2>Joint: one model over every column's winner</h2>
<p class="levels">{{.Encodings}}, scored on the same outer folds as each column alone</p>
{{- if .Table.Rows}}
<div class="candidates">
<table>
<thead><tr>{{range .Table.Heads}}<th>{{.}}</th>{{end}}</tr></thead>
<tbody>
{{- range .Table.Rows}}
<tr class="{{.Kind}}">{{range .Cells}}<td>{{.}}</td>{{end}}</tr>
{{- end}}
</tbody>
</table>
</div>
{{- end}}
<p class="reading">{{.Reading}}</p>
</section>
{{- end}}
{{- if .Columns}}
<section class="next" id="next">
<h2>Next</h2>
{{- if .Command}}
<p class="command">To encode each column by its winner: <code>{{.Command}}</code></p>
{{- else}}
<p class="command">{{.NoCommand}}</p>
{{- end}}
</section>
{{- end}}
<footer>Written by manyfold compare. Scores are means over the outer folds; every encoder was fitted inside the training folds only.</footer>
</body>
</html>
`
