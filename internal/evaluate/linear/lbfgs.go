package linear

import (
	"errors"
	"fmt"
	"math"
)

// Options controls the L-BFGS solver shared by every fit.
//
// The solver is limited-memory BFGS (Nocedal, "Updating quasi-Newton
// matrices with limited storage", Mathematics of Computation 35, 1980; the
// two-loop recursion of Nocedal & Wright, Numerical Optimization, 2nd ed.,
// algorithm 7.4) with a bracketing line search for the weak Wolfe
// conditions. It is used instead of Newton's method because a design of a
// million rows and thousands of indicator columns makes the Hessian a dense
// p×p matrix (p ≈ 3000 gives 9 million entries, each a sum over every row,
// and a cubic-cost solve per iteration), while L-BFGS needs only the
// gradient, one pass over the rows per evaluation, and O(m·p) memory for m =
// 10 correction pairs. On these smooth, strongly convex objectives (λ > 0) it
// converges in tens to a few hundred iterations; scaling the initial
// inverse-Hessian approximation by the inverse Hessian diagonal at the start
// (which for an indicator is proportional to one over its row share) brings
// that to 10-25 iterations on a million rows with 3000 indicators.
//
// The iteration starts at zero weights, and every sum runs in a fixed
// order, so results are reproducible bit for bit.
type Options struct {
	// MaxIter bounds the number of L-BFGS iterations; 0 means 1000.
	MaxIter int
	// Tol is the convergence threshold: the fit stops once the largest
	// absolute gradient component is at most Tol·max(1, g0), g0 the largest
	// one at the start (zero weights). 0 means 1e-6.
	Tol float64
}

// ErrNotConverged is wrapped by the error a fit returns when the solver
// stops (at MaxIter, or when the line search can make no further progress)
// before the gradient reaches the tolerance. The fit then also returns the
// model at the last iterate, which is usually still usable.
var ErrNotConverged = errors.New("solver did not converge")

const (
	lbfgsMemory = 10   // correction pairs kept
	wolfeC1     = 1e-4 // sufficient decrease
	wolfeC2     = 0.9  // curvature
	maxTrials   = 40   // function evaluations per line search
	// fNoise is the relative change of the objective below which the line
	// search treats it as rounding noise and falls back to the approximate
	// Wolfe conditions, which use only directional derivatives (Hager &
	// Zhang, "A new conjugate gradient method with guaranteed descent and an
	// efficient line search", SIAM J. Optim. 16(1), 2005).
	fNoise = 1e-12
)

// objective evaluates the function at x and writes its gradient to grad.
type objective func(x, grad []float64) float64

// result describes how a minimisation ended.
type result struct {
	iters    int
	evals    int     // objective evaluations
	gradNorm float64 // max-norm of the final gradient
}

// minimize runs L-BFGS on f from x (overwritten with the minimiser). It
// returns an error wrapping ErrNotConverged when it stops early, with x
// holding the best iterate found.
//
// hinv, when not nil, is a positive diagonal preconditioner (an estimate of
// the inverse Hessian diagonal): the initial inverse-Hessian approximation
// of each iteration becomes γ·diag(hinv), γ = sᵀy / yᵀ diag(hinv) y, which is
// plain L-BFGS in the variables scaled by diag(hinv)^(-1/2).
func minimize(obj objective, x []float64, hinv []float64, opt Options) (res result, err error) {
	f := func(x, g []float64) float64 { res.evals++; return obj(x, g) }
	maxIter, tol := opt.MaxIter, opt.Tol
	if maxIter <= 0 {
		maxIter = 1000
	}
	if tol <= 0 || math.IsNaN(tol) {
		tol = 1e-6
	}
	n := len(x)
	g := make([]float64, n)
	fx := f(x, g)
	if math.IsNaN(fx) || math.IsInf(fx, 0) {
		return res, fmt.Errorf("linear: objective is %v at the start", fx)
	}
	g0 := normInf(g)
	thresh := tol * math.Max(1, g0)
	if g0 <= thresh {
		res.gradNorm = g0
		return res, nil
	}

	s := make([][]float64, lbfgsMemory)
	yv := make([][]float64, lbfgsMemory)
	for i := range s {
		s[i] = make([]float64, n)
		yv[i] = make([]float64, n)
	}
	rho := make([]float64, lbfgsMemory)
	alpha := make([]float64, lbfgsMemory)
	stored, head := 0, 0 // pairs held; slot of the next pair

	d := make([]float64, n)
	xn := make([]float64, n)
	gn := make([]float64, n)

	for iter := 1; iter <= maxIter; iter++ {
		// Two-loop recursion: d = -H g.
		for i := range d {
			d[i] = -g[i]
		}
		for k := 1; k <= stored; k++ {
			j := (head - k + lbfgsMemory) % lbfgsMemory
			alpha[j] = rho[j] * dot(s[j], d)
			axpy(-alpha[j], yv[j], d)
		}
		if hinv != nil {
			gamma := 1.0
			if stored > 0 {
				j := (head - 1 + lbfgsMemory) % lbfgsMemory
				gamma = dot(s[j], yv[j]) / dotw(yv[j], hinv, yv[j])
			}
			for i, h := range hinv {
				d[i] *= gamma * h
			}
		} else if stored > 0 {
			j := (head - 1 + lbfgsMemory) % lbfgsMemory
			scal(dot(s[j], yv[j])/dot(yv[j], yv[j]), d)
		}
		for k := stored; k >= 1; k-- {
			j := (head - k + lbfgsMemory) % lbfgsMemory
			beta := rho[j] * dot(yv[j], d)
			axpy(alpha[j]-beta, s[j], d)
		}
		gd := dot(g, d)
		if !(gd < 0) { // lost descent through rounding: restart
			stored = 0
			for i := range d {
				d[i] = -g[i]
				if hinv != nil {
					d[i] *= hinv[i]
				}
			}
			gd = dot(g, d)
		}
		step := 1.0
		if stored == 0 && hinv == nil {
			step = 1 / math.Sqrt(-gd) // first step of unit length
		}

		fn, ok := lineSearch(f, x, fx, g, gd, d, step, xn, gn)
		if !ok {
			res.iters, res.gradNorm = iter-1, normInf(g)
			return res, fmt.Errorf("linear: %w: line search made no progress after %d iterations (gradient %.3g, tolerance %.3g)",
				ErrNotConverged, iter-1, normInf(g), thresh)
		}

		// Store the correction pair s = xn - x, y = gn - g when its
		// curvature is positive (always, for a strongly convex objective).
		sj, yj := s[head], yv[head]
		for i := range x {
			sj[i] = xn[i] - x[i]
			yj[i] = gn[i] - g[i]
		}
		if sy := dot(sj, yj); sy > 1e-16*dot(yj, yj) {
			rho[head] = 1 / sy
			head = (head + 1) % lbfgsMemory
			if stored < lbfgsMemory {
				stored++
			}
		}
		copy(x, xn)
		copy(g, gn)
		fx = fn
		if gn := normInf(g); gn <= thresh {
			res.iters, res.gradNorm = iter, gn
			return res, nil
		}
	}
	res.iters, res.gradNorm = maxIter, normInf(g)
	return res, fmt.Errorf("linear: %w in %d iterations (gradient %.3g, tolerance %.3g)", ErrNotConverged, maxIter, normInf(g), thresh)
}

