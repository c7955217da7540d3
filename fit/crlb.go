package fit

import "math"

// CRLB writes into sd the Cramér–Rao lower bound on the standard deviation
// of each parameter, √diag(F⁻¹) with the Fisher information
//
//	F = (1/σ²)·JᵀJ
//
// for data with independent Gaussian noise of SD sigma (Kay 1993, ch. 3).
// jac is the n×p Jacobian of the noiseless signal, row-major. It reports
// false when F is singular. It panics if p exceeds the dense solver limit.
func CRLB(sd, jac []float64, n, p int, sigma float64) bool {
	if p > maxParams {
		panic("fit: too many parameters for CRLB")
	}
	var jtj [maxParams * maxParams]float64
	var jtr [maxParams]float64
	r := make([]float64, n)
	normalEq(&jtj, &jtr, jac, r, n, p)
	if !cholesky(&jtj, p) {
		return false
	}
	var d [maxParams]float64
	invDiag(&jtj, p, &d)
	for k := 0; k < p; k++ {
		sd[k] = sigma * math.Sqrt(d[k])
	}
	return true
}

// MonoExpJacobian writes the n×2 Jacobian of S = M0·exp(−TE/T2) with
// respect to (M0, T2) into jac (allocated when nil or short) and returns it.
func MonoExpJacobian(jac, te []float64, m0, t2 float64) []float64 {
	if cap(jac) < 2*len(te) {
		jac = make([]float64, 2*len(te))
	}
	jac = jac[:2*len(te)]
	for i, t := range te {
		e := math.Exp(-t / t2)
		jac[2*i] = e
		jac[2*i+1] = m0 * t * e / (t2 * t2)
	}
	return jac
}
