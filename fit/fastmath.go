package fit

import "math"

// logTableBits is the number of leading mantissa bits that index the
// table of logPos.
const logTableBits = 8

// logInv and logCen hold, for the 256 sub-intervals of the mantissa range
// [1, 2), the inverse and the logarithm of the interval's centre.
var logInv, logCen = func() (inv, cen [1 << logTableBits]float64) {
	for i := range inv {
		c := 1 + (float64(i)+0.5)/(1<<logTableBits)
		inv[i], cen[i] = 1/c, math.Log(c)
	}
	return inv, cen
}()

// logPos returns ln x for finite, normal x > 0; the caller guarantees
// that (the result is meaningless otherwise). It splits x = 2^e·m with m in
// [1, 2), looks up the centre c of m's 1/256-wide sub-interval, and sums
//
//	ln x = e·ln 2 + ln c + ln(1 + r),   r = m/c − 1,  |r| ≤ 1/513,
//
// with ln(1 + r) from its Taylor series to r⁵ (truncation below 1e-16;
// the table-driven scheme of Tang 1990, ACM TOMS 16:378). The absolute error
// is a few 1e-16, with no division and no call, so it inlines into the echo
// loop of the log-linear fit.
func logPos(x float64) float64 {
	b := math.Float64bits(x)
	i := (b >> (52 - logTableBits)) & (1<<logTableBits - 1)
	r := math.Float64frombits(b&(1<<52-1)|1023<<52)*logInv[i] - 1
	return float64(int64(b>>52)-1023)*math.Ln2 + logCen[i] + r*(1-r*(0.5-r*(1.0/3-r*(0.25-r*0.2))))
}

// logUsable reports whether logPos may be applied to x: positive, finite
// and normal.
func logUsable(x float64) bool {
	return x >= 0x1p-1022 && x <= math.MaxFloat64
}
