package linear

import (
	"fmt"
	"math"
)

// Logistic is a fitted binary logistic regression: P(y=1 | x) = σ(w·x + B)
// with σ(z) = 1/(1+e^-z). W holds NDense dense weights followed by one
// weight per indicator column.
type Logistic struct {
	NDense int
	W      []float64
	B      float64
}

// Ridge is a fitted ridge regression: ŷ = w·x + B. W holds NDense dense
// weights followed by one weight per indicator column.
type Ridge struct {
	NDense int
	W      []float64
	B      float64
}

// Multinomial is a fitted softmax regression over K classes:
// P(y=k | x) = exp(z_k) / Σ_c exp(z_c) with z_k = W[k]·x + B[k]. Each W[k]
// holds NDense dense weights followed by one weight per indicator column.
type Multinomial struct {
	NDense int
	W      [][]float64
	B      []float64
}

// checkFit validates what every fit shares: the design's shape and values,
// the target length and λ.
func checkFit(d *Design, ny int, lambda float64) error {
	if err := d.Validate(); err != nil {
		return err
	}
	if d.Rows == 0 {
		return fmt.Errorf("linear: design has no rows")
	}
	if ny != d.Rows {
		return fmt.Errorf("linear: %d targets for %d design rows", ny, d.Rows)
	}
	if !(lambda >= 0) || math.IsInf(lambda, 0) {
		return fmt.Errorf("linear: lambda %v is not a finite non-negative number", lambda)
	}
	return d.checkFinite()
}

// FitLogistic fits an L2-regularised binary logistic regression of y on d,
// minimising
//
//	(1/n) Σ_i [ log(1 + e^{z_i}) - y_i z_i ] + (λ/2) ||w||²,  z_i = w·x_i + b,
//
// the mean negative log-likelihood plus the ridge penalty on w (not on the
// intercept b). Targets must lie in [0, 1]; values between 0 and 1 act as
// soft labels. With λ = 0 and separable data the minimum does not exist: the
// weights grow until the gradient falls below the tolerance, so use λ > 0.
//
// Errors name the offending row or argument; on ErrNotConverged the model
// at the last iterate is returned as well.
func FitLogistic(d *Design, y []float64, lambda float64, opt Options) (*Logistic, error) {
	m, _, err := fitLogistic(d, y, lambda, opt)
	return m, err
}

// fitLogistic is FitLogistic that also reports the solver's iterations.
func fitLogistic(d *Design, y []float64, lambda float64, opt Options) (*Logistic, result, error) {
	if err := checkFit(d, len(y), lambda); err != nil {
		return nil, result{}, err
	}
	for i, v := range y {
		if !(v >= 0 && v <= 1) {
			return nil, result{}, fmt.Errorf("linear: row %d: target %v outside [0, 1]", i, v)
		}
	}
	p := d.NDense + d.NInd
	theta := make([]float64, p+1)
	pr := &problem{d: d, y: y, lambda: lambda}
	res, err := minimize(pr.logistic, theta, precondition(d, 0.25, 1, lambda), opt)
	return &Logistic{NDense: d.NDense, W: theta[:p:p], B: theta[p]}, res, err
}

// FitRidge fits a ridge regression of y on d, minimising
//
//	(1/n) Σ_i (1/2)(y_i - z_i)² + (λ/2) ||w||²,  z_i = w·x_i + b,
//
// half the mean squared error plus the penalty on w (not on the intercept
// b); the minimiser solves (XᵀX/n + λI₀)θ = Xᵀy/n, I₀ the identity with a
// zero for the intercept. Targets must be finite.
//
// Errors name the offending row or argument; on ErrNotConverged the model
// at the last iterate is returned as well.
func FitRidge(d *Design, y []float64, lambda float64, opt Options) (*Ridge, error) {
	if err := checkFit(d, len(y), lambda); err != nil {
		return nil, err
	}
	for i, v := range y {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("linear: row %d: target is %v", i, v)
		}
	}
	p := d.NDense + d.NInd
	theta := make([]float64, p+1)
	pr := &problem{d: d, y: y, lambda: lambda}
	_, err := minimize(pr.ridge, theta, precondition(d, 1, 1, lambda), opt)
	return &Ridge{NDense: d.NDense, W: theta[:p:p], B: theta[p]}, err
}

