package compare

import (
	"errors"
	"fmt"
	"time"

	"manyfold/encoders/colstats"
	"manyfold/encoders/method"
	"manyfold/internal/evaluate/linear"
	"manyfold/internal/evaluate/metrics"
	"manyfold/io/table"
)

// solver are the options of every model fit: the package defaults.
var solver = linear.Options{}

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
	dtr, dte, err := ev.designs(cs, cand, f)
	if err != nil {
		fs.err = err
		return fs
	}
	fs.outCols = dtr.NDense - len(ev.smp.with) + dtr.NInd
	fs.seconds = measure(start)
	fs.train, fs.test, fs.err = ev.score(dtr, dte, train, test)
	return fs
}

// score imputes the --with columns' empty values, standardises both
// designs on the training rows, fits the task's model and returns the
// metrics on the training and the held-out rows.
func (ev *evaluator) score(dtr, dte *linear.Design, train, test []int) (tr, te []float64, err error) {
	ev.impute(dtr, dte, dtr.NDense-len(ev.smp.with))
	sd := linear.FitStandardizer(dtr)
	sd.Apply(dtr)
	sd.Apply(dte)
	return ev.fitScore(dtr, dte, train, test)
}

// designs encodes the training and the held-out rows of outer fold f with
// the candidate's encodings, each fitted on the fold's training cells (the
// fold's view, colState.view) through the methods of encode
// (encoders/method): a training row of inner fold g as encode's k-fold pass
// encodes a row of fold g, from the cells of neither fold f nor inner fold
// g; a held-out row as apply encodes a new row, from all the fold's
// training cells. Methods that do not read the target give both the values
// of all training cells; the in-sample baseline gives the training rows
// apply's values too (it sees their own labels). An encoding's outputs are
// the model's dense features, but for a code standing for a group of
// levels (method.Coded: top-k codes, hash buckets), which becomes one
// indicator column per code.
func (ev *evaluator) designs(cs *colState, cand Candidate, f int) (dtr, dte *linear.Design, err error) {
	var out [2]*linear.Design
	for k, set := range ev.sets(cand, f) {
		var fs features
		if err := ev.encodeSet(cs, cand, f, set.rows, set.pass, &fs); err != nil {
			return nil, nil, err
		}
		out[k] = ev.design(set.rows, fs.dense, fs.ind, fs.nind)
	}
	return out[0], out[1], nil
}

// rowSet is the sample rows of one side of an outer fold and the pass
// that encodes them.
type rowSet struct {
	rows []int
	pass method.Pass
}

// sets returns outer fold f's training rows, encoded by the k-fold pass
// (apply's for the in-sample baseline), and its held-out rows, encoded by
// apply's.
func (ev *evaluator) sets(cand Candidate, f int) [2]rowSet {
	trainPass := method.KFold
	if cand.Baseline == InSampleBaseline {
		trainPass = method.Apply
	}
	return [2]rowSet{{ev.train[f], trainPass}, {ev.test[f], method.Apply}}
}

// features are a model's columns before the design is built: dense
// features (per feature, per row) and coded outputs (per output, per row:
// the indicator column, -1 none), nind indicator columns in all.
type features struct {
	dense [][]float64
	ind   [][]int32
	nind  int
}

// encodeSet adds to fs the outputs of the candidate's encodings, fitted on
// outer fold f's view of the column, for the sample rows rows by pass.
func (ev *evaluator) encodeSet(cs *colState, cand Candidate, f int, rows []int, pass method.Pass, fs *features) error {
	r := ev.sampleRows(cs, rows, cand.Encodings)
	for _, e := range cand.Encodings {
		view := cs.view(ev, f, e.Needs().Prior)
		fit := e.Fit(view)
		// A prefix prior's parent level of each row.
		r.ParentSlots = nil
		if view.ParentOf != nil {
			r.ParentSlots = make([]int32, r.N)
			for i, l := range r.Slots {
				r.ParentSlots[i] = view.ParentOf[l]
			}
		}
		outs := fit.Outputs()
		dst := make([]table.Column, len(outs))
		fit.Encoder(pass).Encode(r, dst)
		n, first := 0, int64(0)
		if c, ok := fit.(method.Coded); ok {
			n, first = c.Codes()
		}
		if fs.nind+n > maxIndicators {
			return fmt.Errorf("%s: %d indicator columns; a model takes at most %d", e, fs.nind+n, maxIndicators)
		}
		for o := range outs {
			if o == 0 && n > 0 {
				col := make([]int32, r.N)
				for i, v := range dst[0].Ints {
					col[i] = -1
					if v >= first && v-first < int64(n) {
						col[i] = int32(fs.nind + int(v-first))
					}
				}
				fs.ind = append(fs.ind, col)
				fs.nind += n
				continue
			}
			x := make([]float64, r.N)
			for i := range x {
				x[i], _, _ = dst[o].Float(i)
			}
			fs.dense = append(fs.dense, x)
		}
	}
	return nil
}

// maxIndicators bounds a model's indicator columns (top-k codes, hash
// buckets): each has a weight and a gradient entry per class.
const maxIndicators = 1 << 20

// sampleRows returns the sample rows rows as a batch for the methods:
// their level slots, inner folds and targets, and, for an encoding that
// reads the values themselves (hashing), their levels' bytes.
func (ev *evaluator) sampleRows(cs *colState, rows []int, encs []method.Encoding) *method.Rows {
	r := &method.Rows{}
	r.Reset(len(rows))
	r.Slots = make([]int32, len(rows))
	r.Fold = make([]int32, len(rows))
	for j, i := range rows {
		r.Slots[j] = cs.slot[i]
		r.Fold[j] = int32(int(ev.smp.cell[i]) % ev.ki)
	}
	if ev.smp.cls != nil {
		r.Cls = make([]int32, len(rows))
		for j, i := range rows {
			r.Cls[j] = ev.smp.cls[i]
		}
	} else {
		r.Vals = make([]float64, len(rows))
		for j, i := range rows {
			r.Vals[j] = ev.smp.val[i]
		}
	}
	for _, e := range encs {
		if !e.Needs().Values {
			continue
		}
		v := &table.Column{Form: table.FormText, Offsets: make([]int32, 1, len(rows)+1)}
		for _, l := range r.Slots {
			if l > 0 {
				v.Data = append(v.Data, cs.st.Bytes(int(l))...)
			}
			v.Offsets = append(v.Offsets, int32(len(v.Data)))
		}
		r.Values = v
		break
	}
	return r
}

// design builds the model rows of sample rows rows: the dense features,
// then the --with columns, then the indicators (ind[j][r] the column of
// coded output j in row r, -1 for none).
func (ev *evaluator) design(rows []int, dense [][]float64, ind [][]int32, nind int) *linear.Design {
	nw := len(ev.smp.with)
	nf := len(dense)
	nd := nf + nw
	d := &linear.Design{Rows: len(rows), NDense: nd, NInd: nind, Dense: make([]float64, len(rows)*nd)}
	if len(ind) > 0 {
		d.IndPtr = make([]int, len(rows)+1)
		d.IndCol = make([]int32, 0, len(rows)*len(ind))
	}
	for r, i := range rows {
		x := d.Dense[r*nd : (r+1)*nd]
		for j, col := range dense {
			x[j] = col[r]
		}
		for w, col := range ev.smp.with {
			x[nf+w] = col[i]
		}
		if len(ind) > 0 {
			for _, col := range ind {
				if c := col[r]; c >= 0 {
					d.IndCol = append(d.IndCol, c)
				}
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
