package linear

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// synth builds an invented parcel-delivery design: nd dense features (say
// parcel weight, route distance, sender account age, standardised later) and
// one active indicator per categorical column (say postcode, route, parcel
// type) with the given level counts, levels drawn with a skew towards the
// low indices. It returns the design and a latent margin per row.
func synth(seed uint64, rows, nd int, levels []int) (*Design, []float64) {
	r := rand.New(rand.NewPCG(seed, 99))
	d := &Design{Rows: rows, NDense: nd, Dense: make([]float64, rows*nd), IndPtr: make([]int, rows+1)}
	off := make([]int, len(levels))
	for i, l := range levels {
		off[i] = d.NInd
		d.NInd += l
	}
	effect := make([]float64, d.NInd)
	for i := range effect {
		effect[i] = r.NormFloat64() * 0.7
	}
	coef := make([]float64, nd)
	for j := range coef {
		coef[j] = r.NormFloat64()
	}
	d.IndCol = make([]int32, 0, rows*len(levels))
	z := make([]float64, rows)
	for i := range rows {
		zi := -0.3
		for j := range nd {
			v := r.NormFloat64()*float64(j+1) + float64(j)
			d.Dense[i*nd+j] = v
			zi += coef[j] * v / float64(j+1)
		}
		for c, l := range levels {
			u := r.Float64()
			lv := off[c] + int(float64(l)*u*u)
			d.IndCol = append(d.IndCol, int32(lv))
			zi += effect[lv]
		}
		d.IndPtr[i+1] = len(d.IndCol)
		z[i] = zi
	}
	return d, z
}

func sigmoid(z float64) float64 { return 1 / (1 + math.Exp(-z)) }

// binaryTargets draws y ~ Bernoulli(σ(z)), the target "late delivery".
func binaryTargets(seed uint64, z []float64) []float64 {
	r := rand.New(rand.NewPCG(seed, 7))
	y := make([]float64, len(z))
	for i, zi := range z {
		if r.Float64() < sigmoid(zi) {
			y[i] = 1
		}
	}
	return y
}

// toDense expands d into rows [dense..., indicators..., 1].
func toDense(d *Design) [][]float64 {
	p := d.NDense + d.NInd
	X := make([][]float64, d.Rows)
	for i := range d.Rows {
		row := make([]float64, p+1)
		copy(row, d.dense(i))
		for _, c := range d.ind(i) {
			row[d.NDense+int(c)]++
		}
		row[p] = 1
		X[i] = row
	}
	return X
}

// solve solves A x = b by Gaussian elimination with partial pivoting (A and
// b are overwritten).
func solve(A [][]float64, b []float64) []float64 {
	n := len(b)
	for c := range n {
		piv := c
		for r := c + 1; r < n; r++ {
			if math.Abs(A[r][c]) > math.Abs(A[piv][c]) {
				piv = r
			}
		}
		A[c], A[piv] = A[piv], A[c]
		b[c], b[piv] = b[piv], b[c]
		for r := c + 1; r < n; r++ {
			f := A[r][c] / A[c][c]
			for k := c; k < n; k++ {
				A[r][k] -= f * A[c][k]
			}
			b[r] -= f * b[c]
		}
	}
	x := make([]float64, n)
	for r := n - 1; r >= 0; r-- {
		s := b[r]
		for k := r + 1; k < n; k++ {
			s -= A[r][k] * x[k]
		}
		x[r] = s / A[r][r]
	}
	return x
}

// penalised reports whether entry j of a [w..., b] vector of length p+1 is
// penalised (every one but the intercept).
func penalised(j, p int) float64 {
	if j == p {
		return 0
	}
	return 1
}

// newtonLogistic minimises the FitLogistic objective on the dense design X
// by Newton's method: θ -= H⁻¹g with g = Xᵀ(σ(Xθ) - y)/n + λI₀θ and
// H = XᵀSX/n + λI₀, S = diag(σ(1-σ)).
func newtonLogistic(X [][]float64, y []float64, lambda float64) []float64 {
	n, q := len(X), len(X[0])
	theta := make([]float64, q)
	for range 100 {
		g := make([]float64, q)
		H := make([][]float64, q)
		for j := range H {
			H[j] = make([]float64, q)
			H[j][j] = lambda * penalised(j, q-1)
			g[j] = lambda * penalised(j, q-1) * theta[j] * float64(n)
			H[j][j] *= float64(n)
		}
		for i, x := range X {
			var z float64
			for j, v := range x {
				z += theta[j] * v
			}
			s := sigmoid(z)
			for j, v := range x {
				g[j] += (s - y[i]) * v
				for k, u := range x {
					H[j][k] += s * (1 - s) * v * u
				}
			}
		}
		step := solve(H, g)
		var m float64
		for j := range theta {
			theta[j] -= step[j]
			m = math.Max(m, math.Abs(step[j]))
		}
		if m < 1e-15 {
			break
		}
	}
	return theta
}

