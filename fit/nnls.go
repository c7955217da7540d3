package fit

import "math"

// nnls solves the non-negative least-squares problem
//
//	min ‖A·x − b‖²  subject to x ≥ 0
//
// by the active-set algorithm of Lawson & Hanson (Solving Least Squares
// Problems, 1974, ch. 23), written on the normal equations: it needs only
// G = AᵀA (m×m, row-major), h = Aᵀb, so a Tikhonov term μ‖x‖² is G + μI
// (the stacked system [A; √μ·I], [b; 0] of check-values §1.3) at no cost,
// and a fixed basis shares G between voxels.
//
// The algorithm keeps a passive set P (the free variables) and the
// feasible x with x_j = 0 off P. Outer loop: the gradient w = h − G·x; if
// no j off P has w_j > tol, x is optimal (the Kuhn–Tucker conditions);
// else move the j with the largest w_j into P. Inner loop: solve the
// unconstrained problem on P, G_PP·z = h_P; if some z_j ≤ 0, step from x
// towards z as far as feasibility allows, drop the variables that reach 0
// from P, and solve again. The subproblem is solved by a Cholesky factor
// of G_PP that grows by one row when a variable enters P (O(|P|²)) and is
// refactored when variables leave. Working on G squares the condition
// number of A_P; a variable whose column is dependent on P to working
// precision (the Cholesky pivot would not be positive, or its z_j comes
// out non-positive at once, which Lawson & Hanson's step 6 excludes in
// exact arithmetic) is set aside for that outer iteration, as the
// Fortran reference does. The tests compare with scipy.optimize.nnls
// (Lawson–Hanson on A itself, with Householder QR).
//
// A warm start (start) seeds P with the support of an earlier solution;
// negative entries of its subproblem are dropped until the start is
// feasible, then the algorithm proceeds as above. An nnls is not safe for
// concurrent use; solve does not allocate.
type nnls struct {
	m       int
	x, w, z []float64
	free    []bool // j in P
	skip    []bool // set aside in this outer iteration
	p       []int  // P in factor order
	l       []float64
	tmp     []float64
	maxIter int
}

func newNNLS(m int) *nnls {
	return &nnls{
		m: m, x: make([]float64, m), w: make([]float64, m), z: make([]float64, m),
		free: make([]bool, m), skip: make([]bool, m), p: make([]int, 0, m),
		l: make([]float64, m*m), tmp: make([]float64, m), maxIter: 3 * m,
	}
}

// factor builds the Cholesky factor of G_PP for the current order of p.
// It reports false when G_PP is not positive definite to working
// precision.
func (s *nnls) factor(g []float64) bool {
	k := len(s.p)
	for r := 0; r < k; r++ {
		if !s.addRow(g, r) {
			return false
		}
	}
	return true
}

// addRow extends the factor by row r (variable p[r]), assuming rows
// 0…r−1 are factored: L[r][c] = (G[p_r][p_c] − Σ L[r][i]·L[c][i])/L[c][c],
// L[r][r] = √(G[p_r][p_r] − Σ L[r][i]²).
func (s *nnls) addRow(g []float64, r int) bool {
	m := s.m
	pr := s.p[r]
	row := s.l[r*m : r*m+r+1]
	for c := 0; c < r; c++ {
		v := g[pr*m+s.p[c]]
		lc := s.l[c*m : c*m+c]
		for i, x := range lc {
			v -= row[i] * x
		}
		row[c] = v / s.l[c*m+c]
	}
	d := g[pr*m+pr]
	for _, x := range row[:r] {
		d -= x * x
	}
	// A pivot below 1e-14 of the diagonal means the column lies in the
	// span of the others to about 1e-7 in angle, at the limit of what the
	// normal equations resolve.
	if !(d > 1e-14*g[pr*m+pr]) {
		return false
	}
	row[r] = math.Sqrt(d)
	return true
}

// subproblem solves G_PP·z_P = h_P with the current factor; z is zero off
// P.
func (s *nnls) subproblem(h []float64) {
	m := s.m
	k := len(s.p)
	t := s.tmp[:k]
	for r := 0; r < k; r++ {
		v := h[s.p[r]]
		for c := 0; c < r; c++ {
			v -= s.l[r*m+c] * t[c]
		}
		t[r] = v / s.l[r*m+r]
	}
	for r := k - 1; r >= 0; r-- {
		v := t[r]
		for c := r + 1; c < k; c++ {
			v -= s.l[c*m+r] * t[c]
		}
		t[r] = v / s.l[r*m+r]
	}
	for j := range s.z {
		s.z[j] = 0
	}
	for r, j := range s.p {
		s.z[j] = t[r]
	}
}

// dropZeros removes from P the variables whose x is not positive and
// refactors; it reports false when the refactorisation fails.
func (s *nnls) dropZeros(g []float64) bool {
	q := s.p[:0]
	for _, j := range s.p {
		if s.x[j] > 0 {
			q = append(q, j)
		} else {
			s.x[j] = 0
			s.free[j] = false
		}
	}
	s.p = q
	return s.factor(g)
}

