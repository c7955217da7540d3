package fit

import (
	"context"
	"math"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/stat/distuv"

	"github.com/tauvox/tauvox/volume"
)

func echoProtocol(n int, first, step float64) []volume.Acquisition {
	acq := make([]volume.Acquisition, n)
	for i := range acq {
		acq[i] = volume.Unknown()
		acq[i].EchoTime = first + step*float64(i)
	}
	return acq
}

// TestValidateMonoExpCRLB: check-values §2.3 [C]: 32 echoes TE 10…320 ms,
// S0 1, T2 100 ms, σ 0.01 → CRLB SD(T2) = 0.9775 ms; a Monte Carlo of NLLS
// with Gaussian noise (4000 trials) gave SD 0.985 ms and mean 100.01 ms.
// Our Monte Carlo must agree with the bound within its own error, and the
// reported standard errors must cover the truth as often as a Student t
// with n − 2 = 30 degrees of freedom says (the SE is s·√((JᵀJ)⁻¹) with s²
// the residual variance; gonum distuv.StudentsT), within 4 binomial SDs.
func TestValidateMonoExpCRLB(t *testing.T) {
	v := &Validation{Model: &MonoExp{}, Acq: echoProtocol(32, 10, 10), Truth: []float64{100}, SNR: 100, Trials: 4000, Seed: 7}
	rows, err := Validate(context.Background(), v)
	if err != nil {
		t.Fatal(err)
	}
	r := rows[0]
	if math.Abs(r.CRLB-0.9775) > 0.00005 {
		t.Errorf("CRLB SD(T2) = %.5f, check-values §2.3 says 0.9775", r.CRLB)
	}
	if r.OK != 4000 {
		t.Errorf("%d of 4000 converged", r.OK)
	}
	if math.Abs(r.SD-r.CRLB) > 4*r.SDErr {
		t.Errorf("Monte Carlo SD %.4f ± %.4f, CRLB %.4f", r.SD, r.SDErr, r.CRLB)
	}
	// The sheet's own Monte Carlo (SD 0.985 over 4000 trials) and ours are
	// independent: their difference has SD √2·SDErr.
	if math.Abs(r.SD-0.985) > 4*math.Sqrt2*r.SDErr {
		t.Errorf("Monte Carlo SD %.4f, check-values §2.3 Monte Carlo 0.985", r.SD)
	}
	if math.Abs(r.Mean-100) > 4*r.SD/math.Sqrt(4000) {
		t.Errorf("mean %.4f, want 100 within Monte Carlo error", r.Mean)
	}
	st := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: 30}
	for _, c := range []struct {
		got, k float64
	}{{r.Cover1, 1}, {r.Cover196, 1.96}} {
		want := st.CDF(c.k) - st.CDF(-c.k)
		tol := 4 * math.Sqrt(want*(1-want)/4000)
		if math.Abs(c.got-want) > tol {
			t.Errorf("coverage of ±%g SE = %.4f, want %.4f ± %.4f", c.k, c.got, want, tol)
		}
	}
	if math.Abs(r.Efficiency-1) > 0.1 {
		t.Errorf("efficiency %.3f, want about 1 at SNR 100", r.Efficiency)
	}
}

// TestValidateCRLBValues checks the bounds of the other models against
// check-values §2.3 [C]: two echoes TE 10 and 20 ms (S0 1, T2 100, σ 0.01)
// → 16.47 ms; IR with TIs 50, 400, 1100, 2500 ms, a = 1, b = −2, T1 =
// 1000 ms, σ 0.01 → 26.4 ms.
func TestValidateCRLBValues(t *testing.T) {
	ir := make([]volume.Acquisition, 4)
	for i, ti := range []float64{50, 400, 1100, 2500} {
		ir[i] = volume.Unknown()
		ir[i].InversionTime = ti
	}
	for _, c := range []struct {
		name string
		m    Model
		acq  []volume.Acquisition
		want float64
		tol  float64
	}{
		{"two echoes", &MonoExp{}, echoProtocol(2, 10, 10), 16.47, 0.005},
		{"IR 4 TIs", &InversionRecovery{}, ir, 26.4, 0.05},
	} {
		_, jac, p, k, err := TruthSignal(c.m, c.acq, 1, map[string]float64{"two echoes": 100, "IR 4 TIs": 1000}[c.name])
		if err != nil {
			t.Fatal(err)
		}
		sd := make([]float64, p)
		if !CRLB(sd, jac, len(c.acq), p, 0.01) {
			t.Fatalf("%s: singular", c.name)
		}
		if math.Abs(sd[k]-c.want) > c.tol {
			t.Errorf("%s: CRLB %.4f, want %.4f", c.name, sd[k], c.want)
		}
	}
}