// ridgeClosed solves the normal equations (XᵀX/n + λI₀)θ = Xᵀy/n.
func ridgeClosed(X [][]float64, y []float64, lambda float64) []float64 {
	n, q := float64(len(X)), len(X[0])
	A := make([][]float64, q)
	b := make([]float64, q)
	for j := range A {
		A[j] = make([]float64, q)
		A[j][j] = lambda * penalised(j, q-1)
	}
	for i, x := range X {
		for j, v := range x {
			b[j] += v * y[i] / n
			for k, u := range x {
				A[j][k] += v * u / n
			}
		}
	}
	return solve(A, b)
}

// standardised returns a synthetic design with its dense part standardised.
func standardised(seed uint64, rows, nd int, levels []int) (*Design, []float64) {
	d, z := synth(seed, rows, nd, levels)
	FitStandardizer(d).Apply(d)
	return d, z
}

func maxDiff(a, b []float64) float64 {
	var m float64
	for i := range a {
		m = math.Max(m, math.Abs(a[i]-b[i]))
	}
	return m
}

func TestLogisticMatchesNewton(t *testing.T) {
	tests := []struct {
		name   string
		rows   int
		nd     int
		levels []int
		lambda float64
	}{
		{"dense and two categoricals", 300, 3, []int{5, 3}, 0.01},
		{"weak penalty", 300, 2, []int{4}, 1e-4},
		{"strong penalty", 200, 3, []int{6, 2}, 1},
		{"dense only, no penalty", 400, 3, nil, 0},
		{"indicators only", 250, 0, []int{7}, 0.05},
	}
	for i, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d, z := standardised(uint64(i+1), tc.rows, tc.nd, tc.levels)
			y := binaryTargets(uint64(i+1), z)
			m, err := FitLogistic(d, y, tc.lambda, Options{Tol: 1e-10})
			if err != nil {
				t.Fatal(err)
			}
			want := newtonLogistic(toDense(d), y, tc.lambda)
			got := append(append([]float64(nil), m.W...), m.B)
			if diff := maxDiff(got, want); diff > 1e-6 {
				t.Errorf("weights differ from Newton's by %.3g\n got %v\nwant %v", diff, got, want)
			}
			// Predictions are σ of the Newton margin.
			pred := m.Predict(d, nil)
			X := toDense(d)
			for r := range 5 {
				var zr float64
				for j, v := range X[r] {
					zr += want[j] * v
				}
				if math.Abs(pred[r]-sigmoid(zr)) > 1e-6 {
					t.Errorf("row %d: predicted %v, Newton %v", r, pred[r], sigmoid(zr))
				}
			}
		})
	}
}

func TestRidgeMatchesNormalEquations(t *testing.T) {
	tests := []struct {
		name   string
		rows   int
		nd     int
		levels []int
		lambda float64
	}{
		{"dense and two categoricals", 300, 3, []int{5, 4}, 0.01},
		{"strong penalty", 150, 2, []int{8}, 2},
		{"dense only, no penalty", 200, 3, nil, 0},
	}
	for i, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d, z := standardised(uint64(10+i), tc.rows, tc.nd, tc.levels)
			// Delivery cost: the latent margin scaled, plus noise.
			r := rand.New(rand.NewPCG(uint64(i), 3))
			y := make([]float64, len(z))
			for k, zk := range z {
				y[k] = 12 + 4*zk + r.NormFloat64()
			}
			m, err := FitRidge(d, y, tc.lambda, Options{Tol: 1e-13})
			if err != nil {
				t.Fatal(err)
			}
			want := ridgeClosed(toDense(d), y, tc.lambda)
			got := append(append([]float64(nil), m.W...), m.B)
			if diff := maxDiff(got, want); diff > 1e-8 {
				t.Errorf("weights differ from the normal equations by %.3g\n got %v\nwant %v", diff, got, want)
			}
		})
	}
}