// solve minimises ‖Ax − b‖² over x ≥ 0 given g = AᵀA and h = Aᵀb, the
// solution left in s.x. With warm, the passive set starts from the
// positive entries of s.x (a previous solution); otherwise from empty. It
// returns the number of outer iterations and false if the iteration limit
// (3m) was reached or the subproblem became singular.
func (s *nnls) solve(g, h []float64, warm bool) (int, bool) {
	m := s.m
	tol := s.tolerance(g, h)
	s.p = s.p[:0]
	if warm {
		// Seed P with the support of the previous solution and every
		// variable whose gradient at it is positive (a block step:
		// adding them one at a time costs an outer iteration each when
		// the regularised solution is dense).
		for j := 0; j < m; j++ {
			if s.x[j] > 0 {
				s.p = append(s.p, j)
			}
		}
		for j := 0; j < m; j++ {
			if s.x[j] > 0 {
				continue
			}
			v := h[j]
			row := g[j*m : j*m+m]
			for _, i := range s.p {
				v -= row[i] * s.x[i]
			}
			if v > tol {
				s.p = append(s.p, j)
				s.x[j] = 1 // marks it free below
			}
		}
	}
	for j := 0; j < m; j++ {
		s.free[j] = warm && s.x[j] > 0
		if !s.free[j] {
			s.x[j] = 0
		}
	}
	if len(s.p) > 0 {
		// Make the warm start feasible: solve on P and drop the variables
		// that come out non-positive until none do.
		for len(s.p) > 0 {
			if !s.factor(g) {
				for _, j := range s.p {
					s.free[j] = false
					s.x[j] = 0
				}
				s.p = s.p[:0]
				break
			}
			s.subproblem(h)
			neg := false
			for _, j := range s.p {
				s.x[j] = s.z[j]
				if s.z[j] <= 0 {
					neg = true
				}
			}
			if !neg {
				break
			}
			q := s.p[:0]
			for _, j := range s.p {
				if s.z[j] > 0 {
					q = append(q, j)
				} else {
					s.x[j] = 0
					s.free[j] = false
				}
			}
			s.p = q
		}
	}
	for j := range s.skip {
		s.skip[j] = false
	}
	for it := 1; it <= s.maxIter; it++ {
		// w = h − G·x, over the variables off P.
		best, wmax := -1, tol
		for j := 0; j < m; j++ {
			if s.free[j] || s.skip[j] {
				continue
			}
			v := h[j]
			row := g[j*m : j*m+m]
			for _, i := range s.p {
				v -= row[i] * s.x[i]
			}
			s.w[j] = v
			if v > wmax {
				best, wmax = j, v
			}
		}
		if best < 0 {
			return it, true
		}
		s.p = append(s.p, best)
		s.free[best] = true
		if !s.addRow(g, len(s.p)-1) {
			s.setAside(best)
			continue
		}
		s.subproblem(h)
		if s.z[best] <= 0 {
			// The factor of the rest is its leading part: still valid.
			s.setAside(best)
			continue
		}
		for j := range s.skip {
			s.skip[j] = false
		}
		for inner := 0; ; inner++ {
			if inner > m {
				return it, false
			}
			alpha, jmin := 2.0, -1
			for _, j := range s.p {
				if s.z[j] <= 0 {
					a := s.x[j] / (s.x[j] - s.z[j])
					if a < alpha {
						alpha, jmin = a, j
					}
				}
			}
			if jmin < 0 {
				for _, j := range s.p {
					s.x[j] = s.z[j]
				}
				break
			}
			for _, j := range s.p {
				s.x[j] += alpha * (s.z[j] - s.x[j])
			}
			s.x[jmin] = 0 // exactly, not to rounding
			if !s.dropZeros(g) {
				return it, false
			}
			s.subproblem(h)
		}
	}
	return s.maxIter, false
}

// tolerance returns the gradient tolerance: a relative 1e-12 of its
// natural scale max_j √G_jj · max_j |h_j|/√G_jj (the second factor is at
// most ‖b‖ by Cauchy–Schwarz), as the tolerances of scipy's and the
// Fortran code are relative to the problem's scale.
func (s *nnls) tolerance(g, h []float64) float64 {
	m := s.m
	var scale, gmax float64
	for j := 0; j < m; j++ {
		d := math.Sqrt(math.Max(g[j*m+j], 1e-300))
		scale = math.Max(scale, math.Abs(h[j])/d)
		gmax = math.Max(gmax, d)
	}
	return 1e-12 * gmax * scale
}

// setAside removes the last variable of P (just added) and marks it
// skipped for this outer iteration.
func (s *nnls) setAside(j int) {
	s.p = s.p[:len(s.p)-1]
	s.free[j] = false
	s.x[j] = 0
	s.skip[j] = true
}
