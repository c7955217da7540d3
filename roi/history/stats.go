package history

import (
	"math"
	"sort"
	"time"

	"gonum.org/v1/gonum/stat/distuv"
)

// Baseline selects the in-control sessions the limits come from: the first
// N sessions (default 12 when both are zero), or those between From and To
// inclusive when From is set. Limits need a long baseline: 20–25 in-control
// sessions are recommended (check-values §4.1, common practice); a short
// one underestimates σ and raises false alarms.
type Baseline struct {
	N        int
	From, To time.Time
}

// Settings of the stability statistics; the zero value is right.
type Settings struct {
	Baseline Baseline
	// Lambda is the EWMA weight; default 0.2 (the usual 0.2–0.3, NIST/
	// SEMATECH e-Handbook §6.3.2.4).
	Lambda float64
	// L is the EWMA limit width in SD; default 3.
	L float64
	// MinDrift is the smallest slope, in percentage points per year, that
	// counts as a drift when its 95 % interval excludes zero; default 1
	// (phantom programmes report session-to-session repeatability of 1–2 %
	// [Captur2020, check-values §4.2], so slower drifts stay below what QA
	// can act on — a choice, common practice).
	MinDrift float64
}

// Rule numbers beyond the four Western Electric rules.
const (
	RuleEWMA  = 5 // EWMA statistic beyond its limits
	RuleDrift = 6 // significant linear drift of at least MinDrift per year
)

// Series is the story of one scanner × vial × quantity.
type Series struct {
	Scanner, Vial, Quantity string
	Points                  []Point
	// Value is what the statistics use per point: the deviation from the
	// reference (percent) or, without a reference, the percent difference
	// from the baseline mean of the median.
	Value    []float64
	Relative bool // Value is relative to the baseline (no reference)
	// Baseline statistics of Value.
	BaselineN    int
	BaselineMean float64
	BaselineSD   float64
	// Rules[i] lists the Western Electric rules (1–4) that point i
	// completes. Baseline points set the limits and are not judged
	// (routine, Phase II monitoring); windows may reach back into them.
	Rules [][]int
	// InBaseline marks the baseline points.
	InBaseline []bool
	// EWMA statistic and its limits per point; EWMAOut marks points beyond
	// them.
	EWMA, EWMALow, EWMAHigh []float64
	EWMAOut                 []bool
	// Drift by least squares against time: slope in percentage points per
	// year, its 95 % confidence interval (Student t with n − 2 degrees of
	// freedom), NaN with fewer than 3 points or a zero time span.
	Slope, SlopeLow, SlopeHigh float64
	// Drifting is set when the slope's 95 % interval excludes zero and
	// |slope| ≥ MinDrift.
	Drifting bool
	// Violations lists the distinct rules hit, in order: 1–4 Western
	// Electric, RuleEWMA, RuleDrift.
	Violations []int
}

// year is the length of a mean Gregorian year.
const year = time.Duration(365.2425 * 24 * float64(time.Hour))

// Analyse computes the statistics of every scanner × vial × quantity in
// points (as Points returns them, sorted).
func Analyse(points []Point, set *Settings) []*Series {
	if set == nil {
		set = &Settings{}
	}
	var out []*Series
	for i := 0; i < len(points); {
		j := i
		for j < len(points) && points[j].Scanner == points[i].Scanner && points[j].Vial == points[i].Vial && points[j].Quantity == points[i].Quantity {
			j++
		}
		ps := append([]Point(nil), points[i:j]...)
		sort.SliceStable(ps, func(a, b int) bool { return ps[a].Time.Before(ps[b].Time) })
		s := &Series{Scanner: ps[0].Scanner, Vial: ps[0].Vial, Quantity: ps[0].Quantity, Points: ps}
		s.analyse(set)
		out = append(out, s)
		i = j
	}
	return out
}

