package fit

import "math"

// curve is a parametric signal for the dense least-squares solvers.
type curve interface {
	// eval writes the model values at parameters p into f and, when jac is
	// not nil, the Jacobian ∂f_i/∂p_j row-major (len(f) × len(p)) into jac.
	eval(f, jac, p []float64)
}

// solver minimises Σ(y_i − f_i(p))² over p within [lo, hi], starting from
// and overwriting p. It returns the residual sum of squares and whether it
// converged.
type solver interface {
	solve(c curve, y, p, lo, hi []float64) (rss float64, iters int, ok bool)
}

// LM settings; the zero value of each field selects the default.
type LM struct {
	// MaxIter caps the iterations; default 100.
	MaxIter int
	// XTol stops when the relative parameter step is below it; default
	// 1e-9.
	XTol float64
	// FTol stops when the relative decrease of the residual sum of squares
	// in one iteration is below it; default 1e-12. (The same two tests as
	// MINPACK's lmder, Moré 1978.)
	FTol float64
}

// lm is a Levenberg–Marquardt workspace for at most maxParams parameters
// and a fixed number of samples (Marquardt 1963, with the diagonal scaling
// of the damping term, More 1978). Not safe for concurrent use.
type lm struct {
	set       LM
	n, p      int
	f, ft     []float64
	jac, jact []float64
	r         []float64
	pt        []float64
	jtj, a    [maxParams * maxParams]float64
	jtr, step [maxParams]float64
}

// withDefaults returns the settings with every zero field at its default.
func (set LM) withDefaults() LM {
	if set.MaxIter == 0 {
		set.MaxIter = 100
	}
	if set.XTol == 0 {
		set.XTol = 1e-9
	}
	if set.FTol == 0 {
		set.FTol = 1e-12
	}
	return set
}

func newLM(set LM, n, p int) *lm {
	if p > maxParams {
		panic("fit: too many parameters for the dense solver")
	}
	set = set.withDefaults()
	return &lm{
		set: set, n: n, p: p,
		f: make([]float64, n), ft: make([]float64, n),
		jac: make([]float64, n*p), jact: make([]float64, n*p),
		r: make([]float64, n), pt: make([]float64, p),
	}
}

func (s *lm) residual(y, f []float64) float64 {
	var rss float64
	for i := range y {
		d := y[i] - f[i]
		s.r[i] = d
		rss += d * d
	}
	return rss
}

func (s *lm) solve(c curve, y, p, lo, hi []float64) (float64, int, bool) {
	n, np := s.n, s.p
	c.eval(s.f, s.jac, p)
	rss := s.residual(y, s.f)
	if math.IsNaN(rss) || math.IsInf(rss, 0) {
		return rss, 0, false
	}
	xtol2 := s.set.XTol * s.set.XTol
	lambda := 1e-3
	for it := 1; it <= s.set.MaxIter; it++ {
		normalEq(&s.jtj, &s.jtr, s.jac, s.r, n, np)
		accepted := false
		var relStep2 float64
		old := rss
		for try := 0; try < 40 && !accepted; try++ {
			s.a = s.jtj
			for k := 0; k < np; k++ {
				d := s.jtj[k*maxParams+k]
				if d == 0 {
					d = 1e-300
				}
				s.a[k*maxParams+k] = d * (1 + lambda)
			}
			if !cholesky(&s.a, np) {
				lambda *= 10
				continue
			}
			s.step = s.jtr
			cholSolve(&s.a, np, &s.step)
			var stepNorm, pNorm float64
			for k := 0; k < np; k++ {
				v := p[k] + s.step[k]
				if v < lo[k] {
					v = lo[k]
				} else if v > hi[k] {
					v = hi[k]
				}
				s.pt[k] = v
				d := v - p[k]
				stepNorm += d * d
				pNorm += p[k] * p[k]
			}
			relStep2 = stepNorm / (pNorm + 1e-300)
			c.eval(s.ft, s.jact, s.pt)
			var rt float64
			for i := range y {
				d := y[i] - s.ft[i]
				rt += d * d
			}
			if rt <= rss {
				copy(p, s.pt)
				s.f, s.ft = s.ft, s.f
				s.jac, s.jact = s.jact, s.jac
				rss = s.residual(y, s.f)
				lambda = math.Max(lambda*0.1, 1e-12)
				accepted = true
				break
			}
			if relStep2 <= xtol2 {
				// Even a vanishing step does not lower the cost: p is a
				// minimum to working precision.
				return rss, it, true
			}
			lambda *= 10
		}
		if !accepted {
			return rss, it, false
		}
		if relStep2 <= xtol2 || old-rss <= s.set.FTol*old {
			return rss, it, true
		}
	}
	return rss, s.set.MaxIter, false
}

// covDiag writes the standard errors √diag(s²·(JᵀJ)⁻¹) at the solution held
// in s (after solve) into se, with s² = rss/(n−p). It reports false when
// JᵀJ is singular or n ≤ p.
func (s *lm) covDiag(se []float64, rss float64) bool {
	return seFromJac(&s.jtj, &s.jtr, s.jac, s.r, s.n, s.p, rss, se)
}

// seFromJac computes standard errors from an n×p Jacobian, using jtj and jtr
// as scratch.
func seFromJac(jtj *[maxParams * maxParams]float64, jtr *[maxParams]float64, jac, r []float64, n, p int, rss float64, se []float64) bool {
	if n <= p {
		return false
	}
	normalEq(jtj, jtr, jac, r, n, p)
	if !cholesky(jtj, p) {
		return false
	}
	var d [maxParams]float64
	invDiag(jtj, p, &d)
	s2 := rss / float64(n-p)
	for k := 0; k < p; k++ {
		se[k] = math.Sqrt(s2 * d[k])
	}
	return true
}

// setPoint evaluates the curve and its Jacobian at p and the residuals of
// y, so covDiag can follow a solve by another solver.
func (s *lm) setPoint(c curve, y, p []float64) float64 {
	c.eval(s.f, s.jac, p)
	return s.residual(y, s.f)
}
