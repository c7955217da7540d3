package history

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/tauvox/tauvox/roi/phantom"
)

// synthHistory is a history of our own: cadence days between sessions
// (±3 days), 12 vials × T1, T2; vial D1 T1 drifts by −3 %/yr (scatter 1 %),
// vial E2 T2 has one +6 % excursion at session 6 (scatter 1 %), the other
// 22 series are stable with a scatter drawn from 1–2 %; the session
// temperature is drawn from 19–23.5 °C. Tolerances: T1 5 %, T2 10 % of
// the reference (the usual acceptance limits, check-values §4.2, common
// practice), reference uncertainty 1 %.
func synthHistory(seed uint64, sessions, cadence int) []Point {
	rng := rand.New(rand.NewPCG(seed, 14))
	t0 := time.Date(2025, 3, 3, 9, 0, 0, 0, time.UTC)
	times := make([]time.Time, sessions)
	temps := make([]float64, sessions)
	for i := range times {
		times[i] = t0.AddDate(0, 0, i*cadence+rng.IntN(7)-3)
		temps[i] = math.Round((19+4.5*rng.Float64())*10) / 10
	}
	var ps []Point
	for v := 0; v < 12; v++ {
		vial := fmt.Sprintf("%c%d", 'A'+rune(v/2), v%2+1)
		for _, q := range []string{"T1", "T2"} {
			tol, ref := 5.0, 300.0+100*float64(v)
			if q == "T2" {
				tol, ref = 10, 40+10*float64(v)
			}
			scatter := 1 + rng.Float64()
			if vial == "D1" && q == "T1" || vial == "E2" && q == "T2" {
				scatter = 1
			}
			for i, t := range times {
				dev := scatter * rng.NormFloat64()
				if vial == "D1" && q == "T1" {
					dev += -3 * float64(t.Sub(t0)) / float64(year)
				}
				if vial == "E2" && q == "T2" && i == 5 {
					dev += 6
				}
				ps = append(ps, Point{SessionID: int64(i + 1), Scanner: "OWN-1", Acquired: t.Format("2006-01-02 15:04"), Time: t,
					Vial: vial, Quantity: q, N: 250, Median: ref * (1 + dev/100), Mean: ref * (1 + dev/100), SD: 0.02 * ref,
					Reference: ref, Deviation: dev, Tolerance: tol / 100 * ref, RefUncPct: 1, Verdict: "pass", Field: 1.5, Temperature: temps[i]})
			}
		}
	}
	return ps
}

// anyFlag reports whether a series carries any flag: a flagged session
// anywhere in its history, a drift, or an action or watch finding.
func anyFlag(s *Series) bool {
	if s.Drifting || s.Finding == FindingAction || s.Finding == FindingWatch {
		return true
	}
	for i := range s.Points {
		if s.Flagged(i) {
			return true
		}
	}
	return false
}

type synthResult struct {
	slope            float64
	drift, excursion bool
	others           int
	names            []string
}

func judgeSynth(ps []Point) synthResult {
	r := synthResult{slope: math.NaN()}
	for _, s := range Analyse(ps, nil) {
		switch {
		case s.Vial == "D1" && s.Quantity == "T1":
			r.slope = s.Slope
			r.drift = s.Drifting && math.Abs(s.Slope+3) <= 1.5
		case s.Vial == "E2" && s.Quantity == "T2":
			r.excursion = s.Flagged(5)
		case anyFlag(s):
			r.others++
			r.names = append(r.names, s.Vial+" "+s.Quantity+": "+s.Finding)
		}
	}
	return r
}

