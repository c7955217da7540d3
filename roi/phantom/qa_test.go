package phantom

import (
	"errors"
	"math"
	"testing"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/volume"
)

// TestJudge: the verdict rule |median − reference| ≤ max(pct % of
// reference, abs) (design.md; common practice in phantom QA), with the
// reference interpolated linearly between table rows (design.md), and the
// deviation 100·(median − reference)/reference signed: positive when the
// measurement is above the reference (design.md, qa.json "deviation in
// percent"; the stability statistics are computed on it, so its sign is
// the direction of a drift). A vial needs minN usable voxels (5 here):
// exactly minN is measured, minN − 1 is not.
func TestJudge(t *testing.T) {
	v := &Vial{ID: "V", Reference: map[string][]Row{
		"T1": {{Field: 1.5, Temperature: 18, Value: 98}, {Field: 1.5, Temperature: 22, Value: 102}},
		"T2": {{Field: 1.5, Temperature: 20, Value: 20}},
	}}
	tol := map[string]Tolerance{"T1": {Pct: 5, Abs: 5}, "T2": {Pct: 10, Abs: 2.5}}
	nan := math.NaN()
	cases := []struct {
		name   string
		q      string
		median float64
		temp   float64
		n      int
		want   string
		ref    float64
		tolms  float64
		dev    float64 // percent, signed; NaN: not computed
	}{
		{"inside", "T1", 103, 20, 50, Pass, 100, 5, 3},       // ref 100 at 20 °C (between 98 and 102), tol max(5, 5)
		{"on the limit", "T1", 105, 20, 50, Pass, 100, 5, 5}, // |105 − 100| = 5 ≤ 5
		{"on the lower limit", "T1", 95, 20, 50, Pass, 100, 5, -5},
		{"outside", "T1", 105.01, 20, 50, Fail, 100, 5, 5.01},
		{"below", "T1", 94.9, 20, 50, Fail, 100, 5, -5.1},
		{"interpolated row", "T1", 101, 21, 50, Pass, 101, 5.05, 0},
		{"interpolated row, below", "T1", 98.98, 21, 50, Pass, 101, 5.05, -2},
		{"absolute floor", "T2", 22.4, 20, 50, Pass, 20, 2.5, 12}, // 10 % = 2 < 2.5
		{"absolute floor, below", "T2", 17.6, 20, 50, Pass, 20, 2.5, -12},
		{"floor exceeded", "T2", 22.6, 20, 50, Fail, 20, 2.5, 13},
		{"floor exceeded, below", "T2", 17.4, 20, 50, Fail, 20, 2.5, -13},
		{"too few voxels", "T1", 100, 20, 3, NotMeasured, 100, 5, nan},
		{"one voxel short of minN", "T1", 100, 20, 4, NotMeasured, 100, 5, nan},
		{"exactly minN voxels", "T1", 97, 20, 5, Pass, 100, 5, -3},
		{"exactly minN voxels, failing", "T1", 106, 20, 5, Fail, 100, 5, 6},
		{"no reference", "PD", 1, 20, 50, NotMeasured, 0, 0, nan},
	}
	for _, c := range cases {
		r := VialQA{ID: "V", Quantity: c.q, N: c.n, Median: c.median, Deviation: nan}
		if err := Judge(&r, v, tol, 1.5, c.temp, false, 5); err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if r.Verdict != c.want || math.Abs(r.Reference-c.ref) > 1e-9 || math.Abs(r.Tolerance-c.tolms) > 1e-9 {
			t.Errorf("%s: verdict %s ref %g tol %g, want %s %g %g", c.name, r.Verdict, r.Reference, r.Tolerance, c.want, c.ref, c.tolms)
		}
		// Exact arithmetic on these values up to rounding: 1e-9 percentage points.
		if math.IsNaN(c.dev) != math.IsNaN(r.Deviation) || !math.IsNaN(c.dev) && math.Abs(r.Deviation-c.dev) > 1e-9 {
			t.Errorf("%s: deviation %v %%, want %v %% (signed: median %g, reference %g)", c.name, r.Deviation, c.dev, c.median, c.ref)
		}
	}
	r := VialQA{Quantity: "T1", N: 50, Median: 100}
	if err := Judge(&r, v, tol, 1.5, 25, false, 5); !errors.Is(err, ErrOutOfRange) {
		t.Errorf("temperature outside the table: %v", err)
	}
	if err := Judge(&r, v, tol, 1.5, 24, true, 5); err != nil || math.Abs(r.Reference-104) > 1e-9 {
		t.Errorf("extrapolated: %v %g", err, r.Reference)
	}
	if Overall([]VialQA{{Verdict: Pass}, {Verdict: NotMeasured}}) != Pass ||
		Overall([]VialQA{{Verdict: Pass}, {Verdict: Fail}}) != Fail ||
		Overall([]VialQA{{Verdict: NotMeasured}}) != NotMeasured {
		t.Error("overall verdict")
	}
}

