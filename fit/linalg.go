package fit

import "math"

// maxParams bounds the number of fitted parameters of the dense solvers, so
// their workspaces are fixed-size arrays and never allocate.
const maxParams = 6

// cholesky factors the symmetric positive definite n×n matrix a (row-major,
// leading dimension maxParams) in place into its lower factor L with
// a = L·Lᵀ. It reports false when a is not positive definite.
func cholesky(a *[maxParams * maxParams]float64, n int) bool {
	for j := 0; j < n; j++ {
		d := a[j*maxParams+j]
		for k := 0; k < j; k++ {
			d -= a[j*maxParams+k] * a[j*maxParams+k]
		}
		if !(d > 0) {
			return false
		}
		d = math.Sqrt(d)
		a[j*maxParams+j] = d
		for i := j + 1; i < n; i++ {
			s := a[i*maxParams+j]
			for k := 0; k < j; k++ {
				s -= a[i*maxParams+k] * a[j*maxParams+k]
			}
			a[i*maxParams+j] = s / d
		}
	}
	return true
}

// cholSolve solves L·Lᵀ·x = b in place in b, with L from cholesky.
func cholSolve(l *[maxParams * maxParams]float64, n int, b *[maxParams]float64) {
	for i := 0; i < n; i++ {
		s := b[i]
		for k := 0; k < i; k++ {
			s -= l[i*maxParams+k] * b[k]
		}
		b[i] = s / l[i*maxParams+i]
	}
	for i := n - 1; i >= 0; i-- {
		s := b[i]
		for k := i + 1; k < n; k++ {
			s -= l[k*maxParams+i] * b[k]
		}
		b[i] = s / l[i*maxParams+i]
	}
}

// invDiag writes the diagonal of (L·Lᵀ)⁻¹ into d, with L from cholesky.
func invDiag(l *[maxParams * maxParams]float64, n int, d *[maxParams]float64) {
	var e [maxParams]float64
	for j := 0; j < n; j++ {
		for i := range e[:n] {
			e[i] = 0
		}
		e[j] = 1
		cholSolve(l, n, &e)
		d[j] = e[j]
	}
}

// normalEq forms JᵀJ (leading dimension maxParams) and Jᵀr from the n×p
// row-major Jacobian jac and residuals r.
func normalEq(jtj *[maxParams * maxParams]float64, jtr *[maxParams]float64, jac, r []float64, n, p int) {
	for a := 0; a < p; a++ {
		jtr[a] = 0
		for b := 0; b <= a; b++ {
			jtj[a*maxParams+b] = 0
		}
	}
	for i := 0; i < n; i++ {
		row := jac[i*p : i*p+p]
		ri := r[i]
		for a := 0; a < p; a++ {
			ja := row[a]
			jtr[a] += ja * ri
			for b := 0; b <= a; b++ {
				jtj[a*maxParams+b] += ja * row[b]
			}
		}
	}
	for a := 0; a < p; a++ {
		for b := 0; b < a; b++ {
			jtj[b*maxParams+a] = jtj[a*maxParams+b]
		}
	}
}
