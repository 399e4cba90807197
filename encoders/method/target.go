package method

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"manyfold/encoders/colstats"
	"manyfold/encoders/smooth"
	"manyfold/internal/strictjson"
	"manyfold/io/table"
)

// targetMethod is the smoothed target mean: target[:SMOOTHING][:prior=P][:logodds].
//
// SMOOTHING is eb (default: the m-estimate with m estimated by empirical
// Bayes, the method of moments over the levels), m=NUM (the m-estimate
// (s + m*p)/(n + m), Cestnik 1990) or blend=K,F (the sigmoid blend
// lambda*s/n + (1-lambda)*p with lambda = 1/(1+exp(-(n-K)/F)),
// Micci-Barreca 2001). prior=prefixN pulls a level towards the value of its
// first N bytes, prior=column:COL towards the value of the row's COL (a
// hierarchical prior). logodds writes ln(p/(1-p)) of a binary target's
// rate. An unseen level gets the prior. See colstats.Fitted.Encode for the
// formulas and their edge cases.
type targetMethod struct{}

func (targetMethod) Syntax() string {
	return "target[:eb|:m=NUM|:blend=K,F][:prior=prefixN|:prior=column:COL][:logodds]"
}

func (targetMethod) Summary() string {
	return "smoothed target mean, out of fold: <col>_tmean (<col>_tmean_<class> for a multi-class target); eb (default) estimates m by empirical Bayes; a prior pulls a level towards its prefix's or the row's COL value"
}

func (targetMethod) Name() string { return "target" }

func (m targetMethod) Parse(args []string) (Encoding, error) {
	e := &targetEnc{sm: colstats.Smoothing{Kind: colstats.SmoothEB}}
	smSet := false
	for i := 0; i < len(args); i++ {
		a := args[i]
		switch {
		case a == "eb" || strings.HasPrefix(a, "m=") || strings.HasPrefix(a, "blend="):
			if smSet {
				return nil, errors.New("two smoothings; give one of eb, m=NUM, blend=K,F")
			}
			sm, err := ParseSmoothing(a)
			if err != nil {
				return nil, err
			}
			e.sm, smSet = sm, true
		case strings.HasPrefix(a, "prior="):
			if !e.prior.None() {
				return nil, errors.New("two priors")
			}
			v := a[len("prior="):]
			switch {
			case strings.HasPrefix(v, "prefix"):
				n, err := strconv.Atoi(v[len("prefix"):])
				if err != nil || n < 1 || n > 1<<20 {
					return nil, fmt.Errorf("prior=%s: want prefixN with N from 1 to %d", v, 1<<20)
				}
				e.prior.Prefix = n
			case v == "column" && i+1 < len(args) && args[i+1] != "":
				i++
				e.prior.Column = args[i]
			default:
				return nil, fmt.Errorf("prior=%s: want prior=prefixN or prior=column:COL", v)
			}
		case a == "logodds":
			if e.logodds {
				return nil, errors.New("logodds is given twice")
			}
			e.logodds = true
		default:
			return nil, fmt.Errorf("unknown parameter %q (want eb, m=NUM, blend=K,F, prior=prefixN, prior=column:COL or logodds)", a)
		}
	}
	e.sm.Interior = e.logodds
	return e, nil
}

// ParseSmoothing parses eb, m=NUM or blend=K,F.
func ParseSmoothing(s string) (colstats.Smoothing, error) {
	switch {
	case s == "eb":
		return colstats.Smoothing{Kind: colstats.SmoothEB}, nil
	case strings.HasPrefix(s, "m="):
		m, err := strconv.ParseFloat(s[2:], 64)
		if err != nil || !(m >= 0) || math.IsInf(m, 1) {
			return colstats.Smoothing{}, fmt.Errorf("%s: m must be a finite number >= 0", s)
		}
		return colstats.Smoothing{Kind: colstats.SmoothM, M: m}, nil
	case strings.HasPrefix(s, "blend="):
		ks, fs, ok := strings.Cut(s[6:], ",")
		k, err1 := strconv.ParseFloat(ks, 64)
		f, err2 := strconv.ParseFloat(fs, 64)
		if !ok || err1 != nil || err2 != nil || math.IsNaN(k) || math.IsInf(k, 0) || !(f >= 0) || math.IsInf(f, 1) {
			return colstats.Smoothing{}, fmt.Errorf("%s: want blend=K,F with finite K and F >= 0", s)
		}
		return colstats.Smoothing{Kind: colstats.SmoothBlend, K: k, F: f}, nil
	}
	return colstats.Smoothing{}, fmt.Errorf("smoothing %q: want eb, m=NUM or blend=K,F", s)
}

