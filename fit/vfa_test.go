package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"

	"github.com/tauvox/tauvox/volume"
)

func vfaModels() []*VariableFlipAngle {
	return []*VariableFlipAngle{
		{},
		{Estimator: NLLS},
		{Estimator: NLLS, Solver: Gonum},
	}
}

func vfaName(m *VariableFlipAngle) string {
	s := m.Method()
	if m.Solver == Gonum {
		s += "/gonum"
	}
	return s
}

// TestVFACheckValues: SPGR with M0 = 1, TR = 15 ms, T1 = 1000 ms.
// [C] check-values §2.4: S(3°) = 0.04798467, S(17°) = 0.07513619; the
// linearisation returns T1 = 1000.000 ms and M0 = 1.000; Ernst angle
// 9.899°. With a true B1 = 0.9 and the nominal angles used, the apparent T1
// is 809.2 ms [C] check-values §2.4; with the B1 covariate given, T1 is
// exact again (α_eff = B1·α_nom, BIDS TB1map, check-values §1.1).
func TestVFACheckValues(t *testing.T) {
	fa := []float64{3, 17}
	y := spgr(fa, 15, 1, 1000, 1)
	for i, w := range []float64{0.04798467, 0.07513619} {
		if !scalar.EqualWithinAbs(y[i], w, 5e-9) {
			t.Errorf("S(%g°) = %.8f, check-values §2.4 %.8f", fa[i], y[i], w)
		}
	}
	if ernst := math.Acos(math.Exp(-15.0/1000)) * 180 / math.Pi; !scalar.EqualWithinAbs(ernst, 9.899, 5e-4) {
		t.Errorf("Ernst angle %.4f°, check-values §2.4 9.899°", ernst)
	}
	yb := spgr(fa, 15, 1, 1000, 0.9)
	for _, m := range vfaModels() {
		res := t1Fit(t, m, faAcq(fa, 15), y, Covariates{})
		if res.Status != OK || relErr(res.Values[0], 1000) > 1e-6 || relErr(res.Values[2], 1) > 1e-6 {
			t.Errorf("%s: status %v T1 %.9g M0 %.9g, want 1000, 1", vfaName(m), res.Status, res.Values[0], res.Values[2])
		}
		res = t1Fit(t, m, faAcq(fa, 15), yb, Covariates{})
		if res.Status != OK || !scalar.EqualWithinAbs(res.Values[0], 809.2, 0.05) {
			t.Errorf("%s B1 0.9 ignored: status %v T1 %.4f, check-values §2.4 809.2", vfaName(m), res.Status, res.Values[0])
		}
		res = t1Fit(t, m, faAcq(fa, 15), yb, Covariates{B1: 0.9})
		if res.Status != OK || relErr(res.Values[0], 1000) > 1e-6 || relErr(res.Values[2], 1) > 1e-6 {
			t.Errorf("%s B1 0.9 given: status %v T1 %.9g M0 %.9g, want 1000, 1", vfaName(m), res.Status, res.Values[0], res.Values[2])
		}
	}
}

// TestVFANoiseless: a realistic six-angle protocol (TR = 15 ms), T1 from
// 100 to 3000 ms, B1 of 1 and 1.15: every method recovers T1 and M0 to 1e-6
// relative (the signal equation itself, Deoni2003), R² = 1.
func TestVFANoiseless(t *testing.T) {
	fa := []float64{2, 5, 10, 15, 20, 25}
	for _, m := range vfaModels() {
		for _, b1 := range []float64{1, 1.15} {
			for _, t1 := range []float64{100, 300, 600, 1000, 1500, 2000, 3000} {
				y := spgr(fa, 15, 4000, t1, b1)
				res := t1Fit(t, m, faAcq(fa, 15), y, Covariates{B1: b1})
				if res.Status != OK {
					t.Errorf("%s T1 %g B1 %g: status %v", vfaName(m), t1, b1, res.Status)
					continue
				}
				for i, w := range []float64{t1, 1000 / t1, 4000} {
					if relErr(res.Values[i], w) > 1e-6 {
						t.Errorf("%s T1 %g B1 %g: %s = %.9g, want %.9g", vfaName(m), t1, b1, m.Outputs()[i].Name, res.Values[i], w)
					}
				}
				if !scalar.EqualWithinAbs(res.R2, 1, 1e-9) {
					t.Errorf("%s T1 %g: R² %g", vfaName(m), t1, res.R2)
				}
			}
		}
	}
}

