package history

import (
	"math"
	"strings"
	"testing"
	"time"
)

// guardSeries is one vial with the given deviations (percent), monthly,
// tolerance tol percent, reference uncertainty unc percent (NaN: none).
func guardSeries(dev []float64, tol, unc float64) *Series {
	t0 := time.Date(2025, 2, 3, 9, 0, 0, 0, time.UTC)
	ps := make([]Point, len(dev))
	for i, d := range dev {
		ps[i] = Point{Scanner: "G", Vial: "V", Quantity: "T2", Time: t0.AddDate(0, i, 0), N: 400,
			Median: 100 * (1 + d/100), Mean: 100 * (1 + d/100), SD: 1, Reference: 100, Deviation: d,
			Tolerance: tol, RefUncPct: unc, Verdict: "pass"}
	}
	return Analyse(ps, nil)[0]
}

// TestGuardBand: a session counts as beyond its tolerance only when it is
// outside by more than its expanded uncertainty 2u (guarded rejection,
// ISO 14253-1 and JCGM 106:2012, from memory); a vial sitting outside its
// tolerance session after session is caught by the mean of its last three
// sessions; a session outside by less than 2u is reported, not flagged.
// u is recomputed here from the definition (SD of the other sessions,
// widened as widenedSD does, floored by the measurement only).
func TestGuardBand(t *testing.T) {
	scatter3 := []float64{2.1, -3.4, 0.8, 3.9, -2.6, 1.2, -0.9, 2.8, -3.1}
	for _, c := range []struct {
		name         string
		dev          []float64
		tol, unc     float64
		finding      string
		beyond       bool   // last session beyond tolerance + 2u
		level        bool   // the mean of the last three beyond it
		reason       string // a phrase of the reasons
		minGuard     float64
		maxGuard     float64
		outsideLast  bool
		notProvenMsg bool
	}{
		{name: "3 % scatter, last +6 %: outside, not proven", dev: append(append([]float64{}, scatter3...), 6), tol: 5, unc: math.NaN(),
			finding: FindingOK, outsideLast: true, notProvenMsg: true, minGuard: 4, maxGuard: 9},
		{name: "3 % scatter, last +16 %: beyond", dev: append(append([]float64{}, scatter3...), 16), tol: 5, unc: math.NaN(),
			finding: FindingAction, beyond: true, outsideLast: true, reason: "beyond the tolerance", minGuard: 4, maxGuard: 9},
		{name: "1 % scatter around +7 %: the level is beyond", dev: []float64{6, 8, 7, 6.2, 7.8, 7, 6.4, 7.6, 7, 7.1}, tol: 5, unc: math.NaN(),
			finding: FindingAction, level: true, outsideLast: true, reason: "last 3 sessions average", minGuard: 1, maxGuard: 3},
		{name: "0.2 % scatter, last +5.6 %: beyond", dev: []float64{0.1, -0.2, 0.3, 0, -0.1, 0.2, -0.3, 0.1, 0, 5.6}, tol: 5, unc: math.NaN(),
			finding: FindingAction, beyond: true, outsideLast: true, minGuard: 0.2, maxGuard: 0.6},
		{name: "same, reference uncertainty 1 % widens u", dev: []float64{0.1, -0.2, 0.3, 0, -0.1, 0.2, -0.3, 0.1, 0, 5.6}, tol: 5, unc: 1,
			finding: FindingWatch, outsideLast: true, notProvenMsg: true, minGuard: 2, maxGuard: 2},
		{name: "inside tolerance", dev: scatter3, tol: 5, unc: math.NaN(), finding: FindingOK, minGuard: 4, maxGuard: 9},
	} {
		t.Run(c.name, func(t *testing.T) {
			s := guardSeries(c.dev, c.tol, c.unc)
			last := len(c.dev) - 1
			// u from the definition: SD of the other sessions around
			// their median, widened for their number (k) and the t
			// quantile, at least the measurement floor.
			var other []int
			for i := range c.dev {
				if i != last {
					other = append(other, i)
				}
			}
			sd, k := poolSD(s.Value, other, -1, median(s.Value, other, -1, nil), nil)
			u := sd * math.Sqrt(1+math.Pi/(2*float64(k))) * tFactor(k-1)
			if !math.IsNaN(c.unc) {
				u = math.Max(u, c.unc)
			}
			if math.Abs(s.Guard[last]-2*u) > 1e-9*u {
				t.Errorf("guard %.4f, want 2u = %.4f", s.Guard[last], 2*u)
			}
			if s.Guard[last] < c.minGuard || s.Guard[last] > c.maxGuard {
				t.Errorf("guard %.3f outside the expected %.1f–%.1f", s.Guard[last], c.minGuard, c.maxGuard)
			}
			if s.Outside[last] != c.outsideLast || s.Beyond[last] != c.beyond || s.LevelBeyond != c.level || s.Finding != c.finding {
				t.Errorf("outside %v beyond %v level %v finding %s; want %v %v %v %s (reasons %q)",
					s.Outside[last], s.Beyond[last], s.LevelBeyond, s.Finding, c.outsideLast, c.beyond, c.level, c.finding, s.Reasons)
			}
			all := strings.Join(s.Reasons, "; ")
			if c.reason != "" && !strings.Contains(all, c.reason) {
				t.Errorf("reasons %q lack %q", all, c.reason)
			}
			if c.notProvenMsg != strings.Contains(all, "not proven") {
				t.Errorf("reasons %q: 'not proven' expected %v", all, c.notProvenMsg)
			}
			if s.Beyond[last] != (math.Abs(s.Value[last]) > c.tol+s.Guard[last]) {
				t.Errorf("beyond %v disagrees with |%.2f| > %.2f + %.2f", s.Beyond[last], s.Value[last], c.tol, s.Guard[last])
			}
		})
	}
}
