package pipeline

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"manyfold/encoders/method"
	"manyfold/io/table"
)

// Drift gathers, during a pass of new rows (Encode with NewRows and
// EncodeOptions.Drift), how the rows of each encoded column differ from
// the training rows the mapping tables summarise, and Report turns that
// into a DriftReport. Per column it counts the new rows of every level of
// the tables, the rows of each unseen value by its bytes (at most
// DriftOptions.MaxUnseen distinct values: memory does not grow with the
// rows), and, where the rows hold the target, the target mean's Score.
//
// The figures of a column, N its new rows:
//
//   - unseen rows: the rows whose level the tables do not hold or hold as
//     unseen (left out by min_level_rows, the null level with nulls
//     unseen), which the encodings give the prior; their share, /N;
//   - unseen levels: the distinct levels of the new rows that are unseen,
//     the null level counting as a level; their share of the new rows'
//     distinct levels;
//   - the population stability index of the level distribution (PSI);
//   - the target mean's AUC or RMSE on the new rows (Score) against the
//     training score the manifest recorded.
type Drift struct {
	m      *Model
	opt    DriftOptions
	file   string
	tr     *targetReader // nil when the rows lack the target or no column is scored
	cls    []int32       // the batch's classes (-1 unknown), or
	vals   []float64     // its targets (NaN unknown)
	cols   []driftCol
	rows   int64
	target bool // the rows hold the target column
}

// DriftOptions says what a drift report lists.
type DriftOptions struct {
	// MinLevelRows is the fewest rows of the new data that an unseen
	// level must have to be listed by its value: raised to the fit's
	// min_level_rows and to 1, so that the report names no level the
	// tables would not have stored.
	MinLevelRows uint64
	// Top is the most unseen levels listed per column (0: 10).
	Top int
	// Bins is the number of the training table's largest levels that get
	// a bin of their own in the PSI, before one bin for every other level
	// (0: 20).
	Bins int
	// MaxUnseen is the most distinct unseen values counted per column
	// (0: 100,000); the rows of values met after that are counted
	// together, and the report says so.
	MaxUnseen int
	// Training holds, per column, the training score the manifest
	// recorded (ManifestCol.TrainingScore; LoadTablesManifest), nil for
	// none.
	Training []*float64
}

// The defaults of DriftOptions.
const (
	DefaultDriftTop       = 10
	DefaultDriftBins      = 20
	DefaultDriftMaxUnseen = 100_000
)

// PSIFloor is the share a bin with no rows is given in the PSI (in the
// training or the new rows), so that its logarithm stays finite: common
// practice.
const PSIFloor = 0.0001

// driftCol is what the pass counts of one column.
type driftCol struct {
	score      scoreAcc
	counts     []int64          // rows per level slot of the tables
	unseen     map[string]int32 // unseen value -> index into unseenRows
	unseenRows []int64
	nullRows   int64 // null rows whose null level is unseen
	untracked  int64 // rows of unseen values met once unseen was full
	scratch    []byte
}

// NewDrift returns the gatherer of the drift of new rows from the mapping
// tables of m (a model loaded by LoadTables), for EncodeOptions.Drift.
func NewDrift(m *Model, opt DriftOptions) *Drift {
	if opt.Top <= 0 {
		opt.Top = DefaultDriftTop
	}
	if opt.Bins <= 0 {
		opt.Bins = DefaultDriftBins
	}
	if opt.MaxUnseen <= 0 {
		opt.MaxUnseen = DefaultDriftMaxUnseen
	}
	opt.MinLevelRows = max(opt.MinLevelRows, m.Spec.MinLevelRows, 1)
	return &Drift{m: m, opt: opt}
}