// smoothingString is the grammar's text of a smoothing.
func smoothingString(s colstats.Smoothing) string {
	switch s.Kind {
	case colstats.SmoothM:
		return "m=" + formatFloat(s.M)
	case colstats.SmoothBlend:
		return "blend=" + formatFloat(s.K) + "," + formatFloat(s.F)
	}
	return "eb"
}

// targetEnc is a parsed target encoding.
type targetEnc struct {
	sm      colstats.Smoothing
	prior   Prior
	logodds bool
}

func (e *targetEnc) Method() Method { return targetMethod{} }

func (e *targetEnc) String() string {
	s := "target:" + smoothingString(e.sm)
	switch {
	case e.prior.Prefix > 0:
		s += ":prior=prefix" + strconv.Itoa(e.prior.Prefix)
	case e.prior.Column != "":
		s += ":prior=column:" + e.prior.Column
	}
	if e.logodds {
		s += ":logodds"
	}
	return s
}

func (e *targetEnc) Needs() Needs { return Needs{Target: true, Prior: e.prior} }

// Smoothing returns the encoding's smoothing.
func (e *targetEnc) Smoothing() colstats.Smoothing { return e.sm }

func (e *targetEnc) Validate(p Pass) error {
	if !e.prior.None() && p != KFold && p != InSample {
		return fmt.Errorf("%s: a hierarchical prior works with the kfold and none schemes", e)
	}
	return nil
}

func (e *targetEnc) Check(task colstats.Task, classes int) error {
	if e.logodds && task != colstats.Binary {
		return fmt.Errorf("%s: log-odds needs a binary target; this one is %s", e, task)
	}
	return nil
}

// targetFit is a target encoding fitted on a column: per output o, the fit
// over all rows (full[o]) and over the rows of all folds but f
// (byFold[f][o]); a column loaded from a mapping table holds the stored
// values (tmean[o][slot]) instead of deriving them.
type targetFit struct {
	e      *targetEnc
	c      *Column
	full   []colstats.Fitted
	byFold [][]colstats.Fitted
	tmean  [][]float64
	parent *targetFit // hierarchical prior: the parent levels' fit
}

func (e *targetEnc) Fit(c *Column) Fitted {
	f := e.fit(c)
	if c.Parent != nil {
		f.parent = e.fit(c.Parent)
		p := f.parent
		p.tmean = make([][]float64, len(p.full))
		for o := range p.full {
			p.tmean[o] = make([]float64, p.c.St.NumLevels())
			for l := range p.tmean[o] {
				p.tmean[o][l] = p.value(l, -1, o, -1, p.full[o])
			}
		}
	}
	return f
}

// fit derives the fits of one column (or of a column's parent levels).
func (e *targetEnc) fit(c *Column) *targetFit {
	// The canonical order is needed only where float sums over the levels
	// depend on their order (empirical-Bayes moments, regression sums);
	// otherwise it is sorted when the mapping tables are written.
	var order []uint32
	if c.St.Task == colstats.Regression || e.sm.Kind == colstats.SmoothEB {
		order = c.Order()
	}
	full, byFold := c.St.FitFolds(c.Pos, e.sm, c.Keep, order)
	return &targetFit{e: e, c: c, full: full, byFold: byFold}
}

func (f *targetFit) Outputs() []table.Field {
	if f.c.Task == colstats.Multiclass {
		out := make([]table.Field, len(f.c.Classes))
		for i, cl := range f.c.Classes {
			out[i] = table.Field{Name: "tmean_" + cl, Kind: table.Float64}
		}
		return out
	}
	return []table.Field{{Name: "tmean", Kind: table.Float64}}
}

