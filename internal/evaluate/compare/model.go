package compare

import (
	"errors"
	"time"

	"manyfold/encoders/colstats"
	"manyfold/internal/evaluate/linear"
	"manyfold/internal/evaluate/metrics"
)

// solver are the options of every model fit: the package defaults.
var solver = linear.Options{}

// encoding is one candidate fitted on one outer fold: nf dense features
// per row (filled by train or test for a sample row) and nind indicator
// columns (ind gives a row's column, -1 for none).
type encoding struct {
	nf, nind    int
	train, test func(i int, dst []float64)
	ind         func(i int) int32
}

// run fits candidate cand on outer fold f of column cs and scores it.
func (ev *evaluator) run(cs *colState, cand Candidate, f int) (fs foldScore) {
	start := time.Now()
	train, test := ev.train[f], ev.test[f]
	slot := cs.slot
	var unseen int
	for _, i := range test {
		if cs.foldRows[f][slot[i]] == 0 {
			unseen++
		}
	}
	fs.unseen = float64(unseen) / float64(len(test))
	enc := ev.encode(cs, cand, f)
	fs.outCols = enc.nf + enc.nind
	dtr := ev.design(train, enc, enc.train)
	dte := ev.design(test, enc, enc.test)
	fs.seconds = measure(start)
	ev.impute(dtr, dte, enc.nf)
	sd := linear.FitStandardizer(dtr)
	sd.Apply(dtr)
	sd.Apply(dte)
	fs.train, fs.test, fs.err = ev.fitScore(dtr, dte, train, test)
	return fs
}

// encode fits the candidate's tables on the outer training cells of fold
// f. A training row of inner fold g is encoded from the cells of neither
// fold f nor inner fold g (target statistics) or from all outer training
// cells (frequency, top-k; the in-sample baseline); a held-out row from all
// outer training cells.
func (ev *evaluator) encode(cs *colState, cand Candidate, f int) encoding {
	st, slot, pos := cs.st, cs.slot, ev.pos
	cellOf := ev.smp.cell
	switch cand.Kind {
	case KindPrior:
		return encoding{}
	case KindFreq:
		rows := cs.foldRows[f]
		fill := func(i int, dst []float64) { dst[0] = float64(rows[slot[i]]) }
		return encoding{nf: 1, train: fill, test: fill}
	case KindTopK:
		codes := st.TopKBy(cand.K, 1, cs.foldRows[f], nil)
		var n int32
		for _, c := range codes {
			n = max(n, c)
		}
		return encoding{nind: int(n), ind: func(i int) int32 { return codes[slot[i]] - 1 }}
	case KindHash:
		b := cs.bucketsOf(cand.Buckets)
		return encoding{nind: int(cand.Buckets), ind: func(i int) int32 { return b[slot[i]] }}
	}
	// Target statistics: KindTarget and KindInSample.
	outs := st.Outputs()
	var par *parentStats
	if cand.PriorPrefix > 0 {
		par = cs.parent(cand.PriorPrefix)
	}
	type fit struct{ ft, pft []colstats.Fitted }
	fitOn := func(use []bool) fit {
		var r fit
		for o := 0; o < outs; o++ {
			fs := st
			if par != nil {
				// m within parents, as encode estimates it (Stats.Parents).
				c := *st
				c.Parents = par.of
				fs = &c
			}
			r.ft = append(r.ft, fs.FitMask(o, pos, cand.Smoothing, use, nil, cs.order))
			if par != nil {
				r.pft = append(r.pft, par.st.FitMask(o, pos, cand.Smoothing, use, nil, par.order))
			}
		}
		return r
	}
	value := func(l int, use []bool, ft fit, dst []float64) {
		for o := 0; o < outs; o++ {
			x := ft.ft[o]
			if par != nil {
				x.Prior = ft.pft[o].Encode(par.st.TargetMask(int(par.of[l]), o, pos, use))
			}
			dst[o] = x.Encode(st.TargetMask(l, o, pos, use))
		}
	}
	useOut := ev.useOut[f]
	out := fitOn(useOut)
	testFill := func(i int, dst []float64) { value(int(slot[i]), useOut, out, dst) }
	if cand.Kind == KindInSample {
		return encoding{nf: outs, train: testFill, test: testFill}
	}
	in := make([]fit, ev.ki)
	for g := range in {
		in[g] = fitOn(ev.useIn[f][g])
	}
	trainFill := func(i int, dst []float64) {
		g := int(cellOf[i]) % ev.ki
		value(int(slot[i]), ev.useIn[f][g], in[g], dst)
	}
	return encoding{nf: outs, train: trainFill, test: testFill}
}