// lineSearch looks for a step t along d from x satisfying the weak Wolfe
// conditions f(x+td) <= f(x) + c1·t·gd and g(x+td)·d >= c2·gd, bracketing
// the step: a failed decrease shrinks it by safeguarded quadratic
// interpolation, a failed curvature test doubles it (or bisects the
// bracket). When the decrease is below the rounding noise of f, the
// approximate Wolfe test (2c1-1)·gd >= g(x+td)·d >= c2·gd is used instead.
// If the trials run out after some step passed the decrease test, the
// longest such step is taken. On success xn, gn hold the new point and
// gradient and fn is returned.
func lineSearch(f objective, x []float64, fx float64, g []float64, gd float64, d []float64, t float64, xn, gn []float64) (fn float64, ok bool) {
	lo, hi := 0.0, math.Inf(1)
	noise := fNoise * math.Max(1, math.Abs(fx))
	for range maxTrials {
		for i := range x {
			xn[i] = x[i] + t*d[i]
		}
		fn = f(xn, gn)
		dn := dot(gn, d)
		switch {
		case math.IsNaN(fn) || math.IsInf(fn, 0) || (fn > fx+wolfeC1*t*gd && !(fn <= fx+noise && dn <= (2*wolfeC1-1)*gd && dn >= wolfeC2*gd)):
			// Too long: shrink within the bracket.
			hi = t
			q := t
			if den := 2 * (fn - fx - gd*t); den > 0 && !math.IsInf(fn, 0) {
				q = -gd * t * t / den
			}
			t = math.Min(math.Max(q, lo+0.1*(hi-lo)), lo+0.5*(hi-lo))
		case dn < wolfeC2*gd:
			// Too short: the slope is still steep.
			lo = t
			if math.IsInf(hi, 1) {
				t *= 2
			} else {
				t = 0.5 * (lo + hi)
			}
		default:
			return fn, true
		}
		if t == lo || t == hi || t <= 0 {
			break
		}
	}
	if lo > 0 { // the sufficient decrease held at lo: take that step
		for i := range x {
			xn[i] = x[i] + lo*d[i]
		}
		return f(xn, gn), true
	}
	return 0, false
}

// dotw returns Σ a_i w_i b_i.
func dotw(a, w, b []float64) float64 {
	var s float64
	for i, v := range a {
		s += v * w[i] * b[i]
	}
	return s
}

func dot(a, b []float64) float64 {
	var s float64
	for i, v := range a {
		s += v * b[i]
	}
	return s
}

// axpy sets y += a*x.
func axpy(a float64, x, y []float64) {
	for i, v := range x {
		y[i] += a * v
	}
}

func scal(a float64, x []float64) {
	for i := range x {
		x[i] *= a
	}
}

func normInf(x []float64) float64 {
	var m float64
	for _, v := range x {
		if a := math.Abs(v); a > m || math.IsNaN(v) {
			m = a
		}
	}
	return m
}