// value encodes level slot l (-1: unseen) for output o from the rows of all
// folds but exclude, with fit ft. pl is the slot of the level's parent (-1:
// unseen) when the column has a hierarchical prior. An unseen or left-out
// level gets the prior: the global one, or its parent's value.
func (f *targetFit) value(l, pl, o, exclude int, ft colstats.Fitted) float64 {
	c := f.c
	if p := f.parent; p != nil {
		pft := p.full[o]
		if exclude >= 0 {
			pft = p.byFold[exclude][o]
		}
		if pl < 0 || !p.c.Keep[pl] {
			ft.Prior = pft.Prior
		} else if exclude < 0 && p.tmean != nil {
			ft.Prior = p.tmean[o][pl]
		} else {
			ft.Prior = pft.Encode(p.c.St.Target(pl, o, exclude, c.Pos))
		}
	}
	if l < 0 || !c.Keep[l] {
		return ft.Prior
	}
	return ft.Encode(c.St.Target(l, o, exclude, c.Pos))
}

// parentOf returns the parent slot of slot l, or -1.
func (f *targetFit) parentOf(l int) int {
	if f.c.ParentOf == nil || l < 0 {
		return -1
	}
	return int(f.c.ParentOf[l])
}

// fullValue returns the value of slot l for output o from all rows.
func (f *targetFit) fullValue(o, l int) float64 {
	if f.tmean != nil {
		return f.tmean[o][l]
	}
	return f.value(l, f.parentOf(l), o, -1, f.full[o])
}

// fast reports whether the k-fold pass takes the binary fast path: two
// classes, no hierarchical prior, values computed from the statistics.
func (f *targetFit) fast() bool {
	c := f.c
	return c.Task == colstats.Binary && len(c.Classes) == 2 && c.St.Classes == 2 && f.parent == nil && f.tmean == nil && len(f.full) == 1
}

func (f *targetFit) Encoder(p Pass) Encoder {
	te := &targetEncoder{f: f, pass: p}
	if p == Ordered && f.full != nil {
		te.running = colstats.NewRunning(f.c.St.NumLevels(), len(f.full), f.c.Task, f.c.St.Origin)
	}
	return te
}

// targetEncoder encodes the rows of one pass.
type targetEncoder struct {
	f    *targetFit
	pass Pass
	// running holds, for the ordered scheme, the statistics of the rows
	// read so far of every level and output.
	running *colstats.Running
}

// Start starts the ordered scheme's statistics from the rows before the
// part of the table to be encoded (see Starter).
func (te *targetEncoder) Start(b Before) {
	if te.running != nil {
		b.start(te.running, te.f.c.Pos)
	}
}

func (te *targetEncoder) Encode(r *Rows, dst []table.Column) {
	f := te.f
	if te.pass == KFold && f.fast() {
		te.encodeFolds(r, dst[0].ResetFloats(r.N))
		return
	}
	for o := range f.full {
		te.encodeOutput(r, o, dst[o].ResetFloats(r.N))
	}
}

func (te *targetEncoder) encodeOutput(r *Rows, o int, out []float64) {
	f, c := te.f, te.f.c
	for i := 0; i < r.N; i++ {
		l := int(r.Slots[i])
		pl := -1
		if r.ParentSlots != nil {
			pl = int(r.ParentSlots[i])
		}
		var v float64
		switch te.pass {
		case Apply, InSample:
			switch {
			case f.parent != nil && c.ParentOf == nil:
				// The prior depends on the row, not only the level.
				v = f.value(l, pl, o, -1, f.full[o])
			case l >= 0 && c.Keep[l]:
				v = f.fullValue(o, l)
			default:
				v = f.value(-1, pl, o, -1, f.full[o])
			}
		case KFold:
			fold := int(r.Fold[i])
			v = f.value(l, pl, o, fold, f.byFold[fold][o])
		case LeaveOneOut:
			v = f.leaveOneOut(l, pl, o, rowTarget(r, i))
		case Ordered:
			v = te.next(l, o, rowTarget(r, i))
		}
		if f.e.logodds {
			v = smooth.LogOdds(v)
		}
		out[i] = v
	}
}