// start readies the drift of a pass over batches of schema from file.
func (d *Drift) start(m *Model, schema *table.Schema, file string, at [][]int) (observer, error) {
	if m != d.m {
		return nil, errors.New("drift: gathered for other mapping tables than the pass's")
	}
	d.file, d.rows = file, 0
	tcol := -1
	if t := m.Spec.Target; t != "" && metricOf(m.Task) != "" {
		tcol = schema.Index(t)
	}
	d.target = tcol >= 0
	d.cols = make([]driftCol, len(m.Cols))
	scored := false
	for ci, c := range m.Cols {
		p := -1
		if d.target && c.supervised {
			p = m.targetMeanAt(ci, at[ci])
		}
		d.cols[ci] = driftCol{score: newScoreAcc(p, m.Task, m.Pos, len(m.Classes)),
			counts: make([]int64, c.St.NumLevels()), unseen: map[string]int32{}}
		scored = scored || d.cols[ci].score.at >= 0
	}
	d.tr = nil
	if scored {
		d.tr = newTargetReader(file, m.Spec.Target, tcol, schema.Fields[tcol].Kind, m.Task.String(), m.Classes)
	}
	return d, nil
}

// batch reads the batch's targets.
func (d *Drift) batch(b *table.Batch) error {
	d.rows += int64(b.Rows)
	if d.tr == nil {
		return nil
	}
	if err := d.tr.read(b); err != nil {
		return err
	}
	d.cls, d.vals = nil, nil
	if d.tr.regress {
		d.vals = d.tr.vals
	} else {
		d.cls = d.tr.cls
	}
	return nil
}

// column counts the rows of column ci in a batch: the rows of each level
// slot, the unseen values, the score.
func (d *Drift) column(ci int, rw *method.Rows, out []table.Column) {
	dc, keep := &d.cols[ci], d.m.Cols[ci].Keep
	for i, l := range rw.Slots {
		if l >= 0 {
			dc.counts[l]++
			if keep[l] {
				continue
			}
		}
		dc.addUnseen(rw.Values, i, d.opt.MaxUnseen)
	}
	if a := &dc.score; a.at >= 0 {
		a.add(out[a.at].Floats[:rw.N], d.cls, d.vals)
	}
}

// addUnseen counts row i of c, whose level is unseen.
func (dc *driftCol) addUnseen(c *table.Column, i, maxUnseen int) {
	if c == nil {
		dc.untracked++
		return
	}
	if c.IsNull(i) {
		dc.nullRows++
		return
	}
	var key []byte
	if c.Form == table.FormText || c.Form == table.FormDict {
		key = c.Bytes(i)
	} else {
		dc.scratch = c.AppendText(dc.scratch[:0], i)
		key = dc.scratch
	}
	if j, ok := dc.unseen[string(key)]; ok {
		dc.unseenRows[j]++
		return
	}
	if len(dc.unseenRows) >= maxUnseen {
		dc.untracked++
		return
	}
	dc.unseen[string(key)] = int32(len(dc.unseenRows))
	dc.unseenRows = append(dc.unseenRows, 1)
}

func (d *Drift) finish(*Summary) {}

// DriftReport is the drift of a file of new rows from the mapping tables
// that encoded it, per encoded column, and the thresholds it was held to.
type DriftReport struct {
	Tool   string `json:"tool"`
	File   string `json:"file"`
	Tables string `json:"tables"` // set by the caller
	Rows   int64  `json:"rows"`
	// Target is the manifest's target when the rows hold it (null
	// otherwise), Task the fitted task; TargetRows the rows whose target
	// is known (for classification, one of the fitted classes).
	Target     *string `json:"target"`
	Task       string  `json:"task"`
	TargetRows *int64  `json:"target_rows"`
	// MinLevelRows is the fewest rows of a listed unseen level.
	MinLevelRows uint64        `json:"min_level_rows"`
	Columns      []DriftColumn `json:"columns"`
	// FailOn holds the thresholds given (Check), Failed the figures
	// over them.
	FailOn Thresholds `json:"fail_on"`
	Failed []Breach   `json:"failed"`
}