// FitMultinomial fits an L2-regularised softmax regression of class labels
// y in [0, classes) on d, minimising
//
//	(1/n) Σ_i [ log Σ_k e^{z_ik} - z_{i,y_i} ] + (λ/2) Σ_k ||w_k||²,  z_ik = w_k·x_i + b_k.
//
// The intercepts are unpenalised and, as adding a constant to every b_k
// changes nothing, the fit keeps Σ_k b_k = 0 (the gradient never leaves that
// subspace from the zero start). The weights are unique when λ > 0 and then
// satisfy Σ_k w_k = 0.
//
// With two classes the model is the binary logistic regression of y on d
// with weights w_1 - w_0 = 2·w_1 and intercept b_1 - b_0 = 2·b_1, fitted at
// half this λ: with w_0 = -w_1 = -δ/2 the penalty (λ/2)(||w_0||² + ||w_1||²)
// equals (λ/4)||δ||².
//
// Errors name the offending row or argument; on ErrNotConverged the model
// at the last iterate is returned as well.
func FitMultinomial(d *Design, y []int, classes int, lambda float64, opt Options) (*Multinomial, error) {
	if classes < 2 {
		return nil, fmt.Errorf("linear: %d classes, want at least 2", classes)
	}
	if err := checkFit(d, len(y), lambda); err != nil {
		return nil, err
	}
	for i, v := range y {
		if v < 0 || v >= classes {
			return nil, fmt.Errorf("linear: row %d: class %d outside [0, %d)", i, v, classes)
		}
	}
	p := d.NDense + d.NInd
	// Feature-major layout: theta[j*K+k] is feature j's weight for class k,
	// theta[p*K+k] the intercept of class k, so the K weights of an active
	// indicator are adjacent.
	theta := make([]float64, (p+1)*classes)
	pr := &problem{d: d, yc: y, k: classes, lambda: lambda,
		z: make([]float64, classes)}
	kf := float64(classes)
	_, err := minimize(pr.multinomial, theta, precondition(d, (kf-1)/(kf*kf), classes, lambda), opt)
	m := &Multinomial{NDense: d.NDense, W: make([][]float64, classes), B: make([]float64, classes)}
	for k := range classes {
		w := make([]float64, p)
		for j := range p {
			w[j] = theta[j*classes+k]
		}
		m.W[k] = w
		m.B[k] = theta[p*classes+k]
	}
	return m, err
}

// precondition returns the inverse of the Hessian diagonal of an objective
// at the zero start, for a feature-major layout of k weights per feature and
// k intercepts: c·(1/n)Σ_i x_ij² + λ for a weight (c the second derivative
// of the loss in the margin at zero: 1/4 for the logistic loss, 1 for half
// the squared error, (k-1)/k² for the softmax) and c for an intercept.
// Indicators make the diagonal span orders of magnitude (a postcode on half
// the rows against one on ten), which the scaling evens out. A zero entry (a
// feature never active, with λ = 0) gets 1.
func precondition(d *Design, c float64, k int, lambda float64) []float64 {
	p := d.NDense + d.NInd
	sq := make([]float64, p+1)
	for r := range d.Rows {
		for j, v := range d.dense(r) {
			sq[j] += v * v
		}
		for _, col := range d.ind(r) {
			sq[d.NDense+int(col)]++
		}
	}
	inv := 1 / float64(d.Rows)
	h := make([]float64, (p+1)*k)
	for j := range p + 1 {
		v := c * sq[j] * inv
		if j < p {
			v += lambda
		} else {
			v = c
		}
		if !(v > 0) || math.IsInf(v, 0) {
			v = 1
		}
		for kk := range k {
			h[j*k+kk] = 1 / v
		}
	}
	return h
}

