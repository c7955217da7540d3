package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
)

func srModels() []*SaturationRecovery {
	return []*SaturationRecovery{
		{},
		{Solver: Gonum},
		{Efficiency: true},
		{Efficiency: true, Solver: Gonum},
	}
}

func srName(m *SaturationRecovery) string {
	s := m.Method()
	if m.Efficiency {
		s += "+k"
	}
	if m.Solver == Gonum {
		s += "/gonum"
	}
	return s
}

// srBenchTR is a variable-TR protocol in scanner order (not sorted).
var srBenchTR = []float64{3200, 100, 800, 200, 6400, 400, 1600}

// TestSRNoiseless: exact signals M0·(1 − k·exp(−TR/T1)) (the textbook
// saturation-recovery equation, check-values §1.1 [M]) at 7 TRs in
// unsorted order, T1 from 100 to 3000 ms, k = 1 and, with Efficiency,
// k = 0.9: every variant recovers T1, M0 (and k) to 1e-6 relative, R² = 1.
func TestSRNoiseless(t *testing.T) {
	for _, m := range srModels() {
		for _, t1 := range []float64{100, 300, 600, 1000, 1500, 2000, 3000} {
			k := 1.0
			if m.Efficiency {
				k = 0.9
			}
			y := srSignal(srBenchTR, 1200, k, t1)
			res := t1Fit(t, m, trAcq(srBenchTR), y, Covariates{})
			if res.Status != OK {
				t.Errorf("%s T1 %g: status %v", srName(m), t1, res.Status)
				continue
			}
			want := []float64{t1, 1000 / t1, 1200, k}
			for i := range res.Values {
				if relErr(res.Values[i], want[i]) > 1e-6 {
					t.Errorf("%s T1 %g: %s = %.9g, want %.9g", srName(m), t1, m.Outputs()[i].Name, res.Values[i], want[i])
				}
			}
			if !scalar.EqualWithinAbs(res.R2, 1, 1e-9) {
				t.Errorf("%s T1 %g: R² %g", srName(m), t1, res.R2)
			}
		}
	}
}

// TestSRAgreesWithScipy: 30 noisy voxels per variant (Rician, SNR 30 and
// 100; k = 1 for the two-parameter fit, k in 0.85–1 with Efficiency): T1,
// M0 and k agree with scipy.optimize.curve_fit to 1e-4 relative, standard
// errors to 1e-3. Reference: scipy.optimize.curve_fit, scipy 1.10.1,
// script testdata/gen/scipy_t1_refs.py.
func TestSRAgreesWithScipy(t *testing.T) {
	ref := loadT1Refs(t)
	for _, m := range srModels() {
		tr, cases := ref.SR.TR, ref.SR.Cases
		if m.Efficiency {
			tr, cases = ref.SREff.TR, ref.SREff.Cases
		}
		if len(cases) < 20 {
			t.Fatalf("only %d SR reference cases", len(cases))
		}
		f := t1Fitter(t, m, trAcq(tr))
		res := NewResult(m)
		for i, c := range cases {
			if !c.OK {
				continue
			}
			f.Fit(res, c.Signal, Covariates{})
			if res.Status != OK {
				t.Errorf("%s case %d: status %v", srName(m), i, res.Status)
				continue
			}
			if relErr(res.Values[0], c.T1) > 1e-4 || relErr(res.Values[2], c.M0) > 1e-4 || m.Efficiency && relErr(res.Values[3], c.SatEff) > 1e-4 {
				t.Errorf("%s case %d: T1 %.7g M0 %.7g, curve_fit %.7g %.7g", srName(m), i, res.Values[0], res.Values[2], c.T1, c.M0)
			}
			if relErr(res.SE[0], c.SeT1) > 1e-3 || relErr(res.SE[2], c.SeM0) > 1e-3 {
				t.Errorf("%s case %d: SE(T1) %.6g SE(M0) %.6g, curve_fit %.6g %.6g", srName(m), i, res.SE[0], res.SE[2], c.SeT1, c.SeM0)
			}
			if relErr(res.RSS, c.RSS) > 1e-6 {
				t.Errorf("%s case %d: RSS %.9g, curve_fit %.9g", srName(m), i, res.RSS, c.RSS)
			}
		}
	}
}

