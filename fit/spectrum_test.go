package fit

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// nnlsGram returns G = AᵀA and h = Aᵀb of a row-major rows×cols A.
func nnlsGram(a, b []float64, rows, cols int) (g, h []float64) {
	g = make([]float64, cols*cols)
	gram(g, a, rows, cols)
	h = make([]float64, cols)
	for i := 0; i < rows; i++ {
		for j := 0; j < cols; j++ {
			h[j] += a[i*cols+j] * b[i]
		}
	}
	return g, h
}

// TestNNLSAgreesWithScipy: the Lawson–Hanson solver on the normal
// equations against scipy.optimize.nnls (scipy 1.10.1, Lawson–Hanson with
// Householder QR; testdata/gen/nnls_refs.py), including the noiseless case
// of check-values §2.3 (basis {10, 20, 40, 80, 160} ms, s = [0, 0.15, 0,
// 0.85, 0]). Tolerances: 1e-9 on the well-conditioned problems; on the
// unregularised exponential bases (condition number of the active columns
// up to ~1e4, squared by the normal equations) 1e-6 relative on the
// residual norm and 2e-4 on x relative to its largest entry.
func TestNNLSAgreesWithScipy(t *testing.T) {
	raw, err := os.ReadFile("../testdata/reference/scipy_nnls.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Cases []struct {
			Name       string
			Rows, Cols int
			A, B, X    []float64
			Rnorm      float64
		} `json:"cases"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil || len(ref.Cases) == 0 {
		t.Fatalf("scipy_nnls.json: %v", err)
	}
	for _, c := range ref.Cases {
		g, h := nnlsGram(c.A, c.B, c.Rows, c.Cols)
		s := newNNLS(c.Cols)
		if _, ok := s.solve(g, h, false); !ok {
			t.Errorf("%s: not converged", c.Name)
			continue
		}
		var rn float64
		for i := 0; i < c.Rows; i++ {
			v := -c.B[i]
			for j := 0; j < c.Cols; j++ {
				v += c.A[i*c.Cols+j] * s.x[j]
			}
			rn += v * v
		}
		rn = math.Sqrt(rn)
		var xmax, dx float64
		for j, v := range c.X {
			xmax = math.Max(xmax, math.Abs(v))
			dx = math.Max(dx, math.Abs(s.x[j]-v))
		}
		tolX, tolR := 1e-9, 1e-9
		if strings.HasPrefix(c.Name, "two-pool-") && !strings.HasPrefix(c.Name, "two-pool-reg") {
			tolX, tolR = 2e-4, 1e-6
		}
		t.Logf("%-17s |Δx|/max x = %.2g, residual norm %.10g (scipy %.10g)", c.Name, dx/xmax, rn, c.Rnorm)
		var bn float64
		for _, v := range c.B {
			bn += v * v
		}
		// The residual of the normal equations is good to about 1e-13·‖b‖.
		if dx > tolX*xmax || math.Abs(rn-c.Rnorm) > tolR*c.Rnorm+1e-12*math.Sqrt(bn) {
			t.Errorf("%s: x = %v\nscipy %v", c.Name, s.x, c.X)
		}
		for j, v := range s.x {
			if v < 0 {
				t.Errorf("%s: x[%d] = %g < 0", c.Name, j, v)
			}
		}
	}
}

// TestNNLSKuhnTucker: on random problems the solution satisfies the
// optimality conditions: x ≥ 0, the gradient w = Aᵀ(b − Ax) is zero where
// x > 0 and not positive where x = 0 (Lawson & Hanson 1974, ch. 23), and a
// warm start gives the same solution.
func TestNNLSKuhnTucker(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for trial := 0; trial < 200; trial++ {
		rows, cols := 5+rng.IntN(30), 2+rng.IntN(20)
		a := make([]float64, rows*cols)
		b := make([]float64, rows)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		for i := range b {
			b[i] = rng.NormFloat64()
		}
		g, h := nnlsGram(a, b, rows, cols)
		s := newNNLS(cols)
		if _, ok := s.solve(g, h, false); !ok {
			t.Fatalf("trial %d: not converged", trial)
		}
		x1 := append([]float64(nil), s.x...)
		var scale float64
		for _, v := range h {
			scale = math.Max(scale, math.Abs(v))
		}
		for j := 0; j < cols; j++ {
			w := h[j]
			for k := 0; k < cols; k++ {
				w -= g[j*cols+k] * s.x[k]
			}
			if s.x[j] < 0 || (s.x[j] > 0 && math.Abs(w) > 1e-9*scale) || (s.x[j] == 0 && w > 1e-9*scale) {
				t.Fatalf("trial %d: x[%d] = %g, w = %g", trial, j, s.x[j], w)
			}
		}
		// Warm start from a perturbed support.
		for j := range s.x {
			if rng.Float64() < 0.3 {
				s.x[j] = 1
			}
		}
		s.solve(g, h, true)
		for j := range x1 {
			if math.Abs(s.x[j]-x1[j]) > 1e-9*(1+math.Abs(x1[j])) {
				t.Fatalf("trial %d: warm start x[%d] = %g, cold %g", trial, j, s.x[j], x1[j])
			}
		}
	}
}

// twoPool is f·e^(−t/20) + (1−f)·e^(−t/80) at t = 10, 20, … (n echoes).
func twoPool(n int, f float64) []float64 {
	y := make([]float64, n)
	for i := range y {
		t := 10 * float64(i+1)
		y[i] = f*math.Exp(-t/20) + (1-f)*math.Exp(-t/80)
	}
	return y
}

// TestSpectrumNoiseless: check-values §2.3 noise-free two-pool decay: the
// MWF (T2 < 40 ms) is 15 % within 0.5 percentage points (20 and 80 ms are
// not on the basis grid, so the spectrum represents each pool by its
// neighbours and the small misfit that leaves is regularised), and the
// window means sit at 20 and 80 ms within 5 %.
func TestSpectrumNoiseless(t *testing.T) {
	m := &Spectrum{}
	res := NewResult(m)
	mustFitter(t, m, echoes(spacedTE(32, 10, 10))).Fit(res, twoPool(32, 0.15), Covariates{})
	if res.Status != OK || math.Abs(res.Values[0]-15) > 0.5 || relErr(res.Values[1], 20) > 0.05 || relErr(res.Values[2], 80) > 0.05 || relErr(res.Values[3], 1) > 1e-3 {
		t.Errorf("status %v values %v", res.Status, res.Values)
	}
}

// TestSpectrumTwoPool: two pools (20 and 80 ms, short fraction 0.15), SNR
// 200 (σ = M0/200, Rician), 32 echoes at ESP 10 ms: the Monte-Carlo mean
// MWF is within 0.03 (3 percentage points) of 0.15.
func TestSpectrumTwoPool(t *testing.T) {
	if testing.Short() {
		t.Skip("Monte Carlo")
	}
	const trials = 300
	m := &Spectrum{}
	f := mustFitter(t, m, echoes(spacedTE(32, 10, 10)))
	res := NewResult(m)
	rng := rand.New(rand.NewPCG(200, 15))
	clean := twoPool(32, 0.15)
	y := make([]float64, 32)
	var sm, sm2, ss, sl, n float64
	for k := 0; k < trials; k++ {
		for i, v := range clean {
			y[i] = Rician(rng, v, 1.0/200)
		}
		f.Fit(res, y, Covariates{})
		if res.Status != OK {
			continue
		}
		sm += res.Values[0]
		sm2 += res.Values[0] * res.Values[0]
		if !math.IsNaN(res.Values[1]) {
			ss += math.Log(res.Values[1])
		}
		sl += math.Log(res.Values[2])
		n++
	}
	mean := sm / n / 100
	sd := math.Sqrt((sm2-sm*sm/n)/(n-1)) / 100
	t.Logf("MWF mean %.4f (truth 0.15, error %+.4f), SD %.4f; T2short %.1f ms, T2long %.1f ms (geometric means over trials); %v of %d ok",
		mean, mean-0.15, sd, math.Exp(ss/n), math.Exp(sl/n), n, trials)
	if n < trials*0.99 || math.Abs(mean-0.15) > 0.03 {
		t.Errorf("MWF mean %.4f, want 0.15 ± 0.03", mean)
	}
}

// TestSpectrumEPGBasis: a two-pool CPMG train with a 150° refocusing angle
// (stimulated echoes): with EPGBasis the angle is found (Prasloski et al.
// 2012) and the MWF is right, where the exponential basis is misled.
func TestSpectrumEPGBasis(t *testing.T) {
	e := NewEPG(32)
	a := e.CPMG(nil, 150, 10, 1000, 20)
	b := e.CPMG(nil, 150, 10, 1000, 80)
	y := make([]float64, 32)
	for i := range y {
		y[i] = 0.15*a[i] + 0.85*b[i]
	}
	rng := rand.New(rand.NewPCG(1, 2))
	for i := range y {
		y[i] = Rician(rng, y[i], 1.0/1000)
	}
	te := echoes(spacedTE(32, 10, 10))
	m := &Spectrum{EPGBasis: true}
	res := NewResult(m)
	mustFitter(t, m, te).Fit(res, y, Covariates{})
	exp := &Spectrum{}
	re := NewResult(exp)
	mustFitter(t, exp, te).Fit(re, y, Covariates{})
	t.Logf("α 150°, SNR 1000: EPG basis MWF %.2f %%, angle %.2f°; exponential basis MWF %.2f %%", res.Values[0], res.Values[4], re.Values[0])
	if res.Status != OK || math.Abs(res.Values[0]-15) > 2 || math.Abs(res.Values[4]-150) > 3 {
		t.Errorf("EPG basis: status %v values %v", res.Status, res.Values)
	}
}

// TestSpectra: the per-voxel spectra for region analyses; a voxel with a
// NaN sample gets a NaN row.
func TestSpectra(t *testing.T) {
	te := spacedTE(32, 10, 10)
	im := volume.New(3, 1, 1, 32)
	im.Acq = echoes(te)
	y := twoPool(32, 0.15)
	for k := range te {
		for v := 0; v < 3; v++ {
			im.Data[k*3+v] = float32(y[k])
		}
	}
	im.Data[5*3+2] = float32(math.NaN())
	m := &Spectrum{}
	sp, err := m.Spectra(nil, im, []int{0, 2})
	if err != nil {
		t.Fatal(err)
	}
	basis := m.T2Basis()
	var short, tot float64
	for j, v := range sp[0] {
		tot += v
		if basis[j] < 40 {
			short += v
		}
	}
	if len(sp) != 2 || len(sp[0]) != len(basis) || math.Abs(short/tot-0.15) > 5e-3 || !math.IsNaN(sp[1][0]) {
		t.Errorf("spectra %v", sp)
	}
	if _, err := m.Spectra(nil, im, []int{3}); err == nil {
		t.Error("index outside the image accepted")
	}
}

func TestSpectrumAllocs(t *testing.T) {
	for _, m := range []*Spectrum{{}, {EPGBasis: true}, {Chi2Factor: 1}} {
		f := mustFitter(t, m, echoes(spacedTE(32, 10, 10)))
		res := NewResult(m)
		rng := rand.New(rand.NewPCG(1, 1))
		y := twoPool(32, 0.2)
		for i := range y {
			y[i] = Rician(rng, y[i], 0.005)
		}
		if n := testing.AllocsPerRun(10, func() { f.Fit(res, y, Covariates{}) }); n != 0 {
			t.Errorf("%+v: %v allocations per voxel", m, n)
		}
	}
}

// spectrumSeries makes a series of 32 echoes (ESP 10 ms) of two-pool
// voxels (fraction 0.05–0.25), Rician noise σ = M0/200.
func spectrumSeries(nx, ny, nz int) *volume.Image {
	te := spacedTE(32, 10, 10)
	im := volume.New(nx, ny, nz, 32)
	im.Acq = echoes(te)
	rng := rand.New(rand.NewPCG(4, 5))
	nv := im.Voxels()
	for v := 0; v < nv; v++ {
		y := twoPool(32, 0.05+0.2*float64(v%17)/16)
		for k := range te {
			im.Data[k*nv+v] = float32(Rician(rng, 1000*y[k], 5))
		}
	}
	return im
}

var specBench *volume.Image

// BenchmarkRunT2Spectrum32: 4096 voxels of 32 echoes through Run, 2
// workers, exponential basis of 60 T2 values with the χ² search.
func BenchmarkRunT2Spectrum32(b *testing.B) {
	if specBench == nil {
		specBench = spectrumSeries(64, 64, 1)
	}
	benchmarkRun(b, &Spectrum{}, specBench, 2)
}

// BenchmarkRunT2SpectrumEPG32: the same with the EPG basis and the angle
// search.
func BenchmarkRunT2SpectrumEPG32(b *testing.B) {
	if specBench == nil {
		specBench = spectrumSeries(64, 64, 1)
	}
	benchmarkRun(b, &Spectrum{EPGBasis: true}, specBench, 2)
}