func (s *Series) baselineIndex(b Baseline) []int {
	var idx []int
	if !b.From.IsZero() {
		for i, p := range s.Points {
			if !p.Time.Before(b.From) && (b.To.IsZero() || !p.Time.After(b.To)) {
				idx = append(idx, i)
			}
		}
		return idx
	}
	n := b.N
	if n == 0 {
		n = 12
	}
	for i := range s.Points {
		if len(idx) < n && !math.IsNaN(s.rawValue(i)) {
			idx = append(idx, i)
		}
	}
	return idx
}

// rawValue is the deviation when there is one, else the median.
func (s *Series) rawValue(i int) float64 {
	if s.Relative {
		return s.Points[i].Median
	}
	return s.Points[i].Deviation
}

func (s *Series) analyse(set *Settings) {
	n := len(s.Points)
	s.Relative = true
	for _, p := range s.Points {
		if !math.IsNaN(p.Deviation) {
			s.Relative = false
			break
		}
	}
	base := s.baselineIndex(set.Baseline)
	s.Value = make([]float64, n)
	for i := range s.Points {
		s.Value[i] = s.rawValue(i)
	}
	if s.Relative {
		var m float64
		k := 0
		for _, i := range base {
			if v := s.Value[i]; !math.IsNaN(v) {
				m += v
				k++
			}
		}
		m /= float64(k)
		for i, v := range s.Value {
			s.Value[i] = 100 * (v - m) / m
		}
	}
	s.BaselineMean, s.BaselineSD, s.BaselineN = meanSD(s.Value, base)
	s.InBaseline = make([]bool, n)
	for _, i := range base {
		s.InBaseline[i] = true
	}
	s.Rules = westernElectric(s.Value, s.BaselineMean, s.BaselineSD)
	for i := range s.Rules {
		if s.InBaseline[i] {
			s.Rules[i] = nil
		}
	}
	s.ewma(set)
	s.Slope, s.SlopeLow, s.SlopeHigh = drift(s.Points, s.Value)
	minDrift := set.MinDrift
	if minDrift == 0 {
		minDrift = 1
	}
	s.Drifting = (s.SlopeLow > 0 || s.SlopeHigh < 0) && math.Abs(s.Slope) >= minDrift
	var seen [RuleDrift + 1]bool
	for _, r := range s.Rules {
		for _, k := range r {
			seen[k] = true
		}
	}
	for i, o := range s.EWMAOut {
		if o && !s.InBaseline[i] {
			seen[RuleEWMA] = true
		}
	}
	seen[RuleDrift] = s.Drifting
	for k, hit := range seen {
		if hit {
			s.Violations = append(s.Violations, k)
		}
	}
}

func meanSD(v []float64, idx []int) (mean, sd float64, n int) {
	var sum float64
	for _, i := range idx {
		if !math.IsNaN(v[i]) {
			sum += v[i]
			n++
		}
	}
	if n == 0 {
		return math.NaN(), math.NaN(), 0
	}
	mean = sum / float64(n)
	if n < 2 {
		return mean, math.NaN(), n
	}
	var ss float64
	for _, i := range idx {
		if !math.IsNaN(v[i]) {
			ss += (v[i] - mean) * (v[i] - mean)
		}
	}
	return mean, math.Sqrt(ss / float64(n-1)), n
}

// westernElectric returns, per point, the Western Electric rules it
// completes (Western Electric Co., Statistical Quality Control Handbook,
// 1956; as listed in check-values §4.1):
//
//  1. one point beyond 3σ;
//  2. two of three consecutive points beyond 2σ on the same side;
//  3. four of five consecutive points beyond 1σ on the same side;
//  4. eight consecutive points on the same side of the centre line.
//
// Points with a NaN value are skipped (the window runs over the others).
// With σ NaN or zero (too short a baseline) no rule is evaluated.
func westernElectric(v []float64, mu, sigma float64) [][]int {
	out := make([][]int, len(v))
	if !(sigma > 0) || math.IsNaN(mu) {
		return out
	}
	var z []float64
	var at []int
	for i, x := range v {
		if !math.IsNaN(x) {
			z = append(z, (x-mu)/sigma)
			at = append(at, i)
		}
	}
	count := func(end, win int, pred func(float64) bool) int {
		c := 0
		for k := max(0, end-win+1); k <= end; k++ {
			if pred(z[k]) {
				c++
			}
		}
		return c
	}
	for k := range z {
		var r []int
		if math.Abs(z[k]) > 3 {
			r = append(r, 1)
		}
		for _, side := range []float64{1, -1} {
			beyond := func(lim float64) func(float64) bool {
				return func(x float64) bool { return side*x > lim }
			}
			if k >= 2 && side*z[k] > 2 && count(k, 3, beyond(2)) >= 2 {
				r = appendOnce(r, 2)
			}
			if k >= 4 && side*z[k] > 1 && count(k, 5, beyond(1)) >= 4 {
				r = appendOnce(r, 3)
			}
			if k >= 7 && count(k, 8, beyond(0)) == 8 {
				r = appendOnce(r, 4)
			}
		}
		out[at[k]] = r
	}
	return out
}