// TestSRGonumAgrees: gonum's optimizer and the dedicated LM agree to 1e-4
// on noisy voxels (Gaussian noise, SNR 50).
func TestSRGonumAgrees(t *testing.T) {
	rng := rand.New(rand.NewPCG(61, 62))
	for _, eff := range []bool{false, true} {
		ded := t1Fitter(t, &SaturationRecovery{Efficiency: eff}, trAcq(srBenchTR))
		gon := t1Fitter(t, &SaturationRecovery{Efficiency: eff, Solver: Gonum}, trAcq(srBenchTR))
		m := &SaturationRecovery{Efficiency: eff}
		rd, rg := NewResult(m), NewResult(m)
		for v := 0; v < 50; v++ {
			t1 := 200 + 2500*rng.Float64()
			y := addNoise(rng, srSignal(srBenchTR, 1000, 0.95, t1), 20)
			ded.Fit(rd, y, Covariates{})
			gon.Fit(rg, y, Covariates{})
			if rd.Status != OK || rg.Status != OK {
				t.Errorf("eff %v voxel %d: status %v / %v", eff, v, rd.Status, rg.Status)
				continue
			}
			for i := range rd.Values {
				if relErr(rg.Values[i], rd.Values[i]) > 1e-4 {
					t.Errorf("eff %v voxel %d: %s gonum %.7g, dedicated %.7g", eff, v, m.Outputs()[i].Name, rg.Values[i], rd.Values[i])
				}
			}
		}
	}
}

// TestSRJacobian checks the analytic Jacobian against finite differences
// (gonum diff/fd).
func TestSRJacobian(t *testing.T) {
	checkJacobian(t, "srCurve", &srCurve{tr: srBenchTR}, len(srBenchTR), []float64{1000, 1.0 / 900}, 1e-6)
	checkJacobian(t, "srCurve", &srCurve{tr: srBenchTR, eff: true}, len(srBenchTR), []float64{1000, 1.0 / 900, 0.93}, 1e-6)
	checkJacobian(t, "srCurve", &srCurve{tr: srBenchTR, eff: true}, len(srBenchTR), []float64{3, 1.0 / 150, 1.2}, 1e-6)
}

// TestSRFailures: failed voxels are NaN with a reason.
func TestSRFailures(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		name string
		m    *SaturationRecovery
		y    []float64
		want Status
	}{
		{"two finite samples", &SaturationRecovery{}, []float64{nan, 1, nan, 2, nan, nan, nan}, TooFewPoints},
		{"three finite samples, efficiency", &SaturationRecovery{Efficiency: true}, []float64{nan, 1, nan, 2, nan, 3, nan}, TooFewPoints},
		{"T1 above MaxT", &SaturationRecovery{MaxT: 500}, srSignal(srBenchTR, 1000, 1, 2000), OutOfBounds},
		{"T1 below MinT", &SaturationRecovery{MinT: 1000}, srSignal(srBenchTR, 1000, 1, 150), OutOfBounds},
	}
	for _, c := range cases {
		res := NewResult(c.m)
		res.Iter = 99
		t1Fitter(t, c.m, trAcq(srBenchTR)).Fit(res, c.y, Covariates{})
		if res.Status != c.want {
			t.Errorf("%s: status %v, want %v", c.name, res.Status, c.want)
		}
		for i := range res.Values {
			if !math.IsNaN(res.Values[i]) || !math.IsNaN(res.SE[i]) {
				t.Errorf("%s: %s = %v ± %v, want NaN", c.name, c.m.Outputs()[i].Name, res.Values[i], res.SE[i])
			}
		}
		if !math.IsNaN(res.R2) || !math.IsNaN(res.RSS) || (c.want == TooFewPoints && res.Iter != 0) {
			t.Errorf("%s: R² %v RSS %v Iter %d", c.name, res.R2, res.RSS, res.Iter)
		}
	}
	// A NaN sample is dropped: the fit equals that of the protocol without it.
	y := srSignal(srBenchTR, 1000, 1, 700)
	rng := rand.New(rand.NewPCG(1, 2))
	y = addNoise(rng, y, 10)
	yn := append([]float64(nil), y...)
	yn[2] = nan
	m := &SaturationRecovery{}
	a := t1Fit(t, m, trAcq(srBenchTR), yn, Covariates{})
	tr := append(append([]float64(nil), srBenchTR[:2]...), srBenchTR[3:]...)
	b := t1Fit(t, m, trAcq(tr), append(append([]float64(nil), y[:2]...), y[3:]...), Covariates{})
	for i := range a.Values {
		if a.Status != OK || relErr(a.Values[i], b.Values[i]) > 1e-12 {
			t.Errorf("NaN sample: %s %v (%v), protocol without it %v", m.Outputs()[i].Name, a.Values[i], a.Status, b.Values[i])
		}
	}
}