// A two-class softmax fitted at 2λ is the binary logistic regression at λ:
// the optimum has w_0 = -w_1, so w_binary = w_1 - w_0 = 2w_1, and the
// penalty (2λ/2)(||w_0||² + ||w_1||²) = (λ/2)||w_binary||².
func TestMultinomialTwoClassesIsLogistic(t *testing.T) {
	d, z := standardised(21, 400, 3, []int{6, 3})
	y := binaryTargets(21, z)
	yc := make([]int, len(y))
	for i, v := range y {
		yc[i] = int(v)
	}
	const lambda = 0.02
	bin, err := FitLogistic(d, y, lambda, Options{Tol: 1e-10})
	if err != nil {
		t.Fatal(err)
	}
	mul, err := FitMultinomial(d, yc, 2, 2*lambda, Options{Tol: 1e-10})
	if err != nil {
		t.Fatal(err)
	}
	for j := range bin.W {
		if delta := mul.W[1][j] - mul.W[0][j]; math.Abs(delta-bin.W[j]) > 1e-6 {
			t.Errorf("weight %d: w1-w0 = %v, binary %v", j, delta, bin.W[j])
		}
		if sum := mul.W[1][j] + mul.W[0][j]; math.Abs(sum) > 1e-6 {
			t.Errorf("weight %d: w1+w0 = %v, want 0", j, sum)
		}
	}
	if delta := mul.B[1] - mul.B[0]; math.Abs(delta-bin.B) > 1e-6 {
		t.Errorf("intercept: b1-b0 = %v, binary %v", delta, bin.B)
	}
	if sum := mul.B[0] + mul.B[1]; math.Abs(sum) > 1e-9 {
		t.Errorf("intercepts sum to %v, want 0", sum)
	}
	pb := bin.Predict(d, nil)
	pm := mul.Predict(d, nil)
	for r := range pb {
		if math.Abs(pm[r][1]-pb[r]) > 1e-6 || math.Abs(pm[r][0]+pm[r][1]-1) > 1e-12 {
			t.Fatalf("row %d: softmax %v, binary %v", r, pm[r], pb[r])
		}
	}
}

// The gradient of the softmax objective, computed here from the dense
// design independently of the package, vanishes at the fitted weights.
func TestMultinomialGradientAtOptimum(t *testing.T) {
	d, z := standardised(31, 500, 3, []int{5, 4})
	const K, lambda = 4, 0.01
	r := rand.New(rand.NewPCG(31, 1))
	y := make([]int, len(z)) // a parcel type class from the latent margin
	for i, zi := range z {
		y[i] = min(K-1, max(0, int(math.Floor(zi+1.5+0.8*r.NormFloat64()))))
	}
	m, err := FitMultinomial(d, y, K, lambda, Options{Tol: 1e-9})
	if err != nil {
		t.Fatal(err)
	}
	X := toDense(d)
	q := len(X[0])
	n := float64(len(X))
	grad := make([][]float64, K)
	for k := range grad {
		grad[k] = make([]float64, q)
		for j := range q - 1 {
			grad[k][j] = lambda * m.W[k][j]
		}
	}
	prob := make([]float64, K)
	for i, x := range X {
		var sum float64
		for k := range K {
			zk := m.B[k]
			for j := range q - 1 {
				zk += m.W[k][j] * x[j]
			}
			prob[k] = math.Exp(zk)
			sum += prob[k]
		}
		for k := range K {
			res := prob[k] / sum
			if k == y[i] {
				res--
			}
			for j, v := range x {
				grad[k][j] += res * v / n
			}
		}
	}
	var gmax float64
	for k := range K {
		gmax = math.Max(gmax, normInf(grad[k]))
	}
	if gmax > 1e-8 {
		t.Errorf("gradient at the fitted weights has max-norm %.3g, want < 1e-8", gmax)
	}
	var bsum float64
	for _, b := range m.B {
		bsum += b
	}
	if math.Abs(bsum) > 1e-9 {
		t.Errorf("intercepts sum to %v, want 0", bsum)
	}
	pred := m.Predict(d, nil)
	for i, row := range pred {
		var s float64
		for _, v := range row {
			s += v
		}
		if math.Abs(s-1) > 1e-12 {
			t.Fatalf("row %d: probabilities sum to %v", i, s)
		}
	}
}

