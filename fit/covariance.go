package fit

import "math"

// inv2 inverts the normal matrix [[n, se], [se, see]] of X = [1 e]. It
// reports false when the columns are collinear to working precision (e
// nearly constant: T1 far below the shortest or far above the longest
// time), so the row cannot separate a from b.
func inv2(n, se, see float64) (q11, q12, q22 float64, ok bool) {
	det := n*see - se*se
	// det/(n·see) is the relative spread of e; 1e-10 leaves a margin of
	// about 1e6 over rounding of sums of order-1 terms.
	if !(det > 1e-10*n*see) {
		return 0, 0, 0, false
	}
	return see / det, -se / det, n / det, true
}

// covariance writes cov = s²·(JᵀJ)⁻¹, s² = rss/(n−p), row-major with
// leading dimension maxParams, from the n×p row-major Jacobian jac. It
// reports false when n ≤ p or JᵀJ is singular.
func covariance(cov *[maxParams * maxParams]float64, jac []float64, n, p int, rss float64) bool {
	if n <= p {
		return false
	}
	var a [maxParams * maxParams]float64
	for i := 0; i < n; i++ {
		row := jac[i*p : i*p+p]
		for r := 0; r < p; r++ {
			for c := 0; c <= r; c++ {
				a[r*maxParams+c] += row[r] * row[c]
			}
		}
	}
	for r := 0; r < p; r++ {
		for c := 0; c < r; c++ {
			a[c*maxParams+r] = a[r*maxParams+c]
		}
	}
	if !cholesky(&a, p) {
		return false
	}
	s2 := rss / float64(n-p)
	var e [maxParams]float64
	for j := 0; j < p; j++ {
		for i := range e[:p] {
			e[i] = 0
		}
		e[j] = 1
		cholSolve(&a, p, &e)
		for i := 0; i < p; i++ {
			cov[i*maxParams+j] = s2 * e[i]
		}
	}
	return true
}

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
