package method

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"manyfold/encoders/colstats"
	"manyfold/internal/strictjson"
	"manyfold/io/table"
)

// woeMethod is the weight of evidence of a level for a binary target,
// woe[:a=A]:
//
//	woe_c = ln((pos_c + a) / (P + a*L)) - ln((neg_c + a) / (N + a*L))
//
// pos_c and neg_c are the level's positive and negative rows, P and N those
// of all fitting rows, L the number of levels seen (counted on all rows: it
// does not read the target) and a the additive smoothing (default 0.5, the
// half count of the Haldane-Anscombe correction, so that a level of one
// class has a finite weight). The measure is Good's (Probability and the
// Weighing of Evidence, 1950); its use for categorical predictors comes
// from credit scorecards (Siddiqi, Credit Risk Scorecards, 2006). Training
// rows get it from the rows of the other folds (kfold), from the other rows
// of the level (loo) or from the level's earlier rows (ordered, with P and
// N of all rows), as the target mean does; an unseen level, or one left
// out, gets 0, the weight of no evidence. Edge cases: a > 0 keeps every
// logarithm finite; a = 0 is refused.
type woeMethod struct{}

func (woeMethod) Syntax() string { return "woe[:a=A]" }

func (woeMethod) Summary() string {
	return "weight of evidence of a binary target, out of fold, a = 0.5 by default; unseen levels 0: <col>_woe"
}

func (woeMethod) Name() string { return "woe" }

func (woeMethod) Parse(args []string) (Encoding, error) {
	e := &woeEnc{a: 0.5}
	if err := noRepeats(args); err != nil {
		return nil, err
	}
	for _, arg := range args {
		v, ok := strings.CutPrefix(arg, "a=")
		a, err := strconv.ParseFloat(v, 64)
		if !ok || err != nil || !(a > 0) || math.IsInf(a, 1) {
			return nil, fmt.Errorf("parameter %q: want a=A with a finite A > 0", arg)
		}
		e.a = a
	}
	return e, nil
}

type woeEnc struct{ a float64 }

func (e *woeEnc) Method() Method { return woeMethod{} }

func (e *woeEnc) String() string {
	if e.a == 0.5 {
		return "woe"
	}
	return "woe:a=" + formatFloat(e.a)
}

func (e *woeEnc) Needs() Needs        { return Needs{Target: true} }
func (e *woeEnc) Names() []string     { return []string{"woe"} }
func (e *woeEnc) Validate(Pass) error { return nil }

func (e *woeEnc) Check(task colstats.Task, classes int) error {
	if task != colstats.Binary {
		return fmt.Errorf("%s needs a binary target; this one is %s", e, task)
	}
	return nil
}

// woeFit holds the totals of a fit: positives and negatives of all rows
// (full) and of the rows of all folds but f (byFold[f]), the levels seen,
// and, for a column loaded from a mapping table, the stored weights.
type woeFit struct {
	e      *woeEnc
	c      *Column
	full   woeTotals
	byFold []woeTotals
	levels float64
	stored []float64
}

type woeTotals struct{ pos, neg float64 }

func (e *woeEnc) Fit(c *Column) Fitted {
	f := &woeFit{e: e, c: c}
	for l, k := range c.Keep {
		if k && l < c.St.NumLevels() {
			f.levels++
		}
	}
	tot := c.St.CellTotals() // fold-major, two classes a fold
	folds := len(tot) / 2
	for g := 0; g < folds; g++ {
		f.full.pos += float64(tot[2*g+c.Pos])
		f.full.neg += float64(tot[2*g+1-c.Pos])
	}
	if folds > 1 {
		f.byFold = make([]woeTotals, folds)
		for g := range f.byFold {
			f.byFold[g] = woeTotals{pos: f.full.pos - float64(tot[2*g+c.Pos]), neg: f.full.neg - float64(tot[2*g+1-c.Pos])}
		}
	}
	return f
}

// weight is the formula above for a level with pos and neg rows among
// fitting rows of totals t.
func (f *woeFit) weight(pos, neg float64, t woeTotals) float64 {
	a, al := f.e.a, f.e.a*f.levels
	return math.Log((pos+a)/(t.pos+al)) - math.Log((neg+a)/(t.neg+al))
}

// counts returns the positive and negative rows of slot l over all folds
// but exclude.
func (f *woeFit) counts(l, exclude int) (pos, neg float64) {
	a := f.c.St.Target(l, 0, exclude, f.c.Pos)
	return a.Sum, a.N - a.Sum
}

// fullValue is the weight of slot l from all rows.
func (f *woeFit) fullValue(l int) float64 {
	if f.stored != nil {
		return f.stored[l]
	}
	if !f.c.Keep[l] {
		return 0
	}
	pos, neg := f.counts(l, -1)
	return f.weight(pos, neg, f.full)
}