// TestVFAAgreesWithScipy: 40 noisy voxels (Rician, half of them with B1 ≠
// 1 given as a covariate). The linear method matches scipy.stats.linregress
// (slope and intercept to 1e-9; the slope's standard error, carried to T1
// and R1, to 1e-6); NLLS (both solvers) matches scipy.optimize.curve_fit to 1e-4 and
// its standard errors to 1e-3. Reference: scipy 1.10.1, script
// testdata/gen/scipy_t1_refs.py.
func TestVFAAgreesWithScipy(t *testing.T) {
	ref := loadT1Refs(t)
	acq := faAcq(ref.VFA.FA, ref.VFA.TR)
	tr := ref.VFA.TR
	if len(ref.VFA.Cases) < 30 {
		t.Fatalf("only %d VFA reference cases", len(ref.VFA.Cases))
	}
	for _, m := range vfaModels() {
		f := t1Fitter(t, m, acq)
		res := NewResult(m)
		for i, c := range ref.VFA.Cases {
			f.Fit(res, c.Signal, Covariates{B1: c.B1})
			if m.method() == Linear {
				l := c.Linear
				if !l.OK {
					continue
				}
				if res.Status != OK || relErr(res.Values[0], l.T1) > 1e-9 || relErr(res.Values[2], l.M0) > 1e-9 {
					t.Errorf("linear case %d: status %v T1 %.10g M0 %.10g, linregress %.10g %.10g", i, res.Status, res.Values[0], res.Values[2], l.T1, l.M0)
					continue
				}
				lnm := math.Log(l.Slope)
				seT1 := l.SeSlope * tr / (l.Slope * lnm * lnm)
				seR1 := l.SeSlope / (l.Slope * tr) * 1000
				// linregress derives the slope's SE from 1 − r², which
				// loses about 8 digits when r → 1: compare to 1e-6.
				if relErr(res.SE[0], seT1) > 1e-6 || relErr(res.SE[1], seR1) > 1e-6 {
					t.Errorf("linear case %d: SE(T1) %.10g SE(R1) %.10g, from linregress %.10g %.10g", i, res.SE[0], res.SE[1], seT1, seR1)
				}
				continue
			}
			n := c.NLLS
			if !n.OK {
				continue
			}
			if res.Status != OK || relErr(res.Values[0], n.T1) > 1e-4 || relErr(res.Values[2], n.M0) > 1e-4 {
				t.Errorf("%s case %d: status %v T1 %.7g M0 %.7g, curve_fit %.7g %.7g", vfaName(m), i, res.Status, res.Values[0], res.Values[2], n.T1, n.M0)
				continue
			}
			if relErr(res.SE[0], n.SeT1) > 1e-3 || relErr(res.SE[2], n.SeM0) > 1e-3 {
				t.Errorf("%s case %d: SE(T1) %.6g SE(M0) %.6g, curve_fit %.6g %.6g", vfaName(m), i, res.SE[0], res.SE[2], n.SeT1, n.SeM0)
			}
		}
	}
}

// TestVFAGonumAgrees: gonum's optimizer and the dedicated LM agree to 1e-4
// on noisy voxels (Gaussian noise), with and without B1.
func TestVFAGonumAgrees(t *testing.T) {
	fa := []float64{2, 5, 10, 15, 20}
	ded := t1Fitter(t, &VariableFlipAngle{Estimator: NLLS}, faAcq(fa, 10))
	gon := t1Fitter(t, &VariableFlipAngle{Estimator: NLLS, Solver: Gonum}, faAcq(fa, 10))
	m := &VariableFlipAngle{}
	rd, rg := NewResult(m), NewResult(m)
	rng := rand.New(rand.NewPCG(31, 32))
	for v := 0; v < 50; v++ {
		t1 := 300 + 2000*rng.Float64()
		b1 := 1.0
		if v%2 == 1 {
			b1 = 0.8 + 0.4*rng.Float64()
		}
		y := addNoise(rng, spgr(fa, 10, 5000, t1, b1), 2)
		ded.Fit(rd, y, Covariates{B1: b1})
		gon.Fit(rg, y, Covariates{B1: b1})
		if rd.Status != OK || rg.Status != OK {
			t.Errorf("voxel %d: status %v / %v", v, rd.Status, rg.Status)
			continue
		}
		for i := range rd.Values {
			if relErr(rg.Values[i], rd.Values[i]) > 1e-4 {
				t.Errorf("voxel %d: %s gonum %.7g, dedicated %.7g", v, m.Outputs()[i].Name, rg.Values[i], rd.Values[i])
			}
		}
	}
}