// design builds the model rows of sample rows rows: the encoder's dense
// features, then the --with columns, then the indicators.
func (ev *evaluator) design(rows []int, enc encoding, fill func(i int, dst []float64)) *linear.Design {
	nw := len(ev.smp.with)
	nd := enc.nf + nw
	d := &linear.Design{Rows: len(rows), NDense: nd, NInd: enc.nind, Dense: make([]float64, len(rows)*nd)}
	if enc.ind != nil {
		d.IndPtr = make([]int, len(rows)+1)
		d.IndCol = make([]int32, 0, len(rows))
	}
	for r, i := range rows {
		x := d.Dense[r*nd : (r+1)*nd]
		if enc.nf > 0 {
			fill(i, x[:enc.nf])
		}
		for w, col := range ev.smp.with {
			x[enc.nf+w] = col[i]
		}
		if enc.ind != nil {
			if c := enc.ind(i); c >= 0 {
				d.IndCol = append(d.IndCol, c)
			}
			d.IndPtr[r+1] = len(d.IndCol)
		}
	}
	return d
}

// impute replaces the empty values of the --with columns (features nf
// onwards) by their mean over the training rows (0 when all are empty).
func (ev *evaluator) impute(dtr, dte *linear.Design, nf int) {
	nd := dtr.NDense
	for j := nf; j < nd; j++ {
		var sum float64
		var n int
		for r := 0; r < dtr.Rows; r++ {
			if v := dtr.Dense[r*nd+j]; v == v {
				sum += v
				n++
			}
		}
		mean := 0.0
		if n > 0 {
			mean = sum / float64(n)
		}
		for _, d := range []*linear.Design{dtr, dte} {
			for r := 0; r < d.Rows; r++ {
				if v := d.Dense[r*nd+j]; v != v {
					d.Dense[r*nd+j] = mean
				}
			}
		}
	}
}

// fitScore fits the task's model on dtr and returns the metrics (in
// metricNames order) on the training and the held-out rows.
func (ev *evaluator) fitScore(dtr, dte *linear.Design, train, test []int) (tr, te []float64, err error) {
	ok := func(err error) bool { return err == nil || errors.Is(err, linear.ErrNotConverged) }
	lambda := ev.opt.Lambda
	switch ev.task {
	case colstats.Binary:
		ytr, yte := ev.binary(train), ev.binary(test)
		m, err := linear.FitLogistic(dtr, ytr, lambda, solver)
		if !ok(err) {
			return nil, nil, err
		}
		score := func(y []float64, d *linear.Design) []float64 {
			p := m.Predict(d, nil)
			return []float64{metrics.AUC(y, p), metrics.LogLoss(y, p), metrics.Brier(y, p)}
		}
		return score(ytr, dtr), score(yte, dte), nil
	case colstats.Regression:
		ytr, yte := ev.values(train), ev.values(test)
		m, err := linear.FitRidge(dtr, ytr, lambda, solver)
		if !ok(err) {
			return nil, nil, err
		}
		score := func(y []float64, d *linear.Design) []float64 {
			p := m.Predict(d, nil)
			return []float64{metrics.RMSE(y, p), metrics.MAE(y, p), metrics.R2(y, p)}
		}
		return score(ytr, dtr), score(yte, dte), nil
	}
	ytr, yte := ev.labels(train), ev.labels(test)
	m, err := linear.FitMultinomial(dtr, ytr, ev.classes, lambda, solver)
	if !ok(err) {
		return nil, nil, err
	}
	score := func(y []int, d *linear.Design) []float64 {
		p := m.Predict(d, nil)
		return []float64{metrics.MultiLogLoss(y, p), metrics.Accuracy(y, p), metrics.MeanOvRAUC(y, p)}
	}
	return score(ytr, dtr), score(yte, dte), nil
}

func (ev *evaluator) binary(rows []int) []float64 {
	y := make([]float64, len(rows))
	for r, i := range rows {
		if int(ev.smp.cls[i]) == ev.pos {
			y[r] = 1
		}
	}
	return y
}

func (ev *evaluator) values(rows []int) []float64 {
	y := make([]float64, len(rows))
	for r, i := range rows {
		y[r] = ev.smp.val[i]
	}
	return y
}

func (ev *evaluator) labels(rows []int) []int {
	y := make([]int, len(rows))
	for r, i := range rows {
		y[r] = int(ev.smp.cls[i])
	}
	return y
}