// DriftColumn is the drift of one encoded column.
type DriftColumn struct {
	Column           string  `json:"column"`
	UnseenRows       int64   `json:"unseen_rows"`
	UnseenRowShare   float64 `json:"unseen_row_share"`
	Levels           int64   `json:"levels"` // distinct levels of the new rows
	UnseenLevels     int64   `json:"unseen_levels"`
	UnseenLevelShare float64 `json:"unseen_level_share"`
	// UnseenCapped says that more distinct unseen values were met than
	// were counted (DriftOptions.MaxUnseen): Levels and UnseenLevels are
	// then lower bounds, and UncountedRows rows of the later values are in
	// no level of TopUnseen.
	UnseenCapped  bool  `json:"unseen_levels_capped"`
	UncountedRows int64 `json:"unseen_rows_uncounted"`
	// TopUnseen lists the unseen levels with the most rows (at least
	// DriftReport.MinLevelRows), most first; Withheld counts the unseen
	// levels not listed because they have fewer.
	TopUnseen []LevelRows `json:"top_unseen"`
	Withheld  int64       `json:"unseen_levels_withheld"`
	// PSI is the population stability index over Bins (null without new
	// rows).
	PSI   *float64    `json:"psi"`
	Bins  []PSIBin    `json:"psi_bins"`
	Score *DriftScore `json:"score"` // null without a target encoding scored on the new rows
}

// LevelRows is a level (null: the null level) and its rows.
type LevelRows struct {
	Level *string `json:"level"`
	Rows  int64   `json:"rows"`
}

// PSIBin is a bin of the PSI: a level of the training table (Level; null
// for the null level) or, with Other, every other level, unseen ones
// included; its training rows and share (Expected), its new rows and
// share (Actual).
type PSIBin struct {
	Level        *string `json:"level"`
	Other        bool    `json:"other"`
	TrainingRows int64   `json:"training_rows"`
	Rows         int64   `json:"rows"`
	Expected     float64 `json:"expected"`
	Actual       float64 `json:"actual"`
}

// DriftScore is the target mean's Score on the new rows (New) against the
// training rows' (Training, from the manifest; null when not recorded),
// and Change = New - Training.
type DriftScore struct {
	Metric   string   `json:"metric"`
	Output   string   `json:"output"` // the encoded column scored
	Rows     int64    `json:"rows"`   // new rows with a known target
	New      *float64 `json:"new"`
	Training *float64 `json:"training"`
	Change   *float64 `json:"change"`
}

// Report returns the drift of the rows of the pass.
func (d *Drift) Report() *DriftReport {
	m := d.m
	r := &DriftReport{Tool: "manyfold " + Version, File: d.file, Rows: d.rows, Task: m.Task.String(),
		MinLevelRows: d.opt.MinLevelRows, Failed: []Breach{}}
	if m.Spec.Target == "" {
		r.Task = ""
	}
	if d.target {
		t := m.Spec.Target
		r.Target = &t
	}
	for ci := range m.Cols {
		dc := d.report(ci)
		if dc.Score != nil && r.TargetRows == nil {
			n := dc.Score.Rows
			r.TargetRows = &n
		}
		r.Columns = append(r.Columns, dc)
	}
	return r
}

// report returns the drift of column ci.
func (d *Drift) report(ci int) DriftColumn {
	c, dc := d.m.Cols[ci], &d.cols[ci]
	out := DriftColumn{Column: c.Name, UnseenRows: d.rows, UncountedRows: dc.untracked,
		UnseenCapped: dc.untracked > 0, TopUnseen: []LevelRows{}}
	for l, n := range dc.counts {
		if n > 0 && c.Keep[l] {
			out.UnseenRows -= n
			out.Levels++
		}
	}
	var unseen []LevelRows
	if dc.nullRows > 0 {
		unseen = append(unseen, LevelRows{Rows: dc.nullRows})
	}
	for v, j := range dc.unseen {
		s := v
		unseen = append(unseen, LevelRows{Level: &s, Rows: dc.unseenRows[j]})
	}
	out.UnseenLevels = int64(len(unseen))
	out.Levels += out.UnseenLevels
	if d.rows > 0 {
		out.UnseenRowShare = float64(out.UnseenRows) / float64(d.rows)
		out.UnseenLevelShare = float64(out.UnseenLevels) / float64(out.Levels)
	}
	slices.SortFunc(unseen, byRowsThenLevel)
	for _, u := range unseen {
		switch {
		case u.Rows < int64(d.opt.MinLevelRows):
			out.Withheld++
		case len(out.TopUnseen) < d.opt.Top:
			out.TopUnseen = append(out.TopUnseen, u)
		}
	}
	out.Bins = d.bins(ci)
	if d.rows > 0 {
		e, a := make([]float64, len(out.Bins)), make([]float64, len(out.Bins))
		for i, b := range out.Bins {
			e[i], a[i] = b.Expected, b.Actual
		}
		psi := PSI(e, a)
		out.PSI = &psi
	}
	out.Score = d.score(ci)
	return out
}

