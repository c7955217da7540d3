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

// expTable holds 2^(j/64) for j = 0…63.
var expTable = func() (t [64]float64) {
	for j := range t {
		t[j] = math.Exp2(float64(j) / 64)
	}
	return t
}()

// expNeg returns e^x for x ≤ 0 to within a few ulp, and 0 below −708 (where
// e^x is subnormal or zero; decays never need those values). It reduces
// x = (64m + j)·ln2/64 + r with |r| ≤ ln2/128 and sums
//
//	e^x = 2^m · 2^(j/64) · e^r,
//
// e^r from its Taylor series to r⁵ (truncation below 4e-17; the
// table-driven scheme of Tang 1989, ACM TOMS 15:144). It inlines, unlike
// math.Exp, which matters where one or two exponentials per voxel are the
// rest of the work.
func expNeg(x float64) float64 {
	if !(x >= -708) {
		return 0
	}
	const (
		inv = 64 / math.Ln2
		hi  = 0.01083042469326756    // ln2/64 cut to 31 mantissa bits, so k·hi is exact
		lo  = 2.9815858269852933e-12 // ln2/64 − hi (50-digit ln 2)
	)
	k := int64(x*inv - 0.5) // rounds to nearest for x ≤ 0
	kf := float64(k)
	r := (x - kf*hi) - kf*lo
	p := 1 + r*(1+r*(0.5+r*(1.0/6+r*(1.0/24+r*(1.0/120)))))
	return math.Float64frombits(uint64(1023+(k>>6))<<52) * expTable[k&63] * p
}

// expFast returns e^x to within a few ulp for |x| ≤ 708 by expNeg's
// method (x·64/ln2 rounded to the nearest integer on either side of 0),
// and math.Exp(x) beyond, where e^x overflows or is subnormal, and for
// NaN. The log-linear fit's e^intercept (M0) took a tenth of its time in
// math.Exp, which does not inline.
func expFast(x float64) float64 {
	if !(x >= -708 && x <= 708) {
		return math.Exp(x)
	}
	const (
		inv = 64 / math.Ln2
		hi  = 0.01083042469326756    // ln2/64 cut to 31 mantissa bits, so k·hi is exact
		lo  = 2.9815858269852933e-12 // ln2/64 − hi (50-digit ln 2)
	)
	k := int64(x*inv + math.Copysign(0.5, x))
	kf := float64(k)
	r := (x - kf*hi) - kf*lo
	p := 1 + r*(1+r*(0.5+r*(1.0/6+r*(1.0/24+r*(1.0/120)))))
	return math.Float64frombits(uint64(1023+(k>>6))<<52) * expTable[k&63] * p
}
