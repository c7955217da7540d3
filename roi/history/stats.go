package history

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"sync"
	"time"

	"gonum.org/v1/gonum/stat/distuv"
)

// Baseline selects the in-control sessions the fixed limits come from:
// the first N sessions (default DefaultBaseline when both are zero), or
// those between From and To inclusive when From is set. Until a series
// has that many sessions it is judged leave-one-out (see Settings).
type Baseline struct {
	N        int
	From, To time.Time
}

// Defaults of Settings, chosen with the false-alarm simulation in
// falsealarm_test.go (docs/validation.md, "Stability charts").
const (
	// DefaultBaseline is the baseline length: 12 sessions, a year of
	// monthly QA. Limits need a long baseline (20–25 in-control sessions
	// are recommended, check-values §4.1, common practice); until it is
	// complete each session is judged against all the others.
	DefaultBaseline = 12
	// DefaultMinSessions is the fewest finite sessions a series needs
	// before any rule judges it: with fewer the scatter cannot be told
	// from a change.
	DefaultMinSessions = 5
	// DefaultMinLimit is the smallest half-width of the ±3 SD control
	// limits, in percentage points of deviation: 3, so the SD the rules
	// use is at least 1 %, the session-to-session repeatability phantom
	// programmes report for good sequences (CoV < 1–2 %, [Captur2020],
	// check-values §4.2). A change smaller than that is what a repeat scan
	// of the same phantom shows, not a scanner problem.
	DefaultMinLimit = 3
	// DefaultHorizon is how far ahead a significant drift is projected
	// (at the end of its interval nearest zero) to decide whether it
	// crosses the tolerance: one year, the usual interval of a scanner's
	// annual acceptance check (common practice).
	DefaultHorizon = 1.0
	// DefaultDriftConfidence is the confidence of the slope interval of
	// the drift rule: 99.73 %, the two-sided coverage of ±3σ, the level of
	// rule 1. A series is judged again at every session, so the drift
	// rule's false alarms per recorded session are about 1 − confidence:
	// with 95 % it alone flagged 4–8 % of the sessions of stable series,
	// with 99.5 % the total still exceeded 1 in 100 at 2–3 % scatter
	// (falsealarm_test.go, docs/validation.md). The price is power: a
	// −3 %/yr drift at 1 % scatter is found after a median of 13 monthly
	// sessions instead of 10.
	DefaultDriftConfidence = 0.9973
)

// DefaultRules are the rules that flag a session unless Settings.Rules
// says otherwise: 1 (beyond 3 SD), 2 (2 of 3 beyond 2 SD), 5 (EWMA) and 6
// (drift). Rules 3 and 4 are computed when asked for but off by default:
// with them the in-control rate is above 1 in 100 sessions even with
// known σ (the run rules are meant for setting up a chart, Phase I;
// routine monitoring relies on the 3 SD test, ISO 7870-2 §8.2.7 as cited
// in check-values §4.1), see the simulation table in docs/validation.md.
var DefaultRules = []int{1, 2, RuleEWMA, RuleDrift}

// Settings of the stability statistics; the zero value is right.
type Settings struct {
	Baseline Baseline
	// MinSessions is the fewest finite sessions to judge a series;
	// default DefaultMinSessions (at least 3).
	MinSessions int
	// MinLimit is the smallest ±3 SD limit half-width in percentage
	// points; default DefaultMinLimit. Negative means no user floor (the
	// measurement's own floor still applies).
	MinLimit float64
	// Rules lists the rules that flag (1–4 Western Electric, RuleEWMA,
	// RuleDrift); nil means DefaultRules.
	Rules []int
	// Horizon is the projection of a drift, in years; default
	// DefaultHorizon.
	Horizon float64
	// Lambda is the EWMA weight; default 0.2 (the usual 0.2–0.3, NIST/
	// SEMATECH e-Handbook §6.3.2.4).
	Lambda float64
	// L is the EWMA limit width in SD; default 3.
	L float64
	// MinDrift is the smallest slope, in percentage points per year, that
	// counts as a drift when its interval excludes zero; default 1
	// (phantom programmes report session-to-session repeatability of 1–2 %
	// [Captur2020, check-values §4.2], so slower drifts stay below what QA
	// can act on — a choice, common practice).
	MinDrift float64
	// DriftConfidence is the two-sided confidence of the slope interval
	// that must exclude zero for a drift; default DefaultDriftConfidence.
	DriftConfidence float64
}

