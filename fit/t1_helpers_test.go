package fit

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"

	"github.com/tauvox/tauvox/volume"
)

// Helpers shared by the T1 model tests (inversion_test.go, vfa_test.go,
// saturation_test.go). The signal functions are written from the equations
// of check-values §1.1 independently of the models' own curves, and checked
// against the §2.4 values in the model tests.

// tiAcq returns a protocol with the given inversion times.
func tiAcq(ti []float64) []volume.Acquisition {
	acq := make([]volume.Acquisition, len(ti))
	for i, t := range ti {
		acq[i] = volume.Unknown()
		acq[i].InversionTime = t
		acq[i].RepetitionTime = 5000
	}
	return acq
}

// faAcq returns a protocol with the given flip angles and one TR.
func faAcq(fa []float64, tr float64) []volume.Acquisition {
	acq := make([]volume.Acquisition, len(fa))
	for i, a := range fa {
		acq[i] = volume.Unknown()
		acq[i].FlipAngle = a
		acq[i].RepetitionTime = tr
	}
	return acq
}

// trAcq returns a protocol with the given repetition times.
func trAcq(tr []float64) []volume.Acquisition {
	acq := make([]volume.Acquisition, len(tr))
	for i, t := range tr {
		acq[i] = volume.Unknown()
		acq[i].RepetitionTime = t
	}
	return acq
}

// irMag is |a + b·exp(−TI/T1)| (Barral et al. 2010).
func irMag(ti []float64, a, b, t1 float64) []float64 {
	y := make([]float64, len(ti))
	for i, t := range ti {
		y[i] = math.Abs(a + b*math.Exp(-t/t1))
	}
	return y
}

// spgr is the spoiled gradient-echo signal at effective angles b1·fa
// (degrees), check-values §1.1.
func spgr(fa []float64, tr, m0, t1, b1 float64) []float64 {
	e1 := math.Exp(-tr / t1)
	y := make([]float64, len(fa))
	for i, a := range fa {
		al := b1 * a * math.Pi / 180
		y[i] = m0 * math.Sin(al) * (1 - e1) / (1 - e1*math.Cos(al))
	}
	return y
}

// srSignal is M0·(1 − k·exp(−TR/T1)).
func srSignal(tr []float64, m0, k, t1 float64) []float64 {
	y := make([]float64, len(tr))
	for i, t := range tr {
		y[i] = m0 * (1 - k*math.Exp(-t/t1))
	}
	return y
}

// t1Fitter makes a fitter or fails the test.
func t1Fitter(t testing.TB, m Model, acq []volume.Acquisition) Fitter {
	t.Helper()
	f, err := m.NewFitter(acq)
	if err != nil {
		t.Fatalf("%s/%s: %v", m.Name(), m.Method(), err)
	}
	return f
}

// t1Fit fits one voxel with a fresh fitter and result.
func t1Fit(t testing.TB, m Model, acq []volume.Acquisition, y []float64, c Covariates) *Result {
	t.Helper()
	res := NewResult(m)
	t1Fitter(t, m, acq).Fit(res, y, c)
	return res
}

// relErr is |got − want|/|want|.
func relErr(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

// checkJacobian compares c's analytic Jacobian at p with central finite
// differences (gonum diff/fd), to rel relative to the largest entry of its
// column. The differences are taken in parameters scaled by p (x = 1), so
// the step suits parameters of any magnitude.
func checkJacobian(t *testing.T, name string, c curve, n int, p []float64, rel float64) {
	t.Helper()
	np := len(p)
	f := make([]float64, n)
	jac := make([]float64, n*np)
	c.eval(f, jac, p)
	num := mat.NewDense(n, np, nil)
	q := make([]float64, np)
	x := make([]float64, np)
	for k := range x {
		x[k] = 1
	}
	fd.Jacobian(num, func(y, x []float64) {
		for k := range x {
			q[k] = x[k] * p[k]
		}
		c.eval(y, nil, q)
	}, x, &fd.JacobianSettings{Formula: fd.Central})
	for k := 0; k < np; k++ {
		var scale float64
		for i := 0; i < n; i++ {
			scale = math.Max(scale, math.Abs(jac[i*np+k]))
		}
		for i := 0; i < n; i++ {
			if d := math.Abs(jac[i*np+k] - num.At(i, k)/p[k]); d > rel*scale {
				t.Errorf("%s: ∂f%d/∂p%d = %g, finite differences %g", name, i, k, jac[i*np+k], num.At(i, k)/p[k])
			}
		}
	}
}

// addNoise returns y plus Gaussian noise of SD sigma.
func addNoise(rng *rand.Rand, y []float64, sigma float64) []float64 {
	out := make([]float64, len(y))
	for i, v := range y {
		out[i] = v + sigma*rng.NormFloat64()
	}
	return out
}

// loadT1Refs reads the scipy reference fits (scipy.optimize.curve_fit and
// scipy.stats.linregress, scipy 1.10.1, script
// testdata/gen/scipy_t1_refs.py).
func loadT1Refs(t *testing.T) *t1Refs {
	t.Helper()
	raw, err := os.ReadFile("../testdata/reference/scipy_t1.json")
	if err != nil {
		t.Fatal(err)
	}
	var r t1Refs
	if err := json.Unmarshal(raw, &r); err != nil {
		t.Fatalf("scipy_t1.json: %v", err)
	}
	return &r
}

type t1RefCase struct {
	Signal []float64 `json:"signal"`
	OK     bool      `json:"ok"`
	T1     float64   `json:"T1"`
	M0     float64   `json:"M0"`
	InvEff float64   `json:"InvEff"`
	SatEff float64   `json:"SatEff"`
	SeT1   float64   `json:"se_T1"`
	SeM0   float64   `json:"se_M0"`
	RSS    float64   `json:"rss"`
}

type t1Refs struct {
	IR struct {
		TI    []float64   `json:"ti_ms"`
		Cases []t1RefCase `json:"cases"`
	} `json:"ir"`
	VFA struct {
		FA    []float64 `json:"flip_angle_deg"`
		TR    float64   `json:"tr_ms"`
		Cases []struct {
			Signal []float64 `json:"signal"`
			B1     float64   `json:"b1"`
			Linear struct {
				OK          bool    `json:"ok"`
				Slope       float64 `json:"slope"`
				Intercept   float64 `json:"intercept"`
				SeSlope     float64 `json:"se_slope"`
				SeIntercept float64 `json:"se_intercept"`
				T1          float64 `json:"T1"`
				M0          float64 `json:"M0"`
			} `json:"linear"`
			NLLS t1RefCase `json:"nlls"`
		} `json:"cases"`
	} `json:"vfa"`
	SR struct {
		TR    []float64   `json:"tr_ms"`
		Cases []t1RefCase `json:"cases"`
	} `json:"sr"`
	SREff struct {
		TR    []float64   `json:"tr_ms"`
		Cases []t1RefCase `json:"cases"`
	} `json:"sr_eff"`
}

// benchT1 fits pre-generated voxels one after another on one core; each
// op is one voxel.
func benchT1(b *testing.B, m Model, acq []volume.Acquisition, voxels [][]float64, cov []Covariates) {
	f, err := m.NewFitter(acq)
	if err != nil {
		b.Fatal(err)
	}
	res := NewResult(m)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		k := i % len(voxels)
		var c Covariates
		if cov != nil {
			c = cov[k]
		}
		f.Fit(res, voxels[k], c)
	}
	sinkT1 = res.Values[0]
}

var sinkT1 float64
