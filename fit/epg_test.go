package fit

import (
	"encoding/json"
	"math"
	"math/cmplx"
	"os"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
)

// complexCPMG is a direct complex implementation of the EPG rules of
// check-values §1.2 (Weigel 2015, Eq. 15 transition matrix; relaxation with
// T1 regrowth of Z₀; unit shift with F₀ = conj(F*₀)), with no use of the
// symmetries epg.go relies on. It returns the echoes F₀ (complex) so the
// test can check that they are real.
func complexCPMG(n int, alpha, esp, t1, t2 float64) []complex128 {
	K := 2*n + 2
	fp := make([]complex128, K+1) // F_k, k ≥ 0
	fm := make([]complex128, K+1) // F*_−k, k ≥ 0
	z := make([]complex128, K+1)
	pulse := func(a, phi float64) {
		c2 := complex(math.Cos(a/2)*math.Cos(a/2), 0)
		s2 := complex(math.Sin(a/2)*math.Sin(a/2), 0)
		sa := complex(math.Sin(a), 0)
		ca := complex(math.Cos(a), 0)
		ep := cmplx.Exp(complex(0, phi))
		em := cmplx.Exp(complex(0, -phi))
		for k := 0; k <= K; k++ {
			a1, b1, c1 := fp[k], fm[k], z[k]
			fp[k] = c2*a1 + ep*ep*s2*b1 - 1i*ep*sa*c1
			fm[k] = em*em*s2*a1 + c2*b1 + 1i*em*sa*c1
			z[k] = -0.5i*em*sa*a1 + 0.5i*ep*sa*b1 + ca*c1
		}
	}
	tau := esp / 2
	e1 := complex(math.Exp(-tau/t1), 0)
	e2 := complex(math.Exp(-tau/t2), 0)
	relaxShift := func() {
		for k := 0; k <= K; k++ {
			fp[k] *= e2
			fm[k] *= e2
			z[k] *= e1
		}
		z[0] += 1 - e1
		copy(fp[1:], fp[:K])
		copy(fm[:K], fm[1:])
		fm[K] = 0
		fp[0] = cmplx.Conj(fm[0])
	}
	z[0] = 1
	pulse(math.Pi/2, math.Pi/2)
	out := make([]complex128, n)
	for e := 0; e < n; e++ {
		relaxShift()
		pulse(alpha*math.Pi/180, 0)
		relaxShift()
		out[e] = fp[0]
	}
	return out
}

var inf = math.Inf(1)

// TestEPG180Exponential: with ideal 180° refocusing the CPMG train is
// exp(−k·ESP/T2) exactly (Meiboom & Gill 1958; check-values §2.1).
func TestEPG180Exponential(t *testing.T) {
	for _, c := range []struct{ esp, t1, t2 float64 }{{10, 1000, 100}, {5, 300, 20}, {12, 1e4, 2000}, {10, inf, 60}} {
		e := NewEPG(48)
		got := e.CPMG(nil, 180, c.esp, c.t1, c.t2)
		for k, v := range got {
			want := math.Exp(-float64(k+1) * c.esp / c.t2)
			if math.Abs(v-want) > 1e-12 {
				t.Errorf("%+v echo %d: %.15g, want %.15g", c, k+1, v, want)
			}
		}
	}
}