func (set *Settings) baselineN() int {
	if set.Baseline.N > 0 {
		return set.Baseline.N
	}
	return DefaultBaseline
}

func (set *Settings) minSessions() int {
	if set.MinSessions > 0 {
		return max(3, set.MinSessions)
	}
	return DefaultMinSessions
}

func (set *Settings) minLimit() float64 {
	switch {
	case set.MinLimit < 0:
		return 0
	case set.MinLimit == 0:
		return DefaultMinLimit
	}
	return set.MinLimit
}

// DriftLevel is the confidence of the drift rule's slope interval in use.
func (set *Settings) DriftLevel() float64 {
	if set.DriftConfidence > 0 && set.DriftConfidence < 1 {
		return set.DriftConfidence
	}
	return DefaultDriftConfidence
}

func (set *Settings) horizon() float64 {
	if set.Horizon > 0 {
		return set.Horizon
	}
	return DefaultHorizon
}

func (set *Settings) rules() []int {
	if set.Rules == nil {
		return DefaultRules
	}
	return set.Rules
}

// RuleOn reports whether rule k flags sessions under these settings.
func (set *Settings) RuleOn(k int) bool {
	for _, r := range set.rules() {
		if r == k {
			return true
		}
	}
	return false
}

// Rule numbers beyond the four Western Electric rules.
const (
	RuleEWMA  = 5 // EWMA statistic beyond its limits
	RuleDrift = 6 // significant linear drift of at least MinDrift per year
)

// Modes say how a session was judged (Series.Mode).
const (
	// ModeTooFew: the series has fewer than MinSessions finite sessions;
	// nothing is judged.
	ModeTooFew = "too-few"
	// ModeLeaveOneOut: judged against the median and scaled MAD of the
	// series' other sessions (all of them while the baseline is
	// incomplete; the other baseline sessions for a baseline session).
	ModeLeaveOneOut = "leave-one-out"
	// ModeFixed: judged against the fixed limits of the complete
	// baseline (routine, Phase II monitoring).
	ModeFixed = "fixed-baseline"
	// ModeNoValue: the session has no finite value.
	ModeNoValue = "no-value"
)

// Findings of a series, most urgent first (Series.Finding).
const (
	// FindingAction: the last session, or the mean of the last three, is
	// beyond the vial's tolerance by more than its expanded uncertainty
	// (Series.Beyond, Series.LevelBeyond), or a significant drift crosses
	// the tolerance within the horizon.
	FindingAction = "action"
	// FindingWatch: a statistical signal (a rule) on the last session
	// inside tolerance, or a drift that does not reach the tolerance
	// within the horizon. Flags of earlier sessions are noted in Reasons
	// without flagging the series.
	FindingWatch = "watch"
	// FindingOK: judged, nothing found.
	FindingOK = "ok"
	// FindingTooFew: not enough sessions to judge (never a pass).
	FindingTooFew = "too-few"
)