// The analytic gradients of the three objectives match central finite
// differences at a random point.
func TestObjectiveGradients(t *testing.T) {
	d, z := standardised(41, 60, 2, []int{3, 2})
	y := binaryTargets(41, z)
	yc := make([]int, len(y))
	for i, zi := range z {
		yc[i] = int(math.Abs(zi*3)) % 3
	}
	p := d.NDense + d.NInd
	cases := []struct {
		name string
		f    objective
		n    int
	}{
		{"logistic", (&problem{d: d, y: y, lambda: 0.3}).logistic, p + 1},
		{"ridge", (&problem{d: d, y: z, lambda: 0.3}).ridge, p + 1},
		{"multinomial", (&problem{d: d, yc: yc, k: 3, lambda: 0.3, z: make([]float64, 3)}).multinomial, 3 * (p + 1)},
	}
	r := rand.New(rand.NewPCG(5, 5))
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			x := make([]float64, tc.n)
			for i := range x {
				x[i] = r.NormFloat64() * 0.5
			}
			g := make([]float64, tc.n)
			tc.f(x, g)
			scratch := make([]float64, tc.n)
			const h = 1e-5
			for i := range x {
				old := x[i]
				x[i] = old + h
				fp := tc.f(x, scratch)
				x[i] = old - h
				fm := tc.f(x, scratch)
				x[i] = old
				if fd := (fp - fm) / (2 * h); math.Abs(fd-g[i]) > 1e-7*math.Max(1, math.Abs(fd)) {
					t.Errorf("component %d: analytic %.10g, finite difference %.10g", i, g[i], fd)
				}
			}
		})
	}
}

func TestDeterministic(t *testing.T) {
	d, z := standardised(51, 2000, 3, []int{40, 10, 5})
	y := binaryTargets(51, z)
	yc := make([]int, len(y))
	for i, v := range y {
		yc[i] = int(v)
		if z[i] > 1 {
			yc[i]++
		}
	}
	same := func(a, b []float64) bool {
		for i := range a {
			if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
				return false
			}
		}
		return len(a) == len(b)
	}
	l1, err1 := FitLogistic(d, y, 1e-3, Options{})
	l2, err2 := FitLogistic(d, y, 1e-3, Options{})
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	if !same(l1.W, l2.W) || math.Float64bits(l1.B) != math.Float64bits(l2.B) {
		t.Error("two logistic fits differ")
	}
	r1, _ := FitRidge(d, z, 1e-3, Options{})
	r2, _ := FitRidge(d, z, 1e-3, Options{})
	if !same(r1.W, r2.W) || r1.B != r2.B {
		t.Error("two ridge fits differ")
	}
	m1, _ := FitMultinomial(d, yc, 3, 1e-3, Options{})
	m2, _ := FitMultinomial(d, yc, 3, 1e-3, Options{})
	for k := range 3 {
		if !same(m1.W[k], m2.W[k]) || m1.B[k] != m2.B[k] {
			t.Errorf("two multinomial fits differ in class %d", k)
		}
	}
}