// problem holds what the objectives read: the design, the targets and λ,
// plus per-row scratch space of the multinomial objective.
type problem struct {
	d      *Design
	y      []float64
	yc     []int
	k      int
	lambda float64
	z      []float64
}

// margin returns w·x_r + b for row r of d, ignoring indicator columns beyond
// the weights (a column the model never saw has weight 0).
func margin(d *Design, r int, wd, wi []float64, b float64) float64 {
	z := b
	for j, v := range d.dense(r) {
		z += wd[j] * v
	}
	for _, c := range d.ind(r) {
		if int(c) < len(wi) && c >= 0 {
			z += wi[c]
		}
	}
	return z
}

// finish scales the summed loss and gradient of a weight vector theta =
// [w, b...] of nw penalised entries to the mean and adds the penalty.
func (pr *problem) finish(loss float64, theta, grad []float64, nw int) float64 {
	inv := 1 / float64(pr.d.Rows)
	var pen float64
	for i := range grad {
		grad[i] *= inv
	}
	for i, w := range theta[:nw] {
		pen += w * w
		grad[i] += pr.lambda * w
	}
	return loss*inv + 0.5*pr.lambda*pen
}

// logistic is the binary logistic objective over theta = [w_dense, w_ind, b].
func (pr *problem) logistic(theta, grad []float64) float64 {
	return pr.single(theta, grad, func(z, y float64) (float64, float64) {
		// log(1+e^z) = max(z,0) + log1p(e^-|z|) and σ(z) from the same
		// exponential, stable for any z.
		e := math.Exp(-math.Abs(z))
		l := math.Log1p(e)
		var s float64
		if z >= 0 {
			l += z
			s = 1 / (1 + e)
		} else {
			s = e / (1 + e)
		}
		return l - y*z, s - y
	})
}

// ridge is the half-mean-squared-error objective over theta = [w, b].
func (pr *problem) ridge(theta, grad []float64) float64 {
	return pr.single(theta, grad, func(z, y float64) (float64, float64) {
		res := z - y
		return 0.5 * res * res, res
	})
}

// single is the objective of a model with one linear predictor
// z = b + w_dense·x + sum of the row's indicator weights over theta =
// [w_dense, w_ind, b]: point gives each row's loss and its derivative in z,
// from which the gradient is accumulated.
func (pr *problem) single(theta, grad []float64, point func(z, y float64) (loss, dz float64)) float64 {
	d := pr.d
	nd, p := d.NDense, d.NDense+d.NInd
	wd, wi, b := theta[:nd], theta[nd:p], theta[p]
	gdn, gi := grad[:nd], grad[nd:p]
	clear(grad)
	var loss, gb float64
	for r := range d.Rows {
		x, cols := d.dense(r), d.ind(r)
		z := b
		for j, v := range x {
			z += wd[j] * v
		}
		for _, c := range cols {
			z += wi[c]
		}
		l, res := point(z, pr.y[r])
		loss += l
		for j, v := range x {
			gdn[j] += res * v
		}
		for _, c := range cols {
			gi[c] += res
		}
		gb += res
	}
	grad[p] = gb
	return pr.finish(loss, theta, grad, p)
}