// Series is the story of one scanner × vial × quantity.
type Series struct {
	Scanner, Vial, Quantity string
	Points                  []Point
	// Value is what the statistics use per point: the deviation from the
	// reference (percent) or, without a reference, the percent difference
	// from the baseline median of the median.
	Value    []float64
	Relative bool // Value is relative to the baseline (no reference)
	// Baseline statistics of Value: the number of finite baseline
	// sessions, their median (BaselineMean, the centre line) and their
	// robust SD (1.4826·MAD, before the floor).
	BaselineN    int
	BaselineMean float64
	BaselineSD   float64
	// Complete is set when the baseline has all its sessions (fixed
	// limits judge the sessions after it).
	Complete bool
	// Sessions counts the finite values; MinSessions is the number
	// needed to judge. Finding is FindingTooFew when Sessions <
	// MinSessions.
	Sessions, MinSessions int
	// Floor is the smallest SD the rules use (percentage points): the
	// largest of the median standard error of the vial (median over
	// sessions of 1.2533·SD/√n, relative to the reference), the
	// reference uncertainty and MinLimit/3. FloorFrom names which.
	Floor     float64
	FloorFrom string
	// Per point: Mode (ModeTooFew, ModeLeaveOneOut, ModeFixed or
	// ModeNoValue), the centre and SD that judged it (NaN when not
	// judged; SD at least Floor), the tolerance in percent of the
	// reference (NaN when none) and whether the point is outside it.
	Mode    []string
	Centre  []float64
	SD      []float64
	TolPct  []float64
	Outside []bool
	// Guard is, per judged point, the expanded uncertainty U = 2u of its
	// deviation (percentage points), u being the SD of the same pool as
	// SD but floored only by the measurement (the median's standard error
	// or the reference uncertainty, MeasFloor), not by MinLimit: the
	// session-to-session reproducibility, the uncertainty of one session's
	// deviation. Beyond marks a point outside its tolerance by more than
	// Guard: non-conformance shown beyond the measurement's uncertainty,
	// the guarded-rejection decision rule (ISO 14253-1; JCGM 106:2012
	// §8, from memory). A point Outside but not Beyond is reported as not
	// proven, without a flag: its excess is what the vial's own scatter
	// produces about once in 40 sessions on each side.
	Guard  []float64
	Beyond []bool
	// MeasFloor is the measurement's part of Floor (0 when neither the
	// vial's standard error nor a reference uncertainty is known).
	MeasFloor float64
	// Level is the mean deviation of the last three finite sessions
	// (fewer when the series is shorter), LevelGuard its expanded
	// uncertainty 2u/√k, and LevelBeyond is set when |Level| exceeds the
	// last tolerance by more than LevelGuard: a vial that sits outside
	// its tolerance session after session, each time by less than one
	// session's uncertainty.
	Level, LevelGuard float64
	LevelBeyond       bool
	// Rules[i] lists the rules (1–4, of those switched on) that point i
	// completes.
	Rules [][]int
	// InBaseline marks the baseline points.
	InBaseline []bool
	// EWMA statistic and its limits per point (NaN until the baseline is
	// complete); EWMAOut marks points after the baseline beyond them.
	EWMA, EWMALow, EWMAHigh []float64
	EWMAOut                 []bool
	// Drift by least squares against time: slope in percentage points per
	// year, its DriftConfidence interval (Student t with n − 2 degrees of
	// freedom), NaN with fewer than 3 points or a zero time span.
	Slope, SlopeLow, SlopeHigh float64
	// Drifting is set when the slope's interval excludes zero,
	// |slope| ≥ MinDrift and the series has MinSessions sessions.
	Drifting bool
	// CrossYears is, for a drifting series with a tolerance, the time in
	// years from the last session until the fitted line reaches the
	// tolerance at the interval's end nearest zero (0 when already
	// beyond; +Inf when the slope points inwards); NaN otherwise.
	CrossYears float64
	// Violations lists the distinct rules hit, in order: 1–4 Western
	// Electric, RuleEWMA, RuleDrift.
	Violations []int
	// Finding is FindingAction, FindingWatch, FindingOK or FindingTooFew;
	// Reasons say why, one short phrase each.
	Finding string
	Reasons []string
}