// TestTruthSignalJacobians compares the analytic Jacobians with central
// finite differences (gonum diff/fd), and the signals with Signal.
func TestTruthSignalJacobians(t *testing.T) {
	vfa := make([]volume.Acquisition, 4)
	for i, fa := range []float64{3, 8, 17, 30} {
		vfa[i] = volume.Unknown()
		vfa[i].FlipAngle, vfa[i].RepetitionTime = fa, 15
	}
	sr := make([]volume.Acquisition, 5)
	for i := range sr {
		sr[i] = volume.Unknown()
		sr[i].RepetitionTime = 100 * math.Pow(2, float64(i))
	}
	ir := make([]volume.Acquisition, 5)
	for i, ti := range []float64{50, 200, 700, 1800, 4000} {
		ir[i] = volume.Unknown()
		ir[i].InversionTime, ir[i].RepetitionTime = ti, 6000
	}
	for _, c := range []struct {
		m   Model
		acq []volume.Acquisition
		t   float64
		// signal as a function of the parameters
		f func(p []float64, a volume.Acquisition) float64
	}{
		{&MonoExp{}, echoProtocol(6, 10, 15), 70, func(p []float64, a volume.Acquisition) float64 { return p[0] * math.Exp(-a.EchoTime/p[1]) }},
		{&InversionRecovery{}, ir, 900, func(p []float64, a volume.Acquisition) float64 {
			return p[0] + p[1]*math.Exp(-a.InversionTime/p[2])
		}},
		{&VariableFlipAngle{}, vfa, 1100, func(p []float64, a volume.Acquisition) float64 {
			return p[0] * Signal(SeqGradientEcho, Tissue{PD: 1, T1: p[1], T2: 1e9}, 0, 0, a.RepetitionTime, a.FlipAngle, 0)
		}},
		{&SaturationRecovery{Efficiency: true}, sr, 800, func(p []float64, a volume.Acquisition) float64 {
			return p[0] * (1 - p[2]*math.Exp(-a.RepetitionTime/p[1]))
		}},
	} {
		s, jac, p, k, err := TruthSignal(c.m, c.acq, 1.5, c.t)
		if err != nil {
			t.Fatal(err)
		}
		x := []float64{1.5, c.t}
		switch c.m.(type) {
		case *InversionRecovery:
			x = []float64{1.5 * (1 + math.Exp(-6000/c.t)), -3, c.t}
		case *SaturationRecovery:
			x = []float64{1.5, c.t, 1}
		}
		if len(x) != p || x[k] != c.t {
			t.Fatalf("%s: %d parameters, time constant at %d", c.m.Name(), p, k)
		}
		for i, a := range c.acq {
			if math.Abs(c.f(x, a)-s[i]) > 1e-12 {
				t.Errorf("%s sample %d: signal %v, want %v", c.m.Name(), i, s[i], c.f(x, a))
			}
			g := fd.Gradient(nil, func(q []float64) float64 { return c.f(q, a) }, x, &fd.Settings{Formula: fd.Central})
			for j := range g {
				if math.Abs(g[j]-jac[i*p+j]) > 1e-6*math.Max(1, math.Abs(g[j])) {
					t.Errorf("%s sample %d ∂/∂p%d: %v, finite differences %v", c.m.Name(), i, j, jac[i*p+j], g[j])
				}
			}
		}
	}
	if _, _, _, _, err := TruthSignal(&LookLocker{}, echoProtocol(3, 1, 1), 1, 10); err == nil {
		t.Error("Look-Locker: no error")
	}
}

// TestValidateWorkersIdentical: the study depends on the seed only.
func TestValidateWorkersIdentical(t *testing.T) {
	ir := make([]volume.Acquisition, 6)
	for i, ti := range []float64{50, 150, 400, 1000, 2500, 5000} {
		ir[i] = volume.Unknown()
		ir[i].InversionTime = ti
	}
	var ref []ValidationRow
	for _, w := range []int{1, 2, 5} {
		rows, err := Validate(context.Background(), &Validation{Model: &InversionRecovery{}, Acq: ir, Truth: []float64{300, 1200},
			SNR: 50, Noise: RicianNoise, Trials: 600, Seed: 3, Workers: w})
		if err != nil {
			t.Fatal(err)
		}
		if ref == nil {
			ref = rows
			continue
		}
		for i := range rows {
			a, b := rows[i], ref[i]
			if math.Float64bits(a.Mean) != math.Float64bits(b.Mean) || math.Float64bits(a.SD) != math.Float64bits(b.SD) ||
				a.Cover1 != b.Cover1 || a.OK != b.OK {
				t.Fatalf("workers %d row %d: %+v != %+v", w, i, a, b)
			}
		}
	}
	if _, err := Validate(context.Background(), &Validation{Model: &MonoExp{}, Acq: echoProtocol(4, 10, 10), Truth: []float64{50}}); err == nil {
		t.Error("no SNR: no error")
	}
	if _, err := Validate(context.Background(), &Validation{Model: &MonoExp{}, Acq: echoProtocol(1, 10, 10), Truth: []float64{50}, SNR: 10}); err == nil {
		t.Error("one echo: no error")
	}
}