// encodeFolds sets out[i] to the out-of-fold target mean of row i (what
// value gives with the fold's fit) from one read of the row's counts
// (Stats.OutOfFold2s), which also gives the rows of its level: they are
// handed to the encodings that need them (Rows.SetLevelRows).
func (te *targetEncoder) encodeFolds(r *Rows, out []float64) {
	f, c := te.f, te.f.c
	const part = 512
	var nb, kb, rb [part]uint64
	rows := r.LevelRowsBuf()
	for start := 0; start < r.N; start += part {
		end := min(start+part, r.N)
		ps, pf := r.Slots[start:end], r.Fold[start:end]
		c.St.OutOfFold2s(ps, pf, c.Pos, nb[:], kb[:], rb[:])
		for j, l := range ps {
			i := start + j
			ft := &f.byFold[pf[j]][0]
			kept := l >= 0 && c.Keep[l]
			v := ft.Prior
			rows[i] = 0
			if kept {
				v = ft.Encode(colstats.Agg{N: float64(nb[j]), Sum: float64(kb[j]), SumSq: float64(kb[j])})
				rows[i] = rb[j]
			}
			if f.e.logodds {
				v = smooth.LogOdds(v)
			}
			out[i] = v
		}
	}
	r.SetLevelRows()
}

// target is one row's target: a class index or a value; ok is false when
// it is unknown.
type target struct {
	cls int
	val float64
	ok  bool
}

func rowTarget(r *Rows, i int) target {
	if r.Cls != nil {
		return target{cls: int(r.Cls[i]), ok: r.Cls[i] >= 0}
	}
	if r.Vals != nil {
		return target{val: r.Vals[i], ok: r.Vals[i] == r.Vals[i]}
	}
	return target{}
}

// contribution returns what a row with target t adds to the sum of output
// o: its value less the statistics' origin (regression), 1 or 0 for its
// class.
func (f *targetFit) contribution(t target, o int) float64 {
	c := f.c
	switch c.Task {
	case colstats.Regression:
		return t.val - c.St.Origin
	case colstats.Binary:
		o = c.Pos
	}
	if t.cls == o {
		return 1
	}
	return 0
}

// leaveOneOut encodes a training row from the statistics of all other rows
// of its level: (s - y + m*p) / (n - 1 + m), the prior and m of all rows.
// Leave-one-out leaks the row's own label (see the README).
func (f *targetFit) leaveOneOut(l, pl, o int, t target) float64 {
	ft := f.full[o]
	if l < 0 || !f.c.Keep[l] {
		return f.value(-1, pl, o, -1, ft)
	}
	a := f.c.St.Target(l, o, -1, f.c.Pos)
	if t.ok {
		y := f.contribution(t, o)
		a.N--
		a.Sum -= y
		a.SumSq -= y * y
	}
	if f.parent != nil {
		ft.Prior = f.value(-1, pl, o, -1, ft)
	}
	return ft.Encode(a)
}

// next encodes a row of slot l from the rows before it, the m-estimate or
// blend of their statistics with the prior and m of all rows (the ordered
// target statistic), then counts the row. Each output keeps statistics of
// its own, so outputs may be encoded one after another over a batch.
func (te *targetEncoder) next(l, o int, t target) float64 {
	f := te.f
	ft := f.full[o]
	if l < 0 || !f.c.Keep[l] {
		return ft.Prior
	}
	v := ft.Encode(te.running.Agg(l, o))
	switch {
	case !t.ok:
	case f.c.Task == colstats.Regression:
		te.running.AddValue(l, t.val)
	default:
		te.running.AddClass(l, o, f.contribution(t, o))
	}
	return v
}

func (f *targetFit) TableColumns() []table.Field { return f.Outputs() }

func (f *targetFit) FillTable(lv *Levels, dst []table.Column) {
	if f.parent != nil || f.tmean != nil {
		f.fillValues(lv, dst)
		return
	}
	c := f.c
	for o := range f.full {
		out := dst[o].ResetFloats(len(lv.Slots))
		ft := &f.full[o]
		for i := range lv.Slots {
			if i == 0 && lv.Unkept0 {
				out[i] = ft.Prior
				continue
			}
			out[i] = ft.Encode(lv.Agg(i, o, c.Pos, c.Task))
		}
	}
}

// fillValues fills each output's column with the full-data value of the
// levels of lv, one level at a time (fullValue).
func (f *targetFit) fillValues(lv *Levels, dst []table.Column) {
	for o := range f.full {
		out := dst[o].ResetFloats(len(lv.Slots))
		for i, l := range lv.Slots {
			out[i] = f.fullValue(o, l)
		}
	}
}

