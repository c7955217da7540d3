package fit

import "math"

// EPG is a workspace that simulates the echo train of a CPMG multi-echo
// spin echo with the extended phase graph (Hennig 1988, J Magn Reson
// 78:397; Weigel 2015, J Magn Reson Imaging 41:266).
//
// The sequence is that of check-values §1.2: an ideal 90° pulse about y,
// then n times [relax and dephase for ESP/2, refocus by α about x, relax and
// dephase for ESP/2, read the echo |F₀|]. Relaxation over τ is
// F → E2·F, Z_k → E1·Z_k and Z₀ → E1·Z₀ + (1 − E1), with E1 = exp(−τ/T1),
// E2 = exp(−τ/T2); the dephasing of each half interval moves every
// F_k to F_k+1; the refocusing pulse mixes (F_k, F*₋k, Z_k) by
//
//	T(α, 0) = [ cos²(α/2)       sin²(α/2)       −i·sin α ]
//	          [ sin²(α/2)       cos²(α/2)       +i·sin α ]
//	          [ −(i/2)·sin α    +(i/2)·sin α     cos α   ]
//
// (Weigel 2015, Eq. 15, with φ = 0).
//
// Two properties of this phase scheme make the simulation cheap, and the
// tests check both against a complex implementation of the same rules and
// against an isochromat Bloch simulation:
//
//   - Real arithmetic. After the 90° pulse about y, F₀ = 1 is real. With
//     F_k real and Z_k = i·w_k purely imaginary, T(α, 0) maps the triple
//     (F_k, F₋k, w_k) by the real matrix
//
//     [ cos²(α/2)      sin²(α/2)     sin α ]
//     [ sin²(α/2)      cos²(α/2)    −sin α ]
//     [ −½·sin α       ½·sin α       cos α ]
//
//     so the states stay in this real subspace. The only other source, the
//     regrowth (1 − E1) of Z₀, is real, and lives on even orders at the
//     pulses, while everything excited by the 90° pulse lives on odd orders
//     there; the pulses never mix orders and two shifts per echo keep the
//     parity, so regrowth never reaches F₀ at an echo time. It is left out
//     exactly.
//
//   - Only odd orders k = 2i+1 are populated at the pulses, and a state of
//     order k at pulse p can still reach F₀ at an echo only if
//     i ≤ n − p (the order of F₋k drops by two per echo). Pulse p therefore
//     updates the triples i = 0 … min(p−1, n−p): about n²/4 in all.
//
// An EPG is not safe for concurrent use; its methods do not allocate.
type EPG struct {
	n int
	// g holds F_j for odd j; the state of order j = 2m+1 at pulse p is at
	// g[m + off], off = 2n−1 − (p−1). Two shifts per echo move every F_j
	// to F_j+2, i.e. m to m+1, which is the decrement of off.
	g []float64
	// z holds w_i (Z_k = i·w_i, k = 2i+1), which does not move.
	z []float64
	// forward-mode derivatives of g and z with respect to T2 and α.
	gT, zT, gA, zA []float64
}

// NewEPG returns a workspace for trains of n echoes. It panics if n < 1.
func NewEPG(n int) *EPG {
	if n < 1 {
		panic("fit: EPG needs at least one echo")
	}
	return &EPG{
		n: n,
		g: make([]float64, 2*n), z: make([]float64, n),
		gT: make([]float64, 2*n), zT: make([]float64, n),
		gA: make([]float64, 2*n), zA: make([]float64, n),
	}
}

// Echoes returns the train length n.
func (e *EPG) Echoes() int { return e.n }

// CPMG writes the n echo amplitudes of the train, as fractions of the
// equilibrium magnetisation, into dst (allocated when nil or short) and
// returns it. alpha is the refocusing angle in degrees, esp the echo
// spacing and t1, t2 the relaxation times, all in ms (t1 = +Inf: no T1
// decay of the stimulated-echo pathways). At alpha = 180 the train is
// exp(−k·esp/t2) to rounding.
func (e *EPG) CPMG(dst []float64, alpha, esp, t1, t2 float64) []float64 {
	if cap(dst) < e.n {
		dst = make([]float64, e.n)
	}
	dst = dst[:e.n]
	e.train(dst, nil, nil, alpha*math.Pi/180, esp, t1, t2)
	return dst
}