// TestEPGCheckValues: echo amplitudes of check-values §2.1 [C] (computed
// with the §1.2 matrices; the method is that of Hennig 1988 and Weigel
// 2015), to the 6 decimals given, without and with relaxation (ESP 10 ms,
// T1 1000 ms, T2 100 ms), and the closed forms of echoes 1 and 2.
func TestEPGCheckValues(t *testing.T) {
	noRelax := map[float64][]float64{
		150: {0.933013, 0.995513, 0.941386, 0.984355, 0.953909, 0.971975, 0.964786, 0.963611, 0.970100, 0.961370},
		120: {0.750000, 0.937500, 0.843750, 0.855469, 0.884766, 0.856934, 0.862061, 0.875290, 0.860847, 0.863863},
		90:  {0.500000, 0.750000, 0.750000, 0.687500, 0.687500, 0.718750, 0.718750, 0.699219, 0.699219, 0.712891},
		60:  {0.250000, 0.437500, 0.531250, 0.542969, 0.513672, 0.485840, 0.480713, 0.493942, 0.508385, 0.511400},
		180: {1, 1, 1, 1, 1, 1, 1, 1, 1, 1},
	}
	relax := map[float64][]float64{
		150: {0.844225, 0.824695, 0.697853, 0.674329, 0.581156, 0.548900, 0.484553, 0.447668, 0.401950, 0.367618},
		120: {0.678628, 0.796474, 0.636915, 0.606876, 0.563645, 0.508612, 0.457692, 0.438324, 0.381906, 0.361844},
		180: {0.904837, 0.818731, 0.740818, 0.670320, 0.606531, 0.548812, 0.496585, 0.449329},
	}
	e := NewEPG(10)
	for a, want := range noRelax {
		got := e.CPMG(nil, a, 10, inf, inf)
		for k, w := range want {
			if math.Abs(got[k]-w) > 5e-7 {
				t.Errorf("α %g, no relaxation, echo %d: %.7f, want %.6f", a, k+1, got[k], w)
			}
		}
	}
	for a, want := range relax {
		got := e.CPMG(nil, a, 10, 1000, 100)
		for k, w := range want {
			if math.Abs(got[k]-w) > 5e-7 {
				t.Errorf("α %g, ESP 10, T1 1000, T2 100, echo %d: %.7f, want %.6f", a, k+1, got[k], w)
			}
		}
	}
	// Closed forms [check-values §2.1, C]: echo 1 = sin²(α/2)·E2, echo 2 =
	// sin⁴(α/2)·E2² + ½·sin²α·E1·E2, E1 = e^(−ESP/T1), E2 = e^(−ESP/T2).
	for _, a := range []float64{30, 60, 90, 120, 150, 170, 180} {
		for _, r := range []struct{ esp, t1, t2 float64 }{{10, 1000, 100}, {6, 400, 30}, {10, inf, inf}} {
			got := e.CPMG(nil, a, r.esp, r.t1, r.t2)
			ar := a * math.Pi / 180
			s2 := math.Pow(math.Sin(ar/2), 2)
			E1, E2 := math.Exp(-r.esp/r.t1), math.Exp(-r.esp/r.t2)
			w1 := s2 * E2
			w2 := s2*s2*E2*E2 + 0.5*math.Pow(math.Sin(ar), 2)*E1*E2
			if math.Abs(got[0]-w1) > 1e-12 || math.Abs(got[1]-w2) > 1e-12 {
				t.Errorf("α %g %+v: echoes 1, 2 = %.15g, %.15g; closed forms %.15g, %.15g", a, r, got[0], got[1], w1, w2)
			}
		}
	}
}

// TestEPGMatchesComplex: the real, pruned recursion of epg.go equals a
// direct complex implementation of the same rules, T1 regrowth included,
// to 1e-12, and the complex echoes are real (imaginary part below 1e-14):
// the symmetry argument of the EPG type comment, checked.
func TestEPGMatchesComplex(t *testing.T) {
	for _, c := range []struct {
		n                  int
		alpha, esp, t1, t2 float64
	}{{32, 150, 10, 1000, 100}, {32, 120, 10, 300, 20}, {17, 60, 7, 800, 400}, {40, 175, 5, 2000, 80}, {8, 90, 10, 50, 40}} {
		want := complexCPMG(c.n, c.alpha, c.esp, c.t1, c.t2)
		got := NewEPG(c.n).CPMG(nil, c.alpha, c.esp, c.t1, c.t2)
		for k, w := range want {
			if math.Abs(imag(w)) > 1e-14 {
				t.Errorf("%+v echo %d: imaginary part %g", c, k+1, imag(w))
			}
			if math.Abs(got[k]-cmplx.Abs(w)) > 1e-12 {
				t.Errorf("%+v echo %d: %.15g, complex EPG %.15g", c, k+1, got[k], cmplx.Abs(w))
			}
		}
	}
}