// byRowsThenLevel orders levels by rows, most first, then the null level,
// then by their bytes.
func byRowsThenLevel(a, b LevelRows) int {
	switch {
	case a.Rows != b.Rows:
		if a.Rows > b.Rows {
			return -1
		}
		return 1
	case a.Level == nil || b.Level == nil:
		if a.Level == nil && b.Level != nil {
			return -1
		}
		if b.Level == nil && a.Level != nil {
			return 1
		}
		return 0
	}
	return strings.Compare(*a.Level, *b.Level)
}

// bins returns the PSI's bins of column ci: the training table's
// DriftOptions.Bins levels of the most rows (ties by the level's bytes,
// the null level first), then one bin for every other level, unseen
// levels included. A level's expected share is its rows in the table
// over the manifest's rows; "other" gets the rest of the training rows
// (levels left out by min_level_rows included), 0 when there is none.
func (d *Drift) bins(ci int) []PSIBin {
	c, dc := d.m.Cols[ci], &d.cols[ci]
	st := c.St
	var top []int // slots, largest first
	better := func(a, b int) bool {
		ra, rb := st.RowCount(a), st.RowCount(b)
		if ra != rb {
			return ra > rb
		}
		if a == 0 || b == 0 {
			return a == 0
		}
		return bytes.Compare(st.Bytes(a), st.Bytes(b)) < 0
	}
	for l := 0; l < st.NumLevels(); l++ {
		if st.RowCount(l) == 0 || (len(top) == d.opt.Bins && !better(l, top[len(top)-1])) {
			continue
		}
		at := len(top)
		for at > 0 && better(l, top[at-1]) {
			at--
		}
		top = slices.Insert(top, at, l)
		if len(top) > d.opt.Bins {
			top = top[:d.opt.Bins]
		}
	}
	var bins []PSIBin
	trainRest, rest := d.m.Rows, d.rows
	for _, l := range top {
		b := PSIBin{TrainingRows: int64(st.RowCount(l)), Rows: dc.counts[l]}
		if l != 0 {
			s := string(st.Bytes(l))
			b.Level = &s
		}
		trainRest -= b.TrainingRows
		rest -= b.Rows
		bins = append(bins, b)
	}
	bins = append(bins, PSIBin{Other: true, TrainingRows: trainRest, Rows: rest})
	for i := range bins {
		bins[i].Expected = float64(bins[i].TrainingRows) / float64(d.m.Rows)
		if d.rows > 0 {
			bins[i].Actual = float64(bins[i].Rows) / float64(d.rows)
		}
	}
	return bins
}

// PSI returns the population stability index of the shares actual (new
// rows) against expected (training rows) over the same bins,
//
//	PSI = Σ_i (a_i - e_i) ln(a_i / e_i),
//
// common practice in credit scoring for the shift of a score's or a
// characteristic's distribution (for example Siddiqi, Credit Risk
// Scorecards, 2006); a rule of thumb reads below 0.1 as no real shift and
// above 0.25 as a large one. A share of 0 is replaced by PSIFloor (common
// practice), so that the logarithm stays finite. NaN when the lengths
// differ.
func PSI(expected, actual []float64) float64 {
	if len(expected) != len(actual) {
		return math.NaN()
	}
	var s float64
	for i, e := range expected {
		a := actual[i]
		if e == 0 {
			e = PSIFloor
		}
		if a == 0 {
			a = PSIFloor
		}
		s += (a - e) * math.Log(a/e)
	}
	return s
}