func (f *woeFit) Outputs() []table.Field { return []table.Field{{Name: "woe", Kind: table.Float64}} }

func (f *woeFit) Encoder(p Pass) Encoder {
	we := &woeEncoder{f: f, pass: p}
	if p == Ordered {
		we.running = colstats.NewRunning(f.c.St.NumLevels(), 1, colstats.Binary, 0)
	}
	return we
}

type woeEncoder struct {
	f       *woeFit
	pass    Pass
	running *colstats.Running // ordered: each level's rows so far (N, positives)
}

// Start starts the ordered scheme's counts from the rows before the part
// of the table to be encoded (see Starter).
func (we *woeEncoder) Start(b Before) {
	if we.running != nil {
		b.start(we.running, we.f.c.Pos)
	}
}

func (we *woeEncoder) Encode(r *Rows, dst []table.Column) {
	f, c := we.f, we.f.c
	out := dst[0].ResetFloats(r.N)
	for i := 0; i < r.N; i++ {
		l := int(r.Slots[i])
		if l < 0 || !c.Keep[l] {
			out[i] = 0
			continue
		}
		switch we.pass {
		case Apply, InSample:
			out[i] = f.fullValue(l)
		case KFold:
			fold := int(r.Fold[i])
			pos, neg := f.counts(l, fold)
			out[i] = f.weight(pos, neg, f.byFold[fold])
		case LeaveOneOut:
			pos, neg := f.counts(l, -1)
			t := f.full
			if k := r.Cls[i]; k >= 0 {
				if int(k) == c.Pos {
					pos, t.pos = pos-1, t.pos-1
				} else {
					neg, t.neg = neg-1, t.neg-1
				}
			}
			out[i] = f.weight(pos, neg, t)
		case Ordered:
			run := we.running.Agg(l, 0)
			out[i] = f.weight(run.Sum, run.N-run.Sum, f.full)
			if k := r.Cls[i]; k >= 0 {
				we.running.AddClass(l, 0, boolFloat(int(k) == c.Pos))
			}
		}
	}
}

func (f *woeFit) TableColumns() []table.Field { return f.Outputs() }

func (f *woeFit) FillTable(lv *Levels, dst []table.Column) {
	out := dst[0].ResetFloats(len(lv.Slots))
	for i, l := range lv.Slots {
		if f.stored != nil {
			out[i] = f.stored[l]
			continue
		}
		if i == 0 && lv.Unkept0 {
			out[i] = 0
			continue
		}
		pos := float64(lv.Counts[f.c.Pos][i])
		out[i] = f.weight(pos, float64(lv.TargetRows[i])-pos, f.full)
	}
}

func (f *woeFit) LoadTable(slots []int32, src []table.Column) error {
	for len(f.stored) < f.c.St.NumLevels() {
		f.stored = append(f.stored, 0)
	}
	for i, l := range slots {
		v := src[0].Floats[i]
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return &LoadError{Row: i, Msg: fmt.Sprintf("woe %g: want a finite number", v)}
		}
		f.stored[l] = v
	}
	return nil
}

// Finish checks each stored weight against the one its counts give with
// the manifest's totals.
func (f *woeFit) Finish() error {
	st := f.c.St
	for l := 0; l < st.NumLevels(); l++ {
		if l == 0 && st.RowCount(0) == 0 {
			continue
		}
		want := 0.0
		if f.c.Keep[l] {
			pos, neg := f.counts(l, -1)
			want = f.weight(pos, neg, f.full)
		}
		if got := f.stored[l]; math.Abs(got-want) > 1e-9*max(1, math.Abs(want)) {
			return fmt.Errorf("level %q: weight of evidence %g, but its counts with the manifest's totals give %g", st.Bytes(l), got, want)
		}
	}
	return nil
}

// woeManifest records the totals the weights were computed with.
type woeManifest struct {
	Positives float64 `json:"positives"`
	Negatives float64 `json:"negatives"`
	Levels    float64 `json:"levels"`
}

func (f *woeFit) Manifest() any {
	return woeManifest{Positives: f.full.pos, Negatives: f.full.neg, Levels: f.levels}
}

func (e *woeEnc) Load(c *Column, raw json.RawMessage) (Fitted, error) {
	var wm woeManifest
	if err := strictjson.Decode(raw, &wm); err != nil {
		return nil, err
	}
	for _, v := range []float64{wm.Positives, wm.Negatives, wm.Levels} {
		if !(v >= 0) || v > 1<<53 || v != math.Trunc(v) {
			return nil, errors.New("positives, negatives and levels: want whole numbers >= 0")
		}
	}
	return &woeFit{e: e, c: c, full: woeTotals{pos: wm.Positives, neg: wm.Negatives}, levels: wm.Levels, stored: []float64{}}, nil
}