// TestAssessTruth: maps equal to the simulated truth pass every vial with
// zero deviation; a vial whose material drifted by +12 % or −12 % fails T2
// (10 % tolerance) and T1 (5 %), with a deviation of +12 % or −12 %
// (signed: 100·(measured − reference)/reference; to 0.01 percentage
// points, the tolerance already used for the undrifted vials).
func TestAssessTruth(t *testing.T) {
	def := Demo()
	for _, drift := range []float64{1, 1.12, 0.88} {
		sc := &Scene{Def: def, Temperature: 22, Center: [3]float64{-20, 14, 0}, Rotation: 250, Seed: 9,
			Shift: map[string]float64{"A4": drift}}
		acq := []volume.Acquisition{volume.Unknown()}
		acq[0].EchoTime, acq[0].RepetitionTime = 10, 3000
		m0, err := sc.Series(fit.SeqSpinEcho, acq)
		if err != nil {
			t.Fatal(err)
		}
		var inputs []Input
		for _, q := range []string{"T1", "T2"} {
			tr, err := sc.Truth(q)
			if err != nil {
				t.Fatal(err)
			}
			inputs = append(inputs, Input{Quantity: q, Map: tr, Locator: m0, Ref: SeriesRef{Map: q + "map"}})
		}
		res, err := Assess(def, inputs, &Options{Session: Session{Field: 1.5, Temperature: 22, Scanner: "X", Date: "2026-11-30"}})
		if err != nil {
			t.Fatal(err)
		}
		qa := res.QA
		if len(qa.Vials) != 2*len(def.Vials) {
			t.Fatalf("%d results", len(qa.Vials))
		}
		for _, r := range qa.Vials {
			want := Pass
			if r.ID == "A4" && drift != 1 {
				want = Fail
			}
			if r.Verdict != want {
				t.Errorf("drift %g vial %s %s: %s (median %g ref %g dev %.2f%%, n %d)", drift, r.ID, r.Quantity, r.Verdict, r.Median, r.Reference, r.Deviation, r.N)
			}
			wantDev := 0.0
			if r.ID == "A4" {
				wantDev = 100 * (drift - 1)
			}
			if math.Abs(r.Deviation-wantDev) > 0.01 {
				t.Errorf("drift %g vial %s %s: deviation %+.4f%%, want %+.2f%%", drift, r.ID, r.Quantity, r.Deviation, wantDev)
			}
		}
		wantAll := Pass
		if drift != 1 {
			wantAll = Fail
		}
		if qa.Verdict != wantAll {
			t.Errorf("drift %g: overall %s", drift, qa.Verdict)
		}
	}
}

func TestAssessErrors(t *testing.T) {
	def := Demo()
	sc := &Scene{Def: def, Seed: 1}
	tr, _ := sc.Truth("T1")
	in := []Input{{Quantity: "T1", Map: tr, Ref: SeriesRef{Map: "T1map"}}}
	if _, err := Assess(def, in, &Options{Session: Session{Field: 1.5, Temperature: 35}}); !errors.Is(err, ErrOutOfRange) {
		t.Errorf("temperature 35 °C outside 16–28: %v", err)
	}
	if _, err := Assess(def, in, &Options{Session: Session{Temperature: 20}}); err == nil {
		t.Error("missing field accepted")
	}
	other := volume.New(10, 10, 1, 1)
	in[0].Locator = other
	if _, err := Assess(def, in, &Options{Session: Session{Field: 1.5, Temperature: 20}}); err == nil {
		t.Error("locator on another grid accepted")
	}
}