// score returns the target mean's score of column ci on the new rows.
func (d *Drift) score(ci int) *DriftScore {
	a := &d.cols[ci].score
	sc := a.score()
	if sc == nil {
		return nil
	}
	out := &DriftScore{Metric: sc.Metric, Output: d.m.Cols[ci].Name + "_tmean", Rows: sc.Rows}
	if !math.IsNaN(sc.Value) {
		v := sc.Value
		out.New = &v
	}
	if ci < len(d.opt.Training) && d.opt.Training[ci] != nil {
		t := *d.opt.Training[ci]
		out.Training = &t
		if out.New != nil {
			ch := *out.New - t
			out.Change = &ch
		}
	}
	return out
}

// Thresholds are the figures a drift report is held to (nil: not held):
// a column's unseen row share (Unseen), unseen level share (Levels), PSI,
// its AUC's fall from training (AUCDrop: training - new) or its RMSE's
// rise (RMSERise: new - training, in the target's units).
type Thresholds struct {
	Unseen   *float64 `json:"unseen"`
	Levels   *float64 `json:"levels"`
	PSI      *float64 `json:"psi"`
	AUCDrop  *float64 `json:"auc_drop"`
	RMSERise *float64 `json:"rmse_rise"`
}

// thresholdNames are the names of the thresholds in ParseThresholds'
// grammar and in Breach.Measure.
var thresholdNames = []string{"unseen", "levels", "psi", "auc_drop", "rmse_rise"}

// field returns the threshold named name.
func (t *Thresholds) field(name string) **float64 {
	switch name {
	case "unseen":
		return &t.Unseen
	case "levels":
		return &t.Levels
	case "psi":
		return &t.PSI
	case "auc_drop":
		return &t.AUCDrop
	case "rmse_rise":
		return &t.RMSERise
	}
	return nil
}

// ParseThresholds parses a list of thresholds NAME=NUMBER separated by
// commas, such as "unseen=0.2,psi=0.25"; the names are unseen, levels,
// psi, auc_drop and rmse_rise, each given at most once, the numbers
// finite and at least 0. "" gives no threshold.
func ParseThresholds(s string) (Thresholds, error) {
	var t Thresholds
	if s == "" {
		return t, nil
	}
	for _, part := range strings.Split(s, ",") {
		name, num, ok := strings.Cut(strings.TrimSpace(part), "=")
		f := t.field(name)
		if !ok || f == nil {
			return t, fmt.Errorf("%q: want NAME=NUMBER, NAME one of %s", part, strings.Join(thresholdNames, ", "))
		}
		if *f != nil {
			return t, fmt.Errorf("%s is given twice", name)
		}
		v, err := strconv.ParseFloat(num, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
			return t, fmt.Errorf("%s=%s: want a finite number of at least 0", name, num)
		}
		*f = &v
	}
	return t, nil
}

// Breach is a column's figure over a threshold.
type Breach struct {
	Column    string  `json:"column"`
	Measure   string  `json:"measure"` // the threshold's name
	Value     float64 `json:"value"`
	Threshold float64 `json:"threshold"`
}

// Check holds the report to t: it records t and returns (and records) the
// figures strictly over their threshold, column by column in the
// thresholds' order. A figure that is not known (no rows, no training
// score) breaches nothing.
func (r *DriftReport) Check(t Thresholds) []Breach {
	r.FailOn, r.Failed = t, []Breach{}
	for _, c := range r.Columns {
		for _, name := range thresholdNames {
			th := *t.field(name)
			v, ok := c.measure(name)
			if th != nil && ok && v > *th {
				r.Failed = append(r.Failed, Breach{Column: c.Column, Measure: name, Value: v, Threshold: *th})
			}
		}
	}
	return r.Failed
}

// measure returns the column's figure that the threshold name holds, and
// whether it is known.
func (c *DriftColumn) measure(name string) (float64, bool) {
	switch name {
	case "unseen":
		return c.UnseenRowShare, c.Levels > 0
	case "levels":
		return c.UnseenLevelShare, c.Levels > 0
	case "psi":
		if c.PSI != nil {
			return *c.PSI, true
		}
	case "auc_drop", "rmse_rise":
		s := c.Score
		if s == nil || s.Change == nil {
			return 0, false
		}
		if name == "auc_drop" && s.Metric == MetricAUC {
			return -*s.Change, true
		}
		if name == "rmse_rise" && s.Metric == MetricRMSE {
			return *s.Change, true
		}
	}
	return 0, false
}