func TestStandardizer(t *testing.T) {
	d := &Design{Rows: 4, NDense: 4, Dense: []float64{
		// parcel weight, constant surcharge, distance, zero column
		1, 0.1, 10, 0,
		2, 0.1, -10, 0,
		3, 0.1, 10, 0,
		6, 0.1, -10, 0,
	}}
	s := FitStandardizer(d)
	// Column 0: mean 3, population variance (4+1+0+9)/4 = 3.5; computed
	// from the formula.
	wantMean := []float64{3, 0.1, 0, 0}
	wantStd := []float64{math.Sqrt(3.5), 1, 10, 1}
	for j := range 4 {
		if math.Abs(s.Mean[j]-wantMean[j]) > 1e-15 || math.Abs(s.Std[j]-wantStd[j]) > 1e-15 {
			t.Errorf("feature %d: (%v, %v), want (%v, %v)", j, s.Mean[j], s.Std[j], wantMean[j], wantStd[j])
		}
	}
	if s.Mean[1] != 0.1 {
		t.Errorf("constant column mean %.17g, want exactly 0.1", s.Mean[1])
	}
	s.Apply(d)
	for r := range 4 {
		if v := d.Dense[r*4+1]; v != 0 {
			t.Errorf("row %d: constant column standardised to %v, want 0", r, v)
		}
		if v := d.Dense[r*4+2]; math.Abs(v) != 1 {
			t.Errorf("row %d: ±10 column standardised to %v, want ±1", r, v)
		}
	}
	if v := d.Dense[0]; math.Abs(v-(-2/math.Sqrt(3.5))) > 1e-15 {
		t.Errorf("row 0 feature 0: %v", v)
	}

	t.Run("no rows", func(t *testing.T) {
		s := FitStandardizer(&Design{NDense: 2})
		if s.Mean[0] != 0 || s.Std[0] != 1 || s.Std[1] != 1 {
			t.Errorf("got %+v", s)
		}
	})
	t.Run("one row", func(t *testing.T) {
		s := FitStandardizer(&Design{Rows: 1, NDense: 1, Dense: []float64{7}})
		if s.Mean[0] != 7 || s.Std[0] != 1 {
			t.Errorf("got %+v", s)
		}
	})
	t.Run("NaN", func(t *testing.T) {
		s := FitStandardizer(&Design{Rows: 2, NDense: 2, Dense: []float64{1, math.NaN(), 2, 3}})
		if !math.IsNaN(s.Mean[1]) || !math.IsNaN(s.Std[1]) || s.Mean[0] != 1.5 {
			t.Errorf("got %+v", s)
		}
	})
	t.Run("infinite", func(t *testing.T) {
		s := FitStandardizer(&Design{Rows: 2, NDense: 1, Dense: []float64{math.Inf(1), math.Inf(1)}})
		if !math.IsNaN(s.Mean[0]) {
			t.Errorf("got %+v", s)
		}
	})
}

func TestValidateAndFitErrors(t *testing.T) {
	good := func() *Design {
		return &Design{Rows: 2, NDense: 1, NInd: 3, Dense: []float64{0.5, -0.5},
			IndPtr: []int{0, 1, 3}, IndCol: []int32{2, 0, 1}}
	}
	if err := good().Validate(); err != nil {
		t.Fatalf("good design: %v", err)
	}
	designs := []struct {
		name string
		edit func(d *Design)
	}{
		{"dense length", func(d *Design) { d.Dense = d.Dense[:1] }},
		{"IndPtr length", func(d *Design) { d.IndPtr = d.IndPtr[:2] }},
		{"IndPtr start", func(d *Design) { d.IndPtr[0] = 1 }},
		{"IndPtr end", func(d *Design) { d.IndPtr[2] = 2 }},
		{"IndPtr decreasing", func(d *Design) { d.Rows, d.Dense, d.IndPtr = 3, append(d.Dense, 0), []int{0, 2, 1, 3} }},
		{"column high", func(d *Design) { d.IndCol[1] = 3 }},
		{"column negative", func(d *Design) { d.IndCol[0] = -1 }},
		{"entries without IndPtr", func(d *Design) { d.IndPtr = nil }},
		{"negative size", func(d *Design) { d.NInd = -1 }},
	}
	for _, tc := range designs {
		t.Run(tc.name, func(t *testing.T) {
			d := good()
			tc.edit(d)
			if err := d.Validate(); err == nil {
				t.Error("Validate accepted a bad design")
			}
			if _, err := FitLogistic(d, []float64{0, 1}, 0.1, Options{}); err == nil {
				t.Error("FitLogistic accepted a bad design")
			}
		})
	}
	fits := []struct {
		name string
		fit  func() error
	}{
		{"logistic target 2", func() error { _, err := FitLogistic(good(), []float64{0, 2}, 0.1, Options{}); return err }},
		{"logistic target NaN", func() error { _, err := FitLogistic(good(), []float64{0, math.NaN()}, 0.1, Options{}); return err }},
		{"logistic target count", func() error { _, err := FitLogistic(good(), []float64{0}, 0.1, Options{}); return err }},
		{"negative lambda", func() error { _, err := FitLogistic(good(), []float64{0, 1}, -1, Options{}); return err }},
		{"NaN lambda", func() error { _, err := FitRidge(good(), []float64{0, 1}, math.NaN(), Options{}); return err }},
		{"infinite lambda", func() error { _, err := FitRidge(good(), []float64{0, 1}, math.Inf(1), Options{}); return err }},
		{"NaN dense", func() error {
			d := good()
			d.Dense[1] = math.NaN()
			_, err := FitRidge(d, []float64{0, 1}, 0.1, Options{})
			return err
		}},
		{"no rows", func() error { _, err := FitRidge(&Design{NDense: 1}, nil, 0.1, Options{}); return err }},
		{"ridge target Inf", func() error { _, err := FitRidge(good(), []float64{0, math.Inf(1)}, 0.1, Options{}); return err }},
		{"one class", func() error { _, err := FitMultinomial(good(), []int{0, 0}, 1, 0.1, Options{}); return err }},
		{"class out of range", func() error { _, err := FitMultinomial(good(), []int{0, 3}, 3, 0.1, Options{}); return err }},
		{"negative class", func() error { _, err := FitMultinomial(good(), []int{-1, 0}, 3, 0.1, Options{}); return err }},
	}
	for _, tc := range fits {
		t.Run(tc.name, func(t *testing.T) {
			if err := tc.fit(); err == nil {
				t.Error("fit accepted bad input")
			}
		})
	}
}

