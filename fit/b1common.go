package fit

import "math"

// b1Output is the output of the B1-mapping models: the actual flip angle
// as a percent of the nominal one, the BIDS TB1map convention
// (FlipAngle_effective = B1+ × FlipAngle_nominal, recommended as percent;
// check-values §3.6). `fit --b1` reads it back (a map whose median is above
// 10 is taken as percent).
var b1Output = []Param{{Name: "B1", Unit: "percent", Map: "TB1map", Desc: "transmit field: actual flip angle as percent of the nominal angle"}}

// b1Pair holds the two samples of a two-volume B1 protocol in its own
// order (first the one the ratio divides by).
type b1Pair struct {
	lo, hi int // volume index of the denominator and the numerator
}

// samples returns the denominator and numerator samples of y, failing dst
// (TooFewPoints for a missing sample, NoSignal for a non-positive
// denominator) when they cannot give a ratio.
func (p b1Pair) samples(dst *Result, y []float64) (den, num float64, ok bool) {
	den, num = y[p.lo], y[p.hi]
	switch {
	case !finite(den) || !finite(num):
		dst.fail(TooFewPoints)
		return 0, 0, false
	case !(den > 0):
		dst.fail(NoSignal)
		return 0, 0, false
	}
	return den, num, true
}

// b1Done writes a B1 estimate (the actual angle theta over the nominal
// alpha, radians) into dst: percent, SE and R² NaN (two samples determine
// the two unknowns exactly), OutOfBounds beyond [MinB1, MaxB1].
func b1Done(dst *Result, theta, alpha float64) {
	b1 := theta / alpha
	if !(b1 >= MinB1 && b1 <= MaxB1) {
		dst.fail(OutOfBounds)
		return
	}
	dst.Values[0] = 100 * b1
	dst.SE[0] = math.NaN()
	dst.R2 = math.NaN()
	dst.RSS = 0
	dst.Iter = 0
	dst.Status = OK
}