// Flagged reports whether point i carries a rule or lies beyond the
// tolerance by more than its uncertainty (an action or watch at that
// session).
func (s *Series) Flagged(i int) bool {
	return len(s.Rules[i]) > 0 || s.EWMAOut[i] || s.Beyond[i]
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

// baselineIndex returns the baseline points and whether the baseline is
// complete.
func (s *Series) baselineIndex(set *Settings) ([]int, bool) {
	var idx []int
	b := set.Baseline
	if !b.From.IsZero() {
		after := false
		for i, p := range s.Points {
			if math.IsNaN(s.rawValue(i)) {
				continue
			}
			if !p.Time.Before(b.From) && (b.To.IsZero() || !p.Time.After(b.To)) {
				idx = append(idx, i)
			} else if !b.To.IsZero() && p.Time.After(b.To) {
				after = true
			}
		}
		return idx, after && len(idx) >= set.minSessions()
	}
	n := set.baselineN()
	for i := range s.Points {
		if len(idx) < n && !math.IsNaN(s.rawValue(i)) {
			idx = append(idx, i)
		}
	}
	return idx, len(idx) == n
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
	base, complete := s.baselineIndex(set)
	s.Value = make([]float64, n)
	for i := range s.Points {
		s.Value[i] = s.rawValue(i)
	}
	if s.Relative {
		m := median(s.Value, base, -1, nil)
		for i, v := range s.Value {
			s.Value[i] = 100 * (v - m) / m
		}
	}
	s.InBaseline = make([]bool, n)
	for _, i := range base {
		s.InBaseline[i] = true
	}
	s.Mode, s.Centre, s.SD, s.TolPct = make([]string, n), nanSlice(n), nanSlice(n), nanSlice(n)
	s.Outside, s.Rules = make([]bool, n), make([][]int, n)
	var finite []int
	for i, v := range s.Value {
		if math.IsNaN(v) {
			s.Mode[i] = ModeNoValue
			continue
		}
		finite = append(finite, i)
		p := s.Points[i]
		if !s.Relative && p.Reference > 0 && p.Tolerance > 0 {
			s.TolPct[i] = 100 * p.Tolerance / p.Reference
			s.Outside[i] = math.Abs(v) > s.TolPct[i]
		}
	}
	s.Sessions, s.MinSessions = len(finite), set.minSessions()
	s.Floor, s.FloorFrom, s.MeasFloor = s.floor(set)
	s.Guard, s.Beyond = nanSlice(n), make([]bool, n)
	var scratch []float64
	s.BaselineMean = median(s.Value, base, -1, &scratch)
	s.BaselineSD = madSD(s.Value, base, -1, s.BaselineMean, &scratch)
	s.BaselineN = len(base)
	s.Complete = complete && s.Sessions >= s.MinSessions
	// Judge each finite point: leave-one-out among all (baseline
	// incomplete) or among the baseline (a baseline point), else against
	// the fixed limits.
	fixedSD, fixedU, baseSD, baseK := math.NaN(), math.NaN(), math.NaN(), 0
	if s.Complete {
		w := widenedSD(s.Value, base, -1, s.BaselineMean, &scratch)
		fixedSD, fixedU = floored(w, s.Floor), floored(w, s.MeasFloor)
		baseSD, baseK = poolSD(s.Value, base, -1, s.BaselineMean, &scratch)
	}
	for _, i := range finite {
		switch {
		case s.Sessions < s.MinSessions:
			s.Mode[i] = ModeTooFew
		case s.Complete && !s.InBaseline[i]:
			s.Mode[i] = ModeFixed
			s.Centre[i], s.SD[i], s.Guard[i] = s.BaselineMean, fixedSD, 2*fixedU
		default:
			pool := finite
			if s.Complete {
				pool = base
			}
			s.Mode[i] = ModeLeaveOneOut
			c := median(s.Value, pool, i, &scratch)
			s.Centre[i] = c
			w := widenedSD(s.Value, pool, i, c, &scratch)
			s.SD[i], s.Guard[i] = floored(w, s.Floor), 2*floored(w, s.MeasFloor)
		}
		s.Beyond[i] = s.Outside[i] && finiteF(s.Guard[i]) && math.Abs(s.Value[i]) > s.TolPct[i]+s.Guard[i]
	}
	s.level(finite)
	z := nanSlice(n)
	for _, i := range finite {
		if s.SD[i] > 0 {
			z[i] = (s.Value[i] - s.Centre[i]) / s.SD[i]
		}
	}
	for i, r := range westernElectricZ(z) {
		for _, k := range r {
			if set.RuleOn(k) {
				s.Rules[i] = append(s.Rules[i], k)
			}
		}
	}
	s.ewma(set, baseSD, baseK)
	s.Slope, s.SlopeLow, s.SlopeHigh = drift(s.Points, s.Value, set.DriftLevel())
	minDrift := set.MinDrift
	if minDrift == 0 {
		minDrift = 1
	}
	s.Drifting = set.RuleOn(RuleDrift) && s.Sessions >= s.MinSessions &&
		(s.SlopeLow > 0 || s.SlopeHigh < 0) && math.Abs(s.Slope) >= minDrift
	var seen [RuleDrift + 1]bool
	for _, r := range s.Rules {
		for _, k := range r {
			seen[k] = true
		}
	}
	for _, o := range s.EWMAOut {
		seen[RuleEWMA] = seen[RuleEWMA] || o
	}
	seen[RuleDrift] = s.Drifting
	for k, hit := range seen {
		if hit {
			s.Violations = append(s.Violations, k)
		}
	}
	s.judge(set, finite)
}

// judge sets CrossYears, Finding and Reasons.
func (s *Series) judge(set *Settings, finite []int) {
	s.CrossYears = math.NaN()
	if s.Sessions < s.MinSessions {
		s.Finding = FindingTooFew
		s.Reasons = []string{fmt.Sprintf("not enough sessions (%d of %d)", s.Sessions, s.MinSessions)}
		return
	}
	last := finite[len(finite)-1]
	action, watch, note := []string(nil), []string(nil), []string(nil)
	switch {
	case s.Beyond[last]:
		action = append(action, fmt.Sprintf("last session %s beyond the tolerance ±%.1f %% by more than its uncertainty ±%.1f %%", signedPct(s.Value[last]), s.TolPct[last], s.Guard[last]))
	case s.LevelBeyond:
		action = append(action, fmt.Sprintf("last %d sessions average %s, beyond the tolerance ±%.1f %% by more than their uncertainty ±%.1f %%", s.levelN(finite), signedPct(s.Level), s.TolPct[last], s.LevelGuard))
	case s.Outside[last]:
		note = append(note, fmt.Sprintf("last session %s outside the tolerance ±%.1f %% by less than its uncertainty ±%.1f %% (not proven)", signedPct(s.Value[last]), s.TolPct[last], s.Guard[last]))
	}
	if s.Drifting && finiteF(s.TolPct[last]) {
		s.CrossYears = s.crossing(last)
		h := set.horizon()
		txt := fmt.Sprintf("drift %s/yr", signedPct(s.Slope))
		if s.CrossYears <= h {
			action = append(action, fmt.Sprintf("%s reaches the tolerance ±%.1f %% within %s", txt, s.TolPct[last], horizonText(h)))
		} else {
			watch = append(watch, txt+" (rule 6)")
		}
	} else if s.Drifting {
		watch = append(watch, fmt.Sprintf("drift %s/yr (rule 6)", signedPct(s.Slope)))
	}
	if r := s.Rules[last]; len(r) > 0 || s.EWMAOut[last] {
		var t []string
		for _, k := range r {
			t = append(t, fmt.Sprint(k))
		}
		if s.EWMAOut[last] {
			t = append(t, fmt.Sprint(RuleEWMA))
		}
		watch = append(watch, "last session: rule "+strings.Join(t, ", "))
	}
	// Earlier flags were the findings of their own sessions; they stay
	// on the chart and are noted here, without flagging the series now.
	var earlier []string
	for _, i := range finite[:len(finite)-1] {
		if s.Flagged(i) {
			earlier = append(earlier, s.Points[i].Time.Format("2006-01-02"))
		}
	}
	if len(earlier) > 0 {
		note = append(note, fmt.Sprintf("earlier flagged session(s): %s", strings.Join(earlier, ", ")))
	}
	s.Reasons = append(append(action, watch...), note...)
	switch {
	case len(action) > 0:
		s.Finding = FindingAction
	case len(watch) > 0:
		s.Finding = FindingWatch
	default:
		s.Finding = FindingOK
	}
}

// levelSessions is how many of the last sessions Level averages.
const levelSessions = 3

func (s *Series) levelN(finite []int) int { return min(levelSessions, len(finite)) }

// level sets Level, LevelGuard and LevelBeyond from the last judged
// sessions: their mean deviation, and 2u/√k with u the mean of their
// one-session uncertainties (Guard/2).
func (s *Series) level(finite []int) {
	s.Level, s.LevelGuard = math.NaN(), math.NaN()
	if len(finite) == 0 {
		return
	}
	k := s.levelN(finite)
	var sum, u float64
	for _, i := range finite[len(finite)-k:] {
		if !finiteF(s.Guard[i]) {
			return
		}
		sum += s.Value[i]
		u += s.Guard[i] / 2
	}
	s.Level = sum / float64(k)
	s.LevelGuard = 2 * u / float64(k) / math.Sqrt(float64(k))
	last := finite[len(finite)-1]
	s.LevelBeyond = finiteF(s.TolPct[last]) && math.Abs(s.Level) > s.TolPct[last]+s.LevelGuard
}

func horizonText(h float64) string {
	if m := h * 12; math.Abs(m-math.Round(m)) < 1e-9 && m < 24 {
		return fmt.Sprintf("%d months", int(math.Round(m)))
	}
	return fmt.Sprintf("%g years", h)
}

// crossing returns the years from the last point until the drift line,
// at the end of the slope's interval nearest zero, reaches the
// tolerance on the side it heads to.
func (s *Series) crossing(last int) float64 {
	b := s.SlopeHigh // nearest zero for a falling series
	if s.Slope > 0 {
		b = s.SlopeLow
	}
	at := s.fitted(s.Points[last].Time)
	tol := math.Copysign(s.TolPct[last], b)
	if b == 0 || !finiteF(at) {
		return math.Inf(1)
	}
	if math.Abs(at) >= s.TolPct[last] && math.Signbit(at) == math.Signbit(b) {
		return 0
	}
	t := (tol - at) / b
	if t < 0 {
		return math.Inf(1)
	}
	return t
}

// fitted is the drift line's value at t.
func (s *Series) fitted(t time.Time) float64 {
	var mt, mv float64
	k := 0
	t0 := s.Points[0].Time
	for i, p := range s.Points {
		if !math.IsNaN(s.Value[i]) && !p.Time.IsZero() {
			mt += float64(p.Time.Sub(t0)) / float64(year)
			mv += s.Value[i]
			k++
		}
	}
	if k == 0 {
		return math.NaN()
	}
	mt, mv = mt/float64(k), mv/float64(k)
	return mv + s.Slope*(float64(t.Sub(t0))/float64(year)-mt)
}

// floor returns the smallest SD of the rules, where it came from, and
// the measurement's part of it (without MinLimit).
func (s *Series) floor(set *Settings) (float64, string, float64) {
	f, from := set.minLimit()/3, "limit floor"
	var se, unc []float64
	for i, p := range s.Points {
		if math.IsNaN(s.Value[i]) || !(p.Reference > 0) {
			continue
		}
		if p.N > 0 && p.SD > 0 {
			// Standard error of a median, √(π/2)·SD/√n (large-sample,
			// normal data; Kendall & Stuart, from memory), in percent.
			se = append(se, 100*1.2533*p.SD/math.Sqrt(float64(p.N))/p.Reference)
		}
		if p.RefUncPct > 0 {
			unc = append(unc, p.RefUncPct)
		}
	}
	meas := 0.0
	if v := medianOf(se); v > 0 {
		meas = v
		if v > f {
			f, from = v, "standard error of the vial median"
		}
	}
	if v := medianOf(unc); v > 0 {
		meas = math.Max(meas, v)
		if v > f {
			f, from = v, "reference uncertainty"
		}
	}
	return f, from, meas
}

// widenedSD is the SD of a point judged against the values of v over idx
// without skip, centred on their median c, before any floor:
//
//	s·√(1 + π/(2k))·t(k−1)/3
//
// s is the SD of those values after setting aside any beyond 3.5 robust
// SDs (1.4826·MAD) of c, so one excursion in the pool does not widen the
// limits of the others; k is the number kept. √(1 + π/(2k)) widens it for
// the uncertainty of the median centre (its variance is about π/2·σ²/k for
// normal data, from memory), and t(k−1)/3, with t(ν) the Student-t
// quantile of Φ(3) = 0.99865, for the uncertainty of s: a new in-control
// value then lies beyond 3 such SDs as rarely as a normal value beyond 3σ
// (the prediction interval, e.g. Hahn & Meeker, Statistical Intervals,
// 1991, ch. 4, from memory). NaN with fewer than 2 values kept. The rules
// use it at least at Series.Floor, the guard band at Series.MeasFloor
// (floored); a floor is a known SD and is not widened.
func widenedSD(v []float64, idx []int, skip int, c float64, scratch *[]float64) float64 {
	sd, k := poolSD(v, idx, skip, c, scratch)
	if k < 2 {
		return math.NaN()
	}
	return sd * math.Sqrt(1+math.Pi/(2*float64(k))) * tFactor(k-1)
}

// floored is sd, at least floor; floor alone when sd is NaN (too few
// values to estimate it).
func floored(sd, floor float64) float64 {
	if math.IsNaN(sd) {
		return floor
	}
	return math.Max(sd, floor)
}

// poolSD is the SD of v over idx without skip, trimmed as widenedSD says,
// and the number of values kept.
func poolSD(v []float64, idx []int, skip int, c float64, scratch *[]float64) (float64, int) {
	mad := math.NaN() // no trimming in small pools: their MAD is too unsure
	if len(idx) > trimFrom {
		mad = madSD(v, idx, skip, c, scratch)
	}
	var sum, ss float64
	k := 0
	for _, i := range idx {
		x := v[i]
		if i == skip || math.IsNaN(x) || (mad > 0 && math.Abs(x-c) > trimAt*mad) {
			continue
		}
		sum += x
		k++
	}
	if k < 2 {
		return math.NaN(), k
	}
	m := sum / float64(k)
	for _, i := range idx {
		x := v[i]
		if i == skip || math.IsNaN(x) || (mad > 0 && math.Abs(x-c) > trimAt*mad) {
			continue
		}
		ss += (x - m) * (x - m)
	}
	return math.Sqrt(ss / float64(k-1)), k
}

var (
	tOnce  sync.Once
	tTable [201]float64
)

// tFactor is t(ν)/3, the Student-t quantile of Φ(3) over 3 (1 beyond 200
// degrees of freedom, where it is within 1.5 % of 1).
func tFactor(nu int) float64 {
	tOnce.Do(func() {
		p := distuv.UnitNormal.CDF(3)
		for n := 1; n < len(tTable); n++ {
			tTable[n] = distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(n)}.Quantile(p) / 3
		}
	})
	if nu < 1 {
		return math.Inf(1)
	}
	if nu >= len(tTable) {
		return 1
	}
	return tTable[nu]
}

