package fit

import "math"

// logPos returns ln x for finite x > 0, to within about 1 ulp. It is the
// algorithm of the Go standard library's pure-Go math.Log (from FreeBSD's
// e_log.c: reduction to [√2/2, √2), then a minimax series in s = f/(2+f))
// with the exponent taken from the bits instead of math.Frexp, so the
// compiler can inline it into the echo loops of the log-linear fit. The
// caller guarantees x is positive, finite and normal (the log-linear fit
// skips other samples; subnormals fall back to math.Log).
func logPos(x float64) float64 {
	const (
		ln2Hi = 6.93147180369123816490e-01 /* 3fe62e42 fee00000 */
		ln2Lo = 1.90821492927058770002e-10 /* 3dea39ef 35793c76 */
		l1    = 6.666666666666735130e-01   /* 3FE55555 55555593 */
		l2    = 3.999999999940941908e-01   /* 3FD99999 9997FA04 */
		l3    = 2.857142874366239149e-01   /* 3FD24924 94229359 */
		l4    = 2.222219843214978396e-01   /* 3FCC71C5 1D8E78AF */
		l5    = 1.818357216161805012e-01   /* 3FC74664 96CB03DE */
		l6    = 1.531383769920937332e-01   /* 3FC39A09 D078C69F */
		l7    = 1.479819860511658591e-01   /* 3FC2F112 DF3E5244 */
	)
	b := math.Float64bits(x)
	e := int64(b>>52) & 0x7ff
	if e == 0 {
		return math.Log(x)
	}
	// f1 in [0.5, 1) as math.Frexp would give, exponent ki.
	f1 := math.Float64frombits(b&^(0x7ff<<52) | 1022<<52)
	ki := e - 1022
	if f1 < math.Sqrt2/2 {
		f1 *= 2
		ki--
	}
	f := f1 - 1
	k := float64(ki)
	s := f / (2 + f)
	s2 := s * s
	s4 := s2 * s2
	t1 := s2 * (l1 + s4*(l3+s4*(l5+s4*l7)))
	t2 := s4 * (l2 + s4*(l4+s4*l6))
	R := t1 + t2
	hfsq := 0.5 * f * f
	return k*ln2Hi - ((hfsq - (s*(hfsq+R) + k*ln2Lo)) - f)
}