func TestNotConverged(t *testing.T) {
	// Separable data without a penalty: the weights grow without bound, so
	// an unreachable tolerance runs out of iterations.
	d := &Design{Rows: 4, NDense: 1, Dense: []float64{-2, -1, 1, 2}}
	m, err := FitLogistic(d, []float64{0, 0, 1, 1}, 0, Options{MaxIter: 50, Tol: 1e-300})
	if !errors.Is(err, ErrNotConverged) {
		t.Fatalf("err = %v, want ErrNotConverged", err)
	}
	if m == nil || !(m.W[0] > 1) {
		t.Errorf("want the last iterate with a large positive weight, got %+v", m)
	}
	// A budget too small for a real problem.
	d2, z := standardised(61, 500, 3, []int{20})
	if _, err := FitLogistic(d2, binaryTargets(61, z), 1e-4, Options{MaxIter: 2, Tol: 1e-12}); !errors.Is(err, ErrNotConverged) {
		t.Errorf("MaxIter 2: err = %v, want ErrNotConverged", err)
	}
}

func TestPredict(t *testing.T) {
	m := &Logistic{NDense: 1, W: []float64{2, 1, -1}, B: 0.5}
	d := &Design{Rows: 3, NDense: 1, NInd: 5, Dense: []float64{0, 1, -1},
		IndPtr: []int{0, 1, 2, 3}, IndCol: []int32{0, 1, 4}} // column 4: unseen, weight 0
	buf := make([]float64, 1, 8)
	got := m.Predict(d, buf)
	want := []float64{sigmoid(1.5), sigmoid(1.5), sigmoid(-1.5)}
	if maxDiff(got, want) > 1e-15 || len(got) != 3 || &got[0] != &buf[:1][0] {
		t.Errorf("Logistic.Predict = %v (reused %v), want %v", got, &got[0] == &buf[:1][0], want)
	}
	rm := &Ridge{NDense: 1, W: m.W, B: m.B}
	if got := rm.Predict(d, nil); maxDiff(got, []float64{1.5, 1.5, -1.5}) > 1e-15 {
		t.Errorf("Ridge.Predict = %v", got)
	}
	mm := &Multinomial{NDense: 1, W: [][]float64{{0, 0, 0}, m.W}, B: []float64{0, 0.5}}
	out := mm.Predict(d, make([][]float64, 0, 1))
	for r := range 3 {
		if math.Abs(out[r][1]-want[r]) > 1e-15 || math.Abs(out[r][0]-(1-want[r])) > 1e-15 {
			t.Errorf("Multinomial.Predict row %d = %v, want [%v %v]", r, out[r], 1-want[r], want[r])
		}
	}
	// Extreme margins stay finite.
	big := &Logistic{NDense: 1, W: []float64{1000}, B: 0}
	e := big.Predict(&Design{Rows: 2, NDense: 1, Dense: []float64{1, -1}}, nil)
	if e[0] != 1 || e[1] != 0 {
		t.Errorf("extreme margins: %v", e)
	}
	defer func() {
		if recover() == nil {
			t.Error("Predict on a design of another dense width did not panic")
		}
	}()
	m.Predict(&Design{Rows: 1, NDense: 2, Dense: []float64{1, 2}}, nil)
}
