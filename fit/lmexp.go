package fit

import "math"

// expLM is the dedicated Levenberg–Marquardt solver of the two-parameter
// decay f = M0·exp(−R·TE): evaluation, residuals, the 2×2 normal equations
// and the cost are one fused pass over the echoes, and the damped step is a
// closed-form 2×2 solve. It follows the same iteration and convergence
// tests as lm (Marquardt 1963; Moré 1978), so both give the same minimum;
// TestExpLMMatchesGeneric checks it.
type expLM struct {
	c    *monoExpCurve
	set  LM
	rlo  float64 // bounds on R, 1/ms
	rhi  float64
	a11  float64 // JᵀJ at the current point
	a12  float64
	a22  float64
	iter int
}

// pass evaluates the cost at (m0, r) and, into the returned normal
// equations, JᵀJ and Jᵀ(y − f).
func (s *expLM) pass(y []float64, m0, r float64) (rss, a11, a12, a22, g1, g2 float64) {
	c := s.c
	c.decay(r)
	for i, e := range c.ex {
		t := c.te[i]
		d := y[i] - m0*e
		j2 := -m0 * t * e
		rss += d * d
		a11 += e * e
		a12 += e * j2
		a22 += j2 * j2
		g1 += e * d
		g2 += j2 * d
	}
	return
}

// solve refines (m0, r) in place and returns the cost, the iteration
// count and whether it converged.
func (s *expLM) solve(y []float64, m0, r *float64) (float64, int, bool) {
	set := s.set.withDefaults()
	xtol2 := set.XTol * set.XTol
	p0, p1 := *m0, *r
	rss, a11, a12, a22, g1, g2 := s.pass(y, p0, p1)
	if math.IsNaN(rss) || math.IsInf(rss, 0) {
		return rss, 0, false
	}
	lambda := 1e-3
	for it := 1; it <= set.MaxIter; it++ {
		old := rss
		accepted := false
		var relStep2 float64
		for try := 0; try < 40; try++ {
			d11, d22 := a11, a22
			if d11 == 0 {
				d11 = 1e-300
			}
			if d22 == 0 {
				d22 = 1e-300
			}
			d11 *= 1 + lambda
			d22 *= 1 + lambda
			det := d11*d22 - a12*a12
			if !(det > 0) {
				lambda *= 10
				continue
			}
			q0 := p0 + (d22*g1-a12*g2)/det
			q1 := p1 + (d11*g2-a12*g1)/det
			if q1 < s.rlo {
				q1 = s.rlo
			} else if q1 > s.rhi {
				q1 = s.rhi
			}
			relStep2 = ((q0-p0)*(q0-p0) + (q1-p1)*(q1-p1)) / (p0*p0 + p1*p1 + 1e-300)
			rt, b11, b12, b22, h1, h2 := s.pass(y, q0, q1)
			if rt <= rss {
				p0, p1 = q0, q1
				rss, a11, a12, a22, g1, g2 = rt, b11, b12, b22, h1, h2
				lambda = math.Max(lambda*0.1, 1e-12)
				accepted = true
				break
			}
			if relStep2 <= xtol2 {
				*m0, *r = p0, p1
				s.a11, s.a12, s.a22 = a11, a12, a22
				return rss, it, true
			}
			lambda *= 10
		}
		if !accepted {
			*m0, *r = p0, p1
			s.a11, s.a12, s.a22 = a11, a12, a22
			return rss, it, false
		}
		if relStep2 <= xtol2 || old-rss <= set.FTol*old {
			*m0, *r = p0, p1
			s.a11, s.a12, s.a22 = a11, a12, a22
			return rss, it, true
		}
	}
	*m0, *r = p0, p1
	s.a11, s.a12, s.a22 = a11, a12, a22
	return rss, set.MaxIter, false
}

// se returns the standard errors of M0 and R from s²·(JᵀJ)⁻¹ at the last
// solution, NaN when singular or n ≤ 2.
func (s *expLM) se(rss float64, n int) (seM0, seR float64) {
	det := s.a11*s.a22 - s.a12*s.a12
	if n <= 2 || !(det > 0) {
		return math.NaN(), math.NaN()
	}
	s2 := rss / float64(n-2)
	return math.Sqrt(s2 * s.a22 / det), math.Sqrt(s2 * s.a11 / det)
}