func appendOnce(r []int, k int) []int {
	for _, x := range r {
		if x == k {
			return r
		}
	}
	return append(r, k)
}

// ewma computes z_i = λx_i + (1−λ)z_{i−1}, z_0 = baseline mean, with the
// limits μ ± Lσ·√(λ/(2−λ)·[1 − (1−λ)^{2i}]) (NIST/SEMATECH e-Handbook of
// Statistical Methods §6.3.2.4; check-values §4.1).
func (s *Series) ewma(set *Settings) {
	lam, L := set.Lambda, set.L
	if lam == 0 {
		lam = 0.2
	}
	if L == 0 {
		L = 3
	}
	n := len(s.Value)
	s.EWMA, s.EWMALow, s.EWMAHigh = make([]float64, n), make([]float64, n), make([]float64, n)
	s.EWMAOut = make([]bool, n)
	z := s.BaselineMean
	k := 0
	for i, x := range s.Value {
		if math.IsNaN(x) || !(s.BaselineSD > 0) {
			s.EWMA[i], s.EWMALow[i], s.EWMAHigh[i] = math.NaN(), math.NaN(), math.NaN()
			continue
		}
		k++
		z = lam*x + (1-lam)*z
		w := L * s.BaselineSD * math.Sqrt(lam/(2-lam)*(1-math.Pow(1-lam, 2*float64(k))))
		s.EWMA[i], s.EWMALow[i], s.EWMAHigh[i] = z, s.BaselineMean-w, s.BaselineMean+w
		s.EWMAOut[i] = z < s.EWMALow[i] || z > s.EWMAHigh[i]
	}
}

// drift fits v = a + b·t by ordinary least squares with t in years since
// the first point (unevenly spaced dates are used as they are) and returns
// b and its 95 % confidence interval b ± t(0.975, n−2)·SE(b), SE(b) =
// √(s²/Σ(t−t̄)²) (the textbook interval, e.g. Draper & Smith, Applied
// Regression Analysis, ch. 1; what scipy.stats.linregress's stderr gives).
func drift(ps []Point, v []float64) (slope, lo, hi float64) {
	nan := math.NaN()
	var ts, vs []float64
	for i, p := range ps {
		if !math.IsNaN(v[i]) && !p.Time.IsZero() {
			ts = append(ts, float64(p.Time.Sub(ps[0].Time))/float64(year))
			vs = append(vs, v[i])
		}
	}
	n := len(ts)
	if n < 3 {
		return nan, nan, nan
	}
	var mt, mv float64
	for i := range ts {
		mt += ts[i]
		mv += vs[i]
	}
	mt /= float64(n)
	mv /= float64(n)
	var sxx, sxy float64
	for i := range ts {
		sxx += (ts[i] - mt) * (ts[i] - mt)
		sxy += (ts[i] - mt) * (vs[i] - mv)
	}
	if !(sxx > 0) {
		return nan, nan, nan
	}
	slope = sxy / sxx
	var rss float64
	for i := range ts {
		r := vs[i] - (mv + slope*(ts[i]-mt))
		rss += r * r
	}
	se := math.Sqrt(rss / float64(n-2) / sxx)
	tq := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(n - 2)}.Quantile(0.975)
	return slope, slope - tq*se, slope + tq*se
}
