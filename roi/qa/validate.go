package qa

import (
	"fmt"
	"math"
	"strings"
	"time"
)

// Limits of a qa.json that Validate accepts. They bound what a file may
// bring into a history database and its charts: a value outside them is
// not a phantom measurement (tauvox's choices, stated in docs/formats.md).
const (
	// MaxVials is the most vial results (vials × quantities) one session
	// may hold: phantoms hold a few dozen vials (common practice); a file
	// with more would make one chart per vial and quantity.
	MaxVials = 1000
	// MaxTimeMS bounds medians, means, SDs, references and tolerances:
	// 100 s, far beyond any T1 or T2 of phantom materials.
	MaxTimeMS = 1e5
	// MaxDeviationPct bounds a deviation from the reference: a vial 100
	// times off its reference is not a measurement of that vial.
	MaxDeviationPct = 1e4
	// MinTemperatureC and MaxTemperatureC bound a session's phantom
	// temperature (a plausible room or bore temperature, with margin).
	MinTemperatureC = -10
	MaxTemperatureC = 60
	// MaxFieldT bounds the field strength (the strongest MR magnets in
	// use are below it).
	MaxFieldT = 25
)

// Quantities are the quantities a phantom session measures.
var Quantities = []string{"T1", "T2"}

// Validate checks q against the qa.json schema beyond what decoding
// checks: the session's identity and conditions, every vial's id,
// quantity, count, numbers and verdict, and the session verdict. It
// returns the first problem found as one line naming the field (e.g.
// `vials[3] (A4 T1): n is -5, want ≥ 0`), nil when q is valid. Undefined
// numbers (null, decoded as NaN) are allowed only where nothing was
// measured or judged.
func Validate(q *QA) error {
	s := q.Session
	switch {
	case strings.TrimSpace(s.Scanner) == "":
		return fmt.Errorf("session has no scanner")
	case strings.TrimSpace(s.Phantom) == "":
		return fmt.Errorf("session has no phantom name")
	}
	if _, err := time.Parse("2006-01-02", s.Date); err != nil || len(s.Date) != 10 {
		return fmt.Errorf("session date %q is not a date (YYYY-MM-DD)", s.Date)
	}
	if s.Time != "" {
		if _, err := time.Parse("15:04", s.Time); err != nil || len(s.Time) != 5 {
			return fmt.Errorf("session time %q is not a time of day (HH:MM)", s.Time)
		}
	}
	switch {
	case len(q.Vials) == 0:
		return fmt.Errorf("no vial results")
	case len(q.Vials) > MaxVials:
		return fmt.Errorf("%d vial results, above the limit of %d per session", len(q.Vials), MaxVials)
	}
	if !(s.Temperature >= MinTemperatureC && s.Temperature <= MaxTemperatureC) {
		return fmt.Errorf("session temperature_C %v is outside %d…%d °C", s.Temperature, MinTemperatureC, MaxTemperatureC)
	}
	if !(s.Field > 0 && s.Field <= MaxFieldT) {
		return fmt.Errorf("session field_T %v is outside (0, %d] T", s.Field, MaxFieldT)
	}
	switch q.Verdict {
	case Pass, Fail, NotMeasured, Undetermined:
	default:
		return fmt.Errorf("session verdict %q is not one of pass, fail, not-measured, undetermined", q.Verdict)
	}
	seen := make(map[[2]string]int, len(q.Vials))
	for i := range q.Vials {
		if err := validVial(&q.Vials[i]); err != nil {
			return fmt.Errorf("vials[%d]%s: %v", i, vialName(&q.Vials[i]), err)
		}
		k := [2]string{q.Vials[i].ID, q.Vials[i].Quantity}
		if j, ok := seen[k]; ok {
			return fmt.Errorf("vials[%d] (%s %s) repeats vials[%d]", i, k[0], k[1], j)
		}
		seen[k] = i
	}
	return nil
}

func vialName(r *VialQA) string {
	if r.ID == "" {
		return ""
	}
	return " (" + r.ID + " " + r.Quantity + ")"
}

func validVial(r *VialQA) error {
	switch {
	case strings.TrimSpace(r.ID) == "":
		return fmt.Errorf("no vial id")
	case len(r.ID) > 64:
		return fmt.Errorf("vial id longer than 64 bytes")
	}
	known := false
	for _, q := range Quantities {
		known = known || r.Quantity == q
	}
	if !known {
		return fmt.Errorf("quantity %q is not one of %s", r.Quantity, strings.Join(Quantities, ", "))
	}
	if r.N < 0 {
		return fmt.Errorf("n is %d, want ≥ 0", r.N)
	}
	judged := false
	switch r.Verdict {
	case Pass, Fail:
		judged = true
	case NotMeasured, Undetermined:
	default:
		return fmt.Errorf("verdict %q is not one of pass, fail, not-measured, undetermined", r.Verdict)
	}
	// A number is either undefined (NaN from null or an absent key) or
	// inside its range; a judged vial must have its median, reference and
	// deviation.
	for _, f := range []struct {
		name     string
		v        float64
		lo, hi   float64
		required bool
	}{
		{"median_ms", r.Median, 0, MaxTimeMS, judged},
		{"mean_ms", r.Mean, 0, MaxTimeMS, false},
		{"sd_ms", r.SD, 0, MaxTimeMS, false},
		{"reference_ms", r.Reference, 0, MaxTimeMS, judged},
		{"tolerance_ms", r.Tolerance, 0, MaxTimeMS, judged},
		{"deviation_pct", r.Deviation, -MaxDeviationPct, MaxDeviationPct, judged},
		{"failed_fraction", r.Failed, 0, 1, false},
		{"reference_uncertainty_pct", r.RefUncPct, 0, 100, false},
	} {
		switch {
		case math.IsNaN(f.v) && f.required:
			return fmt.Errorf("verdict %s without %s", r.Verdict, f.name)
		case math.IsNaN(f.v):
		case math.IsInf(f.v, 0) || f.v < f.lo || f.v > f.hi:
			return fmt.Errorf("%s %v is outside [%g, %g]", f.name, f.v, f.lo, f.hi)
		}
	}
	if judged && !(r.Reference > 0) {
		return fmt.Errorf("verdict %s with reference_ms %v, want > 0", r.Verdict, r.Reference)
	}
	return nil
}