func nanSlice(n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = math.NaN()
	}
	return v
}

func finiteF(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// median returns the median of v over idx without index skip (−1 for
// none), ignoring NaN; scratch, when not nil, is reused.
func median(v []float64, idx []int, skip int, scratch *[]float64) float64 {
	var buf []float64
	if scratch != nil {
		buf = (*scratch)[:0]
	}
	for _, i := range idx {
		if i != skip && !math.IsNaN(v[i]) {
			buf = append(buf, v[i])
		}
	}
	if scratch != nil {
		*scratch = buf
	}
	return medianOf(buf)
}

// medianOf sorts x and returns its median (NaN when empty).
func medianOf(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	sort.Float64s(x)
	h := len(x) / 2
	if len(x)%2 == 1 {
		return x[h]
	}
	return (x[h-1] + x[h]) / 2
}

// madSD is 1.4826 times the median absolute deviation from c of v over
// idx without skip: a robust SD, consistent for normal data (Hampel 1974;
// the constant is 1/Φ⁻¹(3/4), from memory).
func madSD(v []float64, idx []int, skip int, c float64, scratch *[]float64) float64 {
	var buf []float64
	if scratch != nil {
		buf = (*scratch)[:0]
	}
	for _, i := range idx {
		if i != skip && !math.IsNaN(v[i]) {
			buf = append(buf, math.Abs(v[i]-c))
		}
	}
	if scratch != nil {
		*scratch = buf
	}
	if len(buf) < 2 {
		return math.NaN()
	}
	return 1.4826 * medianOf(buf)
}

func signedPct(v float64) string {
	s := fmt.Sprintf("%+.1f %%", v)
	if s == "-0.0 %" {
		s = "+0.0 %"
	}
	return strings.Replace(s, "-", "−", 1)
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
	z := make([]float64, len(v))
	for i, x := range v {
		z[i] = math.NaN()
		if sigma > 0 && !math.IsNaN(mu) {
			z[i] = (x - mu) / sigma
		}
	}
	return westernElectricZ(z)
}

// westernElectricZ applies the rules to values already in units of σ
// from their centre line (each point may have its own centre and σ);
// NaN points are skipped.
func westernElectricZ(zs []float64) [][]int {
	out := make([][]int, len(zs))
	var z []float64
	var at []int
	for i, x := range zs {
		if !math.IsNaN(x) {
			z = append(z, x)
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

// ewma computes z_i = λx_i + (1−λ)z_{i−1}, z_0 = baseline centre, with the
// limits μ ± Lσ·√(λ/(2−λ)·[1 − (1−λ)^{2i}]) (NIST/SEMATECH e-Handbook of
// Statistical Methods §6.3.2.4; check-values §4.1). σ and μ come from the
// baseline (sd and k values kept, see poolSD), so the limits also carry
// the centre's uncertainty, which averaging does not shrink:
//
//	half-width = L·max(sd·t(k−1)/3·√(f_i + π/(2k)), floor·√f_i),  f_i = λ/(2−λ)·[1 − (1−λ)^{2i}]
//
// It runs only once the baseline is complete; points after the baseline
// beyond the limits are marked.
func (s *Series) ewma(set *Settings, sd float64, k int) {
	lam, L := set.Lambda, set.L
	if lam == 0 {
		lam = 0.2
	}
	if L == 0 {
		L = 3
	}
	n := len(s.Value)
	s.EWMA, s.EWMALow, s.EWMAHigh = nanSlice(n), nanSlice(n), nanSlice(n)
	s.EWMAOut = make([]bool, n)
	if math.IsNaN(s.BaselineMean) || !(sd > 0 || s.Floor > 0) {
		return
	}
	z := s.BaselineMean
	i := 0
	for j, x := range s.Value {
		if math.IsNaN(x) {
			continue
		}
		i++
		z = lam*x + (1-lam)*z
		f := lam / (2 - lam) * (1 - math.Pow(1-lam, 2*float64(i)))
		w := s.Floor * math.Sqrt(f)
		if sd > 0 && k >= 2 {
			w = math.Max(w, sd*tFactor(k-1)*math.Sqrt(f+math.Pi/(2*float64(k))))
		}
		w *= L
		s.EWMA[j], s.EWMALow[j], s.EWMAHigh[j] = z, s.BaselineMean-w, s.BaselineMean+w
		s.EWMAOut[j] = set.RuleOn(RuleEWMA) && !s.InBaseline[j] && (z < s.EWMALow[j] || z > s.EWMAHigh[j])
	}
}

// drift fits v = a + b·t by ordinary least squares with t in years since
// the first point (unevenly spaced dates are used as they are) and returns
// b and its confidence interval b ± t(1 − (1 − conf)/2, n−2)·SE(b), SE(b) =
// √(s²/Σ(t−t̄)²) (the textbook interval, e.g. Draper & Smith, Applied
// Regression Analysis, ch. 1; what scipy.stats.linregress's stderr gives).
func drift(ps []Point, v []float64, conf float64) (slope, lo, hi float64) {
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
	tq := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(n - 2)}.Quantile(1 - (1-conf)/2)
	return slope, slope - tq*se, slope + tq*se
}

// Trimming of the pools in widenedSD: values beyond trimAt robust SDs of the
// median are set aside in pools of more than trimFrom values (in smaller
// ones the MAD itself is too unsure and trimming made the limits narrow:
// 1.3–1.8 % of in-control sessions flagged at 3 % scatter with 6–12
// sessions, against 0.3–0.5 % without; falsealarm_test.go).
const (
	trimAt   = 5.0
	trimFrom = 10
)