func (f *targetFit) LoadTable(slots []int32, src []table.Column) error {
	return f.loadValues(slots, src)
}

// loadValues reads stored values into tmean, checking each.
func (f *targetFit) loadValues(slots []int32, src []table.Column) error {
	names := f.Outputs()
	n := f.c.St.NumLevels()
	for o := range f.tmean {
		for len(f.tmean[o]) < n {
			f.tmean[o] = append(f.tmean[o], 0)
		}
		for i, l := range slots {
			v := src[o].Floats[i]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return &LoadError{Row: i, Msg: fmt.Sprintf("%s %g: want a finite number", names[o].Name, v)}
			}
			if f.c.Task != colstats.Regression && (v < 0 || v > 1) {
				return &LoadError{Row: i, Msg: fmt.Sprintf("%s %g: want a rate within [0, 1]", names[o].Name, v)}
			}
			f.tmean[o][l] = v
		}
	}
	return nil
}

// Finish checks the stored values of a column without a hierarchical prior
// against those its counts give with the manifest's priors, smoothing
// weights and smoothing: the prior for a level left out, the smoothed mean
// of its rows otherwise. A manifest whose prior, m or smoothing was
// changed, or a table fitted with others, is refused.
func (f *targetFit) Finish() error {
	if f.parent != nil {
		return nil
	}
	c := f.c
	st := c.St
	for l := 0; l < st.NumLevels(); l++ {
		if l == 0 && st.RowCount(0) == 0 {
			continue // no null level in the table
		}
		for o := range f.full {
			ft := &f.full[o]
			want := ft.Prior
			if c.Keep[l] {
				want = ft.Encode(st.Target(l, o, -1, c.Pos))
			}
			got := f.tmean[o][l]
			if math.Abs(got-want) <= 1e-9*max(1, math.Abs(want)) {
				continue
			}
			level := "the null level"
			if l > 0 {
				level = strconv.Quote(string(st.Bytes(l)))
			}
			return fmt.Errorf("%s: encoded value %g, but its counts with the manifest's prior, m and smoothing give %g", level, got, want)
		}
	}
	return nil
}

// ParentTableColumns, FillParentTable and LoadParentTable are the
// parent levels' own values, in the parent table.
func (f *targetFit) ParentTableColumns() []table.Field { return f.Outputs() }

func (f *targetFit) FillParentTable(lv *Levels, dst []table.Column) { f.parent.fillValues(lv, dst) }

func (f *targetFit) LoadParentTable(slots []int32, src []table.Column) error {
	return f.parent.loadValues(slots, src)
}

// targetManifest is what the manifest records of a target encoding, per
// output: the prior and the smoothing weight m (null: infinite, or none
// for a blend), and the same of the parent levels with a hierarchical
// prior.
type targetManifest struct {
	Prior       []*float64 `json:"prior"`
	M           []*float64 `json:"m"`
	ParentPrior []*float64 `json:"parent_prior,omitempty"`
	ParentM     []*float64 `json:"parent_m,omitempty"`
}

func (f *targetFit) Manifest() any {
	var tm targetManifest
	for _, ft := range f.full {
		tm.Prior = append(tm.Prior, optFloat(ft.Prior))
		tm.M = append(tm.M, optFloat(ft.M))
	}
	if f.parent != nil {
		for _, ft := range f.parent.full {
			tm.ParentPrior = append(tm.ParentPrior, optFloat(ft.Prior))
			tm.ParentM = append(tm.ParentM, optFloat(ft.M))
		}
	}
	return tm
}

func (e *targetEnc) Load(c *Column, raw json.RawMessage) (Fitted, error) {
	var tm targetManifest
	if err := strictjson.Decode(raw, &tm); err != nil {
		return nil, err
	}
	if !c.Supervised {
		return nil, errors.New("a target encoding without a target")
	}
	outs := c.St.Outputs()
	rate := c.Task != colstats.Regression
	f, err := e.load(c, tm.Prior, tm.M, outs, rate, "prior", "m")
	if err != nil {
		return nil, err
	}
	if (c.Parent != nil) != (tm.ParentPrior != nil) {
		return nil, errors.New("parent_prior: present exactly when the column has a hierarchical prior")
	}
	if c.Parent != nil {
		if f.parent, err = e.load(c.Parent, tm.ParentPrior, tm.ParentM, outs, rate, "parent_prior", "parent_m"); err != nil {
			return nil, err
		}
	} else if tm.ParentM != nil {
		return nil, errors.New("parent_m without a hierarchical prior")
	}
	return f, nil
}

