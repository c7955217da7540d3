package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// TestARLOCheckValues: check-values §2.3 [C], simple-LS ARLO on noiseless
// 12-echo data: T2* = 20 ms, ΔTE = 2 ms (TE 2…24 ms) → 20.0000;
// T2* = 10 ms, ΔTE = 5 ms (TE 5…60 ms) → 10.0034 (the Simpson
// discretisation bias of Pei et al. 2015). M0 follows by least squares.
func TestARLOCheckValues(t *testing.T) {
	for _, c := range []struct{ t2, dte, want, tol float64 }{{20, 2, 20.0000, 5e-5}, {10, 5, 10.0034, 5e-5}} {
		te := spacedTE(12, c.dte, c.dte)
		y := make([]float64, len(te))
		for i, x := range te {
			y[i] = 800 * math.Exp(-x/c.t2)
		}
		m := &MonoExp{Star: true, Estimator: ARLO}
		res := NewResult(m)
		mustFitter(t, m, echoes(te)).Fit(res, y, Covariates{})
		if res.Status != OK || math.Abs(res.Values[0]-c.want) > c.tol || relErr(res.Values[2], 800) > 2e-3 {
			t.Errorf("T2* %g ΔTE %g: status %v, T2* %.5f (want %.4f), M0 %g", c.t2, c.dte, res.Status, res.Values[0], c.want, res.Values[2])
		}
	}
}

// TestARLONoisy: on noisy data (T2* = 30 ms, 12 echoes ΔTE = 3 ms, SNR
// 100, Rician) the simple-LS ARLO mean is within 3 % of the truth. It is
// measurably low (about −1.5 %, logged): the noise of d_i = S_{i−2} − S_i
// inflates Σd_i², the errors-in-variables attenuation of a regression
// through noisy regressors (common practice); Pei et al. 2015 report ARLO
// close to NLLS with their own weighting, which check-values §1.1 marks as
// not checked, so the simple form is what is implemented.
func TestARLONoisy(t *testing.T) {
	te := spacedTE(12, 3, 3)
	arlo, nlls := &MonoExp{Star: true, Estimator: ARLO}, &MonoExp{Star: true}
	fa, fn := mustFitter(t, arlo, echoes(te)), mustFitter(t, nlls, echoes(te))
	ra, rn := NewResult(arlo), NewResult(nlls)
	rng := rand.New(rand.NewPCG(11, 12))
	y := make([]float64, len(te))
	var sa, sn float64
	const trials = 500
	for k := 0; k < trials; k++ {
		for i, x := range te {
			y[i] = Rician(rng, math.Exp(-x/30), 0.01)
		}
		fa.Fit(ra, y, Covariates{})
		fn.Fit(rn, y, Covariates{})
		sa += ra.Values[0]
		sn += rn.Values[0]
	}
	sa, sn = sa/trials, sn/trials
	t.Logf("T2* 30 ms, SNR 100: ARLO mean %.3f ms, NLLS mean %.3f ms", sa, sn)
	if relErr(sa, 30) > 0.03 || relErr(sn, 30) > 0.01 {
		t.Errorf("ARLO mean %g, NLLS %g", sa, sn)
	}
}

func TestARLOProtocol(t *testing.T) {
	for _, c := range []struct {
		name string
		m    *MonoExp
		te   []float64
		want string
	}{
		{"uneven", &MonoExp{Star: true, Estimator: ARLO}, []float64{2, 4, 7, 9}, "evenly spaced"},
		{"two echoes", &MonoExp{Star: true, Estimator: ARLO}, []float64{2, 4}, "at least 3"},
		{"offset", &MonoExp{Star: true, Estimator: ARLO, Offset: true}, []float64{2, 4, 6}, "neither an offset"},
		{"t2", &MonoExp{Estimator: ARLO}, []float64{2, 4, 6}, "no method"},
	} {
		_, err := c.m.NewFitter(echoes(c.te))
		if err == nil || !errors.Is(err, ErrProtocol) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want %q", c.name, err, c.want)
		}
	}
	if _, err := (&MonoExp{Star: true, Estimator: "x"}).NewFitter(echoes([]float64{2, 4, 6})); err == nil || !strings.Contains(err.Error(), "(loglinear, nlls, arlo)") {
		t.Errorf("unknown method: %v", err)
	}
}

func TestARLOAllocs(t *testing.T) {
	te := spacedTE(12, 2, 2)
	m := &MonoExp{Star: true, Estimator: ARLO}
	f := mustFitter(t, m, echoes(te))
	res := NewResult(m)
	y := make([]float64, len(te))
	for i, x := range te {
		y[i] = math.Exp(-x / 20)
	}
	if n := testing.AllocsPerRun(100, func() { f.Fit(res, y, Covariates{}) }); n != 0 {
		t.Errorf("%v allocations per voxel", n)
	}
}

func BenchmarkRunT2starARLO(b *testing.B) {
	benchmarkRun(b, &MonoExp{Star: true, Estimator: ARLO}, t2BenchSeries(), 2)
}