// TestSyntheticHistory: 10 sessions every 8 weeks (18 months) with the
// default settings: the drift is found (rule 6) with a slope within
// ±1.5 %/yr of −3 %/yr, the excursion is flagged, and at most 3 of the
// other 22 series carry any flag (a flagged session anywhere, a drift or a
// finding). The fixed seed must meet all three. Over 200 seeds the shares
// are logged and bounded below (docs/validation.md): the drift rule's
// 99.73 % interval, chosen so that stable series are flagged in at most 1
// of 100 recorded sessions, finds a −3 %/yr drift at 1 % scatter in about
// half of the 8-week histories (slope standard error ≈ 0.7 %/yr with 8
// degrees of freedom) and in nine of ten 12-week ones; with monthly
// sessions (9 months) it almost never can.
func TestSyntheticHistory(t *testing.T) {
	r := judgeSynth(synthHistory(1, 10, 56))
	t.Logf("seed 1: D1 T1 slope %.2f %%/yr, drift found %v, excursion flagged %v, other series flagged %d %v", r.slope, r.drift, r.excursion, r.others, r.names)
	if !r.drift || !r.excursion || r.others > 3 {
		t.Errorf("seed 1: drift %v (slope %.2f), excursion %v, others flagged %d", r.drift, r.slope, r.excursion, r.others)
	}
	const n = 200
	for _, c := range []struct {
		cadence, minAll, minQuiet int // days; shares in percent
	}{{28, 0, 95}, {56, 35, 95}, {84, 70, 95}} {
		var ok, drift, exc, quiet int
		for seed := uint64(1); seed <= n; seed++ {
			r := judgeSynth(synthHistory(seed, 10, c.cadence))
			if r.drift {
				drift++
			}
			if r.excursion {
				exc++
			}
			if r.others <= 3 {
				quiet++
			}
			if r.drift && r.excursion && r.others <= 3 {
				ok++
			}
		}
		t.Logf("every %d days, %d seeds: drift found within ±1.5 %%/yr %d, excursion flagged %d, ≤ 3 others flagged %d, all three %d", c.cadence, n, drift, exc, quiet, ok)
		if ok < n*c.minAll/100 || quiet < n*c.minQuiet/100 {
			t.Errorf("every %d days: %d of %d histories meet all three (want ≥ %d %%), %d quiet (want ≥ %d %%)", c.cadence, ok, n, c.minAll, quiet, c.minQuiet)
		}
	}
}

// TestWithSession: a session not yet recorded joins the scanner's points
// (a recorded one at the same time is replaced, other scanners dropped),
// read as Add would store it.
func TestWithSession(t *testing.T) {
	rec := synthHistory(1, 6, 30)
	rec = append(rec, Point{Scanner: "OTHER", Acquired: "2025-01-01", Vial: "A1", Quantity: "T1"})
	last := rec[5] // A1 T1, sixth session
	qa := &phantom.QA{Session: phantom.Session{Scanner: "OWN-1", Date: last.Time.Format("2006-01-02"), Time: last.Time.Format("15:04"), Field: 1.5, Temperature: 21},
		Vials: []phantom.VialQA{
			{ID: "A1", Quantity: "T1", N: 200, Median: 330, Reference: 300, Deviation: 10, Tolerance: 15, Verdict: phantom.Fail},
			{ID: "Z9", Quantity: "T2", N: 0, Median: math.NaN(), Verdict: phantom.NotMeasured},
		}}
	pts := WithSession(rec, qa)
	if len(pts) != len(rec)-1-24+2 {
		t.Fatalf("%d points, want %d", len(pts), len(rec)-1-24+2)
	}
	var a1 []Point
	for _, p := range pts {
		if p.Scanner != "OWN-1" {
			t.Fatalf("point of scanner %q kept", p.Scanner)
		}
		if p.Vial == "A1" && p.Quantity == "T1" {
			a1 = append(a1, p)
		}
		if p.Vial == "Z9" && (!math.IsNaN(p.Deviation) || !math.IsNaN(p.Reference)) {
			t.Errorf("not-measured vial: deviation %g reference %g, want NaN", p.Deviation, p.Reference)
		}
	}
	if len(a1) != 6 || a1[5].Deviation != 10 || a1[5].Tolerance != 15 {
		t.Fatalf("A1 T1: %d points, last %+v", len(a1), a1[len(a1)-1])
	}
	s := Analyse(a1, nil)[0]
	if !s.Outside[5] || s.Finding != FindingAction {
		t.Errorf("the added session at +10 %% (tolerance 5 %%): outside %v, finding %s", s.Outside[5], s.Finding)
	}
}