// load checks a column's priors and smoothing weights (outs of each,
// priors finite, within [0, 1] for a rate, weights null (infinite) or at
// least 0: the m of m=M, null for a blend) and returns the fit they give.
func (e *targetEnc) load(c *Column, prior, ms []*float64, outs int, rate bool, priorName, mName string) (*targetFit, error) {
	if len(prior) != outs {
		return nil, fmt.Errorf("%s has %d values; the target implies %d", priorName, len(prior), outs)
	}
	if len(ms) != outs {
		return nil, fmt.Errorf("%s has %d values; the target implies %d", mName, len(ms), outs)
	}
	f := &targetFit{e: e, c: c, tmean: make([][]float64, outs)}
	for o := 0; o < outs; o++ {
		p, m := prior[o], ms[o]
		switch {
		case p == nil || math.IsNaN(*p) || math.IsInf(*p, 0):
			return nil, fmt.Errorf("%s[%d] is not a number", priorName, o)
		case rate && (*p < 0 || *p > 1):
			return nil, fmt.Errorf("%s[%d] is %g, not a rate", priorName, o, *p)
		case m != nil && !(*m >= 0):
			return nil, fmt.Errorf("%s[%d] is %g; want a number >= 0 or null (infinite)", mName, o, *m)
		case e.sm.Kind == colstats.SmoothM && (m == nil || *m != e.sm.M):
			return nil, fmt.Errorf("%s[%d] is %s, but the smoothing is m=%g", mName, o, optText(m), e.sm.M)
		case e.sm.Kind == colstats.SmoothBlend && m != nil:
			return nil, fmt.Errorf("%s[%d] is %g, but the smoothing is a blend, which has no m", mName, o, *m)
		}
		mv := math.Inf(1)
		if m != nil {
			mv = *m
		}
		f.full = append(f.full, colstats.Fitted{Prior: *p, M: mv, Sm: e.sm, Origin: c.St.Origin})
	}
	return f, nil
}

func optFloat(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// optText prints an optional number, null when absent.
func optText(p *float64) string {
	if p == nil {
		return "null"
	}
	return strconv.FormatFloat(*p, 'g', -1, 64)
}

// LoadError is a bad value in row Row of the batch a Fitted.LoadTable read.
type LoadError struct {
	Row int
	Msg string
}

func (e *LoadError) Error() string { return e.Msg }

// ParentTabler is a Fitted whose hierarchical prior's parent levels have
// values of their own in the parent table.
type ParentTabler interface {
	ParentTableColumns() []table.Field
	FillParentTable(lv *Levels, dst []table.Column)
	LoadParentTable(slots []int32, src []table.Column) error
}

func (e *targetEnc) Names() []string { return []string{"tmean"} }

// singletonWarn is the share of a column's levels seen once past which a
// target mean without a hierarchy is reported.
const singletonWarn = 0.9

// Warnings reports a target mean on a column of nearly all singletons with
// neither a minimum of rows per level nor a hierarchical prior: its levels
// carry almost no statistic to new rows, and their means are a row's own
// label pulled towards the prior.
func (f *targetFit) Warnings() []string {
	c := f.c
	if f.parent != nil || c.St == nil || c.Distinct < 100 {
		return nil
	}
	once, kept := 0, 0
	for l, k := range c.Keep {
		if !k {
			continue
		}
		kept++
		if c.St.RowCount(l) == 1 {
			once++
		}
	}
	if kept < c.Distinct || float64(once) < singletonWarn*float64(kept) {
		return nil // levels were left out (--min-level-rows), or few are singletons
	}
	return []string{fmt.Sprintf("%s: %.0f%% of its %d levels are seen once; consider a minimum of rows per level or a hierarchical prior (prior=prefixN)", f.e, 100*float64(once)/float64(kept), kept)}
}