// CPMGDeriv is CPMG that also writes the derivatives of every echo with
// respect to T2 (per ms) into dT2 and with respect to the refocusing angle
// (per degree) into dAlpha. dst, dT2 and dAlpha must have length n.
func (e *EPG) CPMGDeriv(dst, dT2, dAlpha []float64, alpha, esp, t1, t2 float64) {
	if len(dst) != e.n || len(dT2) != e.n || len(dAlpha) != e.n {
		panic("fit: EPG slice lengths do not match the train")
	}
	e.train(dst, dT2, dAlpha, alpha*math.Pi/180, esp, t1, t2)
	for i := range dAlpha {
		dAlpha[i] *= math.Pi / 180
	}
}

// train runs the recursion with α in radians; with dT2 and dA not nil it
// propagates the derivatives too (dA per radian).
func (e *EPG) train(dst, dT2, dA []float64, alpha, esp, t1, t2 float64) {
	n := e.n
	tau := esp / 2
	e2 := math.Exp(-tau / t2)
	e1 := 1.0
	if !math.IsInf(t1, 1) {
		e1 = math.Exp(-tau / t1)
	}
	sa, ca := math.Sincos(alpha)
	c2 := (1 + ca) / 2 // cos²(α/2)
	s2 := (1 - ca) / 2 // sin²(α/2)
	// M = D·T·D with D = diag(E2, E2, E1) (relaxation of the half
	// intervals before and after the pulse, folded into the pulse).
	ee := e2 * e2
	e21 := e2 * e1
	m11, m12, m13 := ee*c2, ee*s2, e21*sa
	m31, m33 := -0.5*e21*sa, e1*e1*ca
	g, z := e.g, e.z
	for i := range g {
		g[i] = 0
	}
	for i := range z {
		z[i] = 0
	}
	off := 2*n - 1
	g[off] = 1 // F₁ before the first pulse (relaxation is in M)
	if dT2 == nil {
		for p := 1; p <= n; p++ {
			top := min(p-1, n-p)
			for i := 0; i <= top; i++ {
				a, b, w := g[off+i], g[off-i-1], z[i]
				// Row 2 and 3 reuse row 1's coefficients:
				// m22 = m11, m21 = m12, m23 = −m13, m32 = −m31.
				g[off+i] = m11*a + m12*b + m13*w
				g[off-i-1] = m12*a + m11*b - m13*w
				z[i] = m31*(a-b) + m33*w
			}
			dst[p-1] = math.Abs(g[off-1])
			off--
		}
		return
	}
	// Derivatives: ∂E2/∂T2 = E2·τ/T2², so ∂M/∂T2 = q·(2, 2, 1; 2, 2, 1;
	// 1, 1, 0) ∘ M with q = τ/T2²; ∂M/∂α from ∂cos²(α/2) = −½ sin α,
	// ∂sin²(α/2) = ½ sin α, ∂sin α = cos α, ∂cos α = −sin α.
	q := tau / (t2 * t2)
	t11, t12, t13, t31 := 2*q*m11, 2*q*m12, q*m13, q*m31
	a11, a12, a13 := -0.5*ee*sa, 0.5*ee*sa, e21*ca
	a31, a33 := -0.5*e21*ca, -e1*e1*sa
	gT, zT, gA, zA := e.gT, e.zT, e.gA, e.zA
	for i := range gT {
		gT[i], gA[i] = 0, 0
	}
	for i := range zT {
		zT[i], zA[i] = 0, 0
	}
	for p := 1; p <= n; p++ {
		top := min(p-1, n-p)
		for i := 0; i <= top; i++ {
			ip, im := off+i, off-i-1
			a, b, w := g[ip], g[im], z[i]
			at, bt, wt := gT[ip], gT[im], zT[i]
			aa, ba, wa := gA[ip], gA[im], zA[i]
			g[ip] = m11*a + m12*b + m13*w
			g[im] = m12*a + m11*b - m13*w
			z[i] = m31*(a-b) + m33*w
			gT[ip] = m11*at + m12*bt + m13*wt + t11*a + t12*b + t13*w
			gT[im] = m12*at + m11*bt - m13*wt + t12*a + t11*b - t13*w
			zT[i] = m31*(at-bt) + m33*wt + t31*(a-b)
			gA[ip] = m11*aa + m12*ba + m13*wa + a11*a + a12*b + a13*w
			gA[im] = m12*aa + m11*ba - m13*wa + a12*a + a11*b - a13*w
			zA[i] = m31*(aa-ba) + m33*wa + a31*(a-b) + a33*w
		}
		v := g[off-1]
		s := 1.0
		if v < 0 {
			s = -1
		}
		dst[p-1] = s * v
		dT2[p-1] = s * gT[off-1]
		dA[p-1] = s * gA[off-1]
		off--
	}
}