// multinomial is the softmax objective over the feature-major theta of
// FitMultinomial.
func (pr *problem) multinomial(theta, grad []float64) float64 {
	d := pr.d
	K := pr.k
	nd, p := d.NDense, d.NDense+d.NInd
	z := pr.z
	bias := theta[p*K : (p+1)*K]
	gbias := grad[p*K : (p+1)*K]
	clear(grad)
	var loss float64
	for r := range d.Rows {
		x, cols := d.dense(r), d.ind(r)
		copy(z, bias)
		for j, v := range x {
			w := theta[j*K : (j+1)*K]
			for k := range z {
				z[k] += w[k] * v
			}
		}
		for _, c := range cols {
			w := theta[(nd+int(c))*K : (nd+int(c)+1)*K]
			for k := range z {
				z[k] += w[k]
			}
		}
		zmax := z[0]
		for _, v := range z[1:] {
			zmax = math.Max(zmax, v)
		}
		var sum float64
		for k, v := range z {
			e := math.Exp(v - zmax)
			z[k] = e
			sum += e
		}
		yi := pr.yc[r]
		// z holds exp(z_k - zmax); -log p_y = log(sum) - log(z[y]).
		loss += math.Log(sum) - math.Log(z[yi])
		inv := 1 / sum
		for k := range z {
			z[k] *= inv // probability, then residual p_k - [k == y]
		}
		z[yi]--
		for j, v := range x {
			g := grad[j*K : (j+1)*K]
			for k, res := range z {
				g[k] += res * v
			}
		}
		for _, c := range cols {
			g := grad[(nd+int(c))*K : (nd+int(c)+1)*K]
			for k, res := range z {
				g[k] += res
			}
		}
		for k, res := range z {
			gbias[k] += res
		}
	}
	return pr.finish(loss, theta, grad, p*K)
}

// grow returns out resliced to n entries, or a new slice when out is too
// short.
func grow(out []float64, n int) []float64 {
	if cap(out) < n {
		return make([]float64, n)
	}
	return out[:n]
}

// checkPredict panics when d's dense width differs from the model's.
func checkPredict(d *Design, nd int) {
	if d.NDense != nd {
		panic(fmt.Sprintf("linear: model of %d dense features applied to a design of %d", nd, d.NDense))
	}
}

// Predict writes P(y=1 | x) for every row of d into out (reused when its
// capacity suffices) and returns it. Indicator columns at or beyond the
// model's count have weight 0, as for a level never seen in training. It
// panics if d.NDense differs from the model's, a programming error.
func (m *Logistic) Predict(d *Design, out []float64) []float64 {
	checkPredict(d, m.NDense)
	out = grow(out, d.Rows)
	wd, wi := m.W[:m.NDense], m.W[m.NDense:]
	for r := range d.Rows {
		z := margin(d, r, wd, wi, m.B)
		if z >= 0 {
			out[r] = 1 / (1 + math.Exp(-z))
		} else {
			e := math.Exp(z)
			out[r] = e / (1 + e)
		}
	}
	return out
}

// Predict writes w·x + B for every row of d into out (reused when its
// capacity suffices) and returns it. Indicator columns at or beyond the
// model's count have weight 0. It panics if d.NDense differs from the
// model's, a programming error.
func (m *Ridge) Predict(d *Design, out []float64) []float64 {
	checkPredict(d, m.NDense)
	out = grow(out, d.Rows)
	wd, wi := m.W[:m.NDense], m.W[m.NDense:]
	for r := range d.Rows {
		out[r] = margin(d, r, wd, wi, m.B)
	}
	return out
}

// Predict writes the class probabilities of every row of d into out[r][k]
// (out and its rows are reused when long enough) and returns it. Indicator
// columns at or beyond the model's count have weight 0. It panics if
// d.NDense differs from the model's, a programming error.
func (m *Multinomial) Predict(d *Design, out [][]float64) [][]float64 {
	checkPredict(d, m.NDense)
	K := len(m.B)
	if cap(out) < d.Rows {
		out = append(out[:cap(out)], make([][]float64, d.Rows-cap(out))...)
	}
	out = out[:d.Rows]
	for r := range d.Rows {
		row := grow(out[r], K)
		zmax := math.Inf(-1)
		for k := range K {
			row[k] = margin(d, r, m.W[k][:m.NDense], m.W[k][m.NDense:], m.B[k])
			zmax = math.Max(zmax, row[k])
		}
		var sum float64
		for k, v := range row {
			row[k] = math.Exp(v - zmax)
			sum += row[k]
		}
		for k := range row {
			row[k] /= sum
		}
		out[r] = row
	}
	return out
}