// TestSRProtocolErrors: bad protocols are refused with a clear error.
func TestSRProtocolErrors(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		name string
		m    *SaturationRecovery
		tr   []float64
		want string
	}{
		{"too few", &SaturationRecovery{}, []float64{500, 1500}, "2 volumes; the model needs at least 3 repetition times"},
		{"too few with efficiency", &SaturationRecovery{Efficiency: true}, []float64{500, 1000, 1500}, "3 volumes; the model needs at least 4 repetition times"},
		{"missing TR", &SaturationRecovery{}, []float64{500, nan, 1500}, "repetition time of volume 2 is missing or invalid"},
		{"negative TR", &SaturationRecovery{}, []float64{500, 1000, -1}, "repetition time of volume 3 is missing or invalid"},
		{"duplicate", &SaturationRecovery{}, []float64{500, 1000, 500}, "repetition time 500 ms appears twice (volumes 1 and 3)"},
		{"unknown method", &SaturationRecovery{Estimator: Linear}, []float64{500, 1000, 1500}, `model t1-sr has no method "linear" (nlls)`},
	}
	for _, c := range cases {
		_, err := c.m.NewFitter(trAcq(c.tr))
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		if !errors.Is(err, ErrProtocol) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %q, want ErrProtocol with %q", c.name, err, c.want)
		}
	}
	// No inversion time is needed (trAcq leaves it NaN).
	if _, err := (&SaturationRecovery{}).NewFitter(trAcq(srBenchTR)); err != nil {
		t.Errorf("variable TR without TI: %v", err)
	}
}

// TestSRNoAllocs: no allocation per voxel, with all samples and with a
// dropped one.
func TestSRNoAllocs(t *testing.T) {
	y := srSignal(srBenchTR, 1000, 0.95, 800)
	yn := append([]float64(nil), y...)
	yn[4] = math.NaN()
	for _, m := range []*SaturationRecovery{{}, {Efficiency: true}} {
		f := t1Fitter(t, m, trAcq(srBenchTR))
		res := NewResult(m)
		for _, v := range [][]float64{y, yn} {
			if a := testing.AllocsPerRun(100, func() { f.Fit(res, v, Covariates{}) }); a != 0 {
				t.Errorf("%s: %v allocations per voxel", srName(m), a)
			}
		}
	}
}

// srVoxels returns n noisy voxels (Rician, SNR 50).
func srVoxels(n int, k float64) [][]float64 {
	rng := rand.New(rand.NewPCG(71, 72))
	out := make([][]float64, n)
	for i := range out {
		t1 := 200 + 2300*rng.Float64()
		s := srSignal(srBenchTR, 1000, k, t1)
		for j := range s {
			s[j] = Rician(rng, s[j], 20)
		}
		out[i] = s
	}
	return out
}

func BenchmarkSaturation(b *testing.B) {
	benchT1(b, &SaturationRecovery{}, trAcq(srBenchTR), srVoxels(1024, 1), nil)
}

func BenchmarkSaturationEfficiency(b *testing.B) {
	benchT1(b, &SaturationRecovery{Efficiency: true}, trAcq(srBenchTR), srVoxels(1024, 0.95), nil)
}