// TestVFAJacobian checks the analytic Jacobian against finite differences
// (gonum diff/fd).
func TestVFAJacobian(t *testing.T) {
	fa := []float64{2, 5, 10, 15, 20, 40}
	c := &vfaCurve{tr: 15, sin: make([]float64, len(fa)), cos: make([]float64, len(fa))}
	for i, a := range fa {
		c.sin[i], c.cos[i] = math.Sincos(a * math.Pi / 180)
	}
	for _, p := range [][]float64{{4000, 1.0 / 1000}, {1, 1.0 / 150}, {250, 1.0 / 4000}} {
		checkJacobian(t, "vfaCurve", c, len(fa), p, 1e-6)
	}
}

// TestVFAFailures: failed voxels are NaN with a reason.
func TestVFAFailures(t *testing.T) {
	fa := []float64{3, 10, 20}
	nan := math.NaN()
	cases := []struct {
		name string
		m    *VariableFlipAngle
		y    []float64
		want Status
	}{
		{"one finite sample", &VariableFlipAngle{}, []float64{nan, 0.1, math.Inf(-1)}, TooFewPoints},
		{"one finite sample nlls", &VariableFlipAngle{Estimator: NLLS}, []float64{nan, 0.1, nan}, TooFewPoints},
		// S ∝ sin α: the slope is 1, no finite T1.
		{"slope 1", &VariableFlipAngle{}, []float64{math.Sin(3 * math.Pi / 180), math.Sin(10 * math.Pi / 180), math.Sin(20 * math.Pi / 180)}, OutOfBounds},
		{"all zero", &VariableFlipAngle{}, []float64{0, 0, 0}, NotConverged},
		{"T1 above MaxT", &VariableFlipAngle{MaxT: 500}, spgr(fa, 15, 1, 1000, 1), OutOfBounds},
		{"T1 above MaxT nlls", &VariableFlipAngle{Estimator: NLLS, MaxT: 500}, spgr(fa, 15, 1, 1000, 1), OutOfBounds},
	}
	for _, c := range cases {
		res := NewResult(c.m)
		res.Iter = 99
		t1Fitter(t, c.m, faAcq(fa, 15)).Fit(res, c.y, Covariates{})
		if res.Status != c.want {
			t.Errorf("%s: status %v, want %v", c.name, res.Status, c.want)
		}
		for i := range res.Values {
			if !math.IsNaN(res.Values[i]) || !math.IsNaN(res.SE[i]) {
				t.Errorf("%s: %s = %v ± %v, want NaN", c.name, c.m.Outputs()[i].Name, res.Values[i], res.SE[i])
			}
		}
		if !math.IsNaN(res.R2) || !math.IsNaN(res.RSS) || (c.m.method() == Linear && res.Iter != 0) {
			t.Errorf("%s: R² %v RSS %v Iter %d", c.name, res.R2, res.RSS, res.Iter)
		}
	}
	// Two angles give estimates but no standard errors.
	res := t1Fit(t, &VariableFlipAngle{}, faAcq([]float64{3, 17}, 15), spgr([]float64{3, 17}, 15, 1, 1000, 1), Covariates{})
	if res.Status != OK || !math.IsNaN(res.SE[0]) {
		t.Errorf("two angles: status %v SE(T1) %v, want OK and NaN", res.Status, res.SE[0])
	}
	// An unusable B1 (0, NaN, ±Inf, negative) is treated as 1.
	y := spgr(fa, 15, 1, 1000, 1)
	for _, b1 := range []float64{0, nan, math.Inf(1), -0.9} {
		res := t1Fit(t, &VariableFlipAngle{}, faAcq(fa, 15), y, Covariates{B1: b1})
		if res.Status != OK || relErr(res.Values[0], 1000) > 1e-9 {
			t.Errorf("B1 %v: status %v T1 %v, want 1000", b1, res.Status, res.Values[0])
		}
	}
}