// TestEPGIsochromat compares with an independent isochromat Bloch
// simulation (3600 isochromats over 2π dephasing per half interval, T1
// regrowth included; testdata/gen/epg_refs.py, numpy 1.24). Uniform
// dephasing makes the discrete isochromat average exact for orders below
// the isochromat count, so the agreement is to rounding; the test asks
// for 1e-9 (the issue asked for 1e-6).
func TestEPGIsochromat(t *testing.T) {
	raw, err := os.ReadFile("../testdata/reference/epg_isochromat.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Cases []struct {
			Alpha  float64   `json:"alpha_deg"`
			ESP    float64   `json:"esp_ms"`
			T1     *float64  `json:"t1_ms"`
			T2     *float64  `json:"t2_ms"`
			Echoes []float64 `json:"echoes"`
		} `json:"cases"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil || len(ref.Cases) == 0 {
		t.Fatalf("epg_isochromat.json: %v", err)
	}
	var worst float64
	for _, c := range ref.Cases {
		t1, t2 := inf, inf
		if c.T1 != nil {
			t1 = *c.T1
		}
		if c.T2 != nil {
			t2 = *c.T2
		}
		got := NewEPG(len(c.Echoes)).CPMG(nil, c.Alpha, c.ESP, t1, t2)
		for k, w := range c.Echoes {
			d := math.Abs(got[k] - w)
			worst = math.Max(worst, d)
			if d > 1e-9 {
				t.Errorf("α %g ESP %g T1 %g T2 %g echo %d: %.12g, isochromats %.12g", c.Alpha, c.ESP, t1, t2, k+1, got[k], w)
			}
		}
	}
	t.Logf("largest difference from the isochromat simulation: %.2g", worst)
}

// TestEPGDerivatives: the forward-mode derivatives of CPMGDeriv against
// central finite differences.
func TestEPGDerivatives(t *testing.T) {
	const n = 32
	e := NewEPG(n)
	s, dT, dA := make([]float64, n), make([]float64, n), make([]float64, n)
	for _, c := range []struct{ alpha, esp, t1, t2 float64 }{{150, 10, 1000, 100}, {120, 10, 1000, 20}, {100, 7, 500, 250}, {179, 10, 1000, 60}} {
		e.CPMGDeriv(s, dT, dA, c.alpha, c.esp, c.t1, c.t2)
		base := e.CPMG(nil, c.alpha, c.esp, c.t1, c.t2)
		const h = 1e-5
		p := e.CPMG(nil, c.alpha, c.esp, c.t1, c.t2*(1+h))
		m := e.CPMG(nil, c.alpha, c.esp, c.t1, c.t2*(1-h))
		pa := e.CPMG(nil, c.alpha+h*100, c.esp, c.t1, c.t2)
		ma := e.CPMG(nil, c.alpha-h*100, c.esp, c.t1, c.t2)
		for k := 0; k < n; k++ {
			if s[k] != base[k] {
				t.Fatalf("%+v echo %d: CPMGDeriv value %g != CPMG %g", c, k+1, s[k], base[k])
			}
			numT := (p[k] - m[k]) / (2 * h * c.t2)
			numA := (pa[k] - ma[k]) / (2 * h * 100)
			if !scalar.EqualWithinAbsOrRel(dT[k], numT, 1e-8, 1e-6) || !scalar.EqualWithinAbsOrRel(dA[k], numA, 1e-8, 1e-6) {
				t.Errorf("%+v echo %d: ∂/∂T2 %g (fd %g), ∂/∂α %g (fd %g)", c, k+1, dT[k], numT, dA[k], numA)
			}
		}
	}
}

// TestEPGFold: the train is symmetric about 180° (α and 360° − α give the
// same echoes), the reason B1 is folded (StimulatedEcho).
func TestEPGFold(t *testing.T) {
	e := NewEPG(32)
	for _, a := range []float64{120, 150, 170} {
		x := e.CPMG(nil, a, 10, 1000, 80)
		y := e.CPMG(nil, 360-a, 10, 1000, 80)
		for k := range x {
			if math.Abs(x[k]-y[k]) > 1e-13 {
				t.Fatalf("α %g echo %d: %g vs %g at 360−α", a, k+1, x[k], y[k])
			}
		}
	}
}

func TestEPGAllocs(t *testing.T) {
	e := NewEPG(32)
	dst, dT, dA := make([]float64, 32), make([]float64, 32), make([]float64, 32)
	if n := testing.AllocsPerRun(50, func() {
		e.CPMG(dst, 150, 10, 1000, 100)
		e.CPMGDeriv(dst, dT, dA, 150, 10, 1000, 100)
	}); n != 0 {
		t.Errorf("%v allocations per train", n)
	}
}

func BenchmarkEPG32(b *testing.B) {
	e := NewEPG(32)
	dst := make([]float64, 32)
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		e.CPMG(dst, 150, 10, 1000, 100)
	}
	sinkEPG = dst[31]
}

func BenchmarkEPGDeriv32(b *testing.B) {
	e := NewEPG(32)
	dst, dT, dA := make([]float64, 32), make([]float64, 32), make([]float64, 32)
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		e.CPMGDeriv(dst, dT, dA, 150, 10, 1000, 100)
	}
	sinkEPG = dst[31]
}

var sinkEPG float64