// TestVFAProtocolErrors: bad protocols are refused with a clear error.
func TestVFAProtocolErrors(t *testing.T) {
	nan := math.NaN()
	good := faAcq([]float64{3, 10, 20}, 15)
	differ := faAcq([]float64{3, 10, 20}, 15)
	differ[2].RepetitionTime = 20
	noTR := faAcq([]float64{3, 10, 20}, 15)
	noTR[1].RepetitionTime = nan
	table := []struct {
		name string
		m    *VariableFlipAngle
		acq  []volume.Acquisition
		want string
	}{
		{"one volume", &VariableFlipAngle{}, faAcq([]float64{10}, 15), "1 volumes; the model needs at least 2 flip angles"},
		{"missing angle", &VariableFlipAngle{}, faAcq([]float64{3, nan, 20}, 15), "flip angle of volume 2 is missing or outside (0°, 180°)"},
		{"zero angle", &VariableFlipAngle{}, faAcq([]float64{0, 10, 20}, 15), "flip angle of volume 1 is missing or outside (0°, 180°)"},
		{"angle 180", &VariableFlipAngle{}, faAcq([]float64{3, 10, 180}, 15), "flip angle of volume 3 is missing or outside (0°, 180°)"},
		{"missing TR", &VariableFlipAngle{}, noTR, "repetition time of volume 2 is missing or invalid"},
		{"zero TR", &VariableFlipAngle{}, faAcq([]float64{3, 10}, 0), "repetition time of volume 1 is missing or invalid"},
		{"differing TR", &VariableFlipAngle{}, differ, "repetition time differs between volumes (15 ms in volume 1, 20 ms in volume 3)"},
		// A sidecar TR of 15 written in ms where BIDS wants seconds
		// (0.015) reads as 15000 ms.
		{"TR in ms read as s", &VariableFlipAngle{}, faAcq([]float64{3, 10, 20}, 15000), "repetition time 15000 ms of volume 1 is implausible for t1-vfa, a spoiled gradient echo (TR of a few to about 100 ms; refused above 1000 ms): was 15 ms meant"},
		{"one distinct angle", &VariableFlipAngle{}, faAcq([]float64{10, 10, 10}, 15), "all 3 volumes have flip angle 10°; the model needs at least 2 distinct angles"},
		{"unknown method", &VariableFlipAngle{Estimator: RDNLS}, good, `model t1-vfa has no method "rdnls" (linear, nlls)`},
	}
	for _, c := range table {
		_, err := c.m.NewFitter(c.acq)
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		if !errors.Is(err, ErrProtocol) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %q, want ErrProtocol with %q", c.name, err, c.want)
		}
	}
	// Repeated angles are fine when at least two differ.
	if _, err := (&VariableFlipAngle{}).NewFitter(faAcq([]float64{3, 3, 17, 17}, 15)); err != nil {
		t.Errorf("repeated angles: %v", err)
	}
}

// TestVFANoAllocs: no allocation per voxel for every method, with and
// without B1, with a dropped sample.
func TestVFANoAllocs(t *testing.T) {
	fa := []float64{2, 5, 10, 15, 20}
	y := spgr(fa, 15, 3000, 900, 1)
	yn := append([]float64(nil), y...)
	yn[1] = math.NaN()
	for _, m := range vfaModels()[:2] {
		f := t1Fitter(t, m, faAcq(fa, 15))
		res := NewResult(m)
		for _, v := range [][]float64{y, yn} {
			for _, b1 := range []float64{1, 0.93} {
				if a := testing.AllocsPerRun(100, func() { f.Fit(res, v, Covariates{B1: b1}) }); a != 0 {
					t.Errorf("%s B1 %g: %v allocations per voxel", vfaName(m), b1, a)
				}
			}
		}
	}
}

var vfaBenchFA = []float64{2, 5, 10, 15, 20}

// vfaVoxels returns n noisy voxels (Rician, SNR 100 at the peak) and B1
// values around 1 (0.8…1.2) for the B1 benchmarks.
func vfaVoxels(n int) ([][]float64, []Covariates) {
	rng := rand.New(rand.NewPCG(41, 42))
	out := make([][]float64, n)
	cov := make([]Covariates, n)
	for k := range out {
		t1 := 300 + 2200*rng.Float64()
		b1 := 0.8 + 0.4*rng.Float64()
		s := spgr(vfaBenchFA, 15, 5000, t1, b1)
		for i := range s {
			s[i] = Rician(rng, s[i], 2)
		}
		out[k], cov[k] = s, Covariates{B1: b1}
	}
	return out, cov
}

func BenchmarkVFALinear(b *testing.B) {
	v, _ := vfaVoxels(1024)
	benchT1(b, &VariableFlipAngle{}, faAcq(vfaBenchFA, 15), v, nil)
}

func BenchmarkVFALinearB1(b *testing.B) {
	v, c := vfaVoxels(1024)
	benchT1(b, &VariableFlipAngle{}, faAcq(vfaBenchFA, 15), v, c)
}

func BenchmarkVFANLLS(b *testing.B) {
	v, _ := vfaVoxels(1024)
	benchT1(b, &VariableFlipAngle{Estimator: NLLS}, faAcq(vfaBenchFA, 15), v, nil)
}

func BenchmarkVFANLLSB1(b *testing.B) {
	v, c := vfaVoxels(1024)
	benchT1(b, &VariableFlipAngle{Estimator: NLLS}, faAcq(vfaBenchFA, 15), v, c)
}
