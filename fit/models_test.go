package fit

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// modelCase is the check data of one registered model: a protocol, the
// noiseless samples of one tissue and the outputs they must give.
type modelCase struct {
	acq    []volume.Acquisition
	signal func(y []float64)
	truth  map[string]float64 // output Name → true value
	// tol is the relative tolerance of noiseless recovery per method
	// ("" for every method without an entry): closed forms and nonlinear
	// fits recover the truth to rounding; a dictionary grid, a regularised
	// spectrum and ARLO's Simpson rule only approximately.
	tol map[string]float64
}

func acqOf(n int, set func(i int, a *volume.Acquisition)) []volume.Acquisition {
	return protocol(n, set)
}

// modelCases has one entry per registered model; TestEveryModel fails for
// a model without one, so a new model comes with its checks.
var modelCases = map[string]modelCase{
	// S = M0·exp(−TE/T2) (check-values §1.1).
	"t2": {
		acq:    acqOf(16, func(i int, a *volume.Acquisition) { a.EchoTime, a.RepetitionTime = 10*float64(i+1), 4000 }),
		signal: func(y []float64) { expDecay(y, 10, 1000, 80) },
		truth:  map[string]float64{"T2": 80, "R2": 1000.0 / 80, "M0": 1000},
	},
	"t2star": {
		acq:    acqOf(12, func(i int, a *volume.Acquisition) { a.EchoTime, a.RepetitionTime, a.FlipAngle = 3*float64(i+1), 60, 20 }),
		signal: func(y []float64) { expDecay(y, 3, 1000, 30) },
		truth:  map[string]float64{"T2star": 30, "R2star": 1000.0 / 30, "M0": 1000},
		tol:    map[string]float64{"arlo": 0.01}, // Simpson's rule over 3-ms steps of a 30-ms decay (Pei et al. 2015)
	},
	// |a + b·exp(−TI/T1)| with b = −2a: a perfect inversion (Barral et al. 2010).
	"t1-ir": {
		acq: acqOf(8, func(i int, a *volume.Acquisition) {
			a.InversionTime, a.RepetitionTime = []float64{50, 100, 200, 400, 700, 1100, 1800, 3200}[i], 8000
		}),
		signal: func(y []float64) {
			for i, ti := range []float64{50, 100, 200, 400, 700, 1100, 1800, 3200} {
				y[i] = math.Abs(1000 - 2000*math.Exp(-ti/900))
			}
		},
		truth: map[string]float64{"T1": 900, "R1": 1000.0 / 900, "M0": 1000, "InvEff": 1},
	},
	// Ernst equation (check-values §1.1).
	"t1-vfa": {
		acq: acqOf(6, func(i int, a *volume.Acquisition) {
			a.FlipAngle, a.RepetitionTime = []float64{2, 5, 10, 15, 20, 30}[i], 15
		}),
		signal: func(y []float64) {
			for i, fa := range []float64{2, 5, 10, 15, 20, 30} {
				y[i] = Signal(SeqGradientEcho, Tissue{PD: 3000, T1: 900, T2: 1e9}, 0, math.NaN(), 15, fa, 0)
			}
		},
		truth: map[string]float64{"T1": 900, "R1": 1000.0 / 900, "M0": 3000},
	},
	"t1-sr": {
		acq: acqOf(7, func(i int, a *volume.Acquisition) { a.RepetitionTime = 100 * math.Pow(2, float64(i)) }),
		signal: func(y []float64) {
			for i := range y {
				y[i] = 1000 * (1 - math.Exp(-100*math.Pow(2, float64(i))/900))
			}
		},
		truth: map[string]float64{"T1": 900, "R1": 1000.0 / 900, "M0": 1000},
	},
	// |A − B·exp(−t/T1*)|, T1 = T1*·(B/A − 1) (Deichmann & Haase 1992).
	"t1-ll": {
		acq: acqOf(12, func(i int, a *volume.Acquisition) { a.InversionTime = 100 + 250*float64(i) }),
		signal: func(y []float64) {
			for i := range y {
				y[i] = math.Abs(1000 - 1900*math.Exp(-(100+250*float64(i))/600))
			}
		},
		truth: map[string]float64{"T1": 540, "T1star": 600, "A": 1000, "BA": 1.9},
	},
	// The EPG echo train at 0.85 × 180° (Hennig 1988; Weigel 2015).
	"t2-epg": {
		acq: acqOf(16, func(i int, a *volume.Acquisition) { a.EchoTime, a.RepetitionTime = 10*float64(i+1), 4000 }),
		signal: func(y []float64) {
			NewEPG(16).CPMG(y, 180*0.85, 10, 1000, 80)
			for i := range y {
				y[i] *= 1000
			}
		},
		truth: map[string]float64{"T2": 80, "B1": 0.85, "M0": 1000},
		tol:   map[string]float64{"dictionary": 0.05}, // best grid entry: B1 step 0.02 (epgB1Step), T2 on a log grid, the two traded off
	},
	// One component: the regularised spectrum's long-window geometric
	// mean is near it and the short window empty (Whittall & MacKay 1989).
	"b1-dam": {
		acq: acqOf(2, func(i int, a *volume.Acquisition) { a.FlipAngle, a.RepetitionTime = 60*float64(i+1), 10000 }),
		signal: func(y []float64) {
			y[0], y[1] = DAMSignal(1000, 0.9, 60)
		},
		truth: map[string]float64{"B1": 90},
	},
	"b1-afi": {
		acq: acqOf(2, func(i int, a *volume.Acquisition) { a.FlipAngle, a.RepetitionTime = 60, 20+80*float64(i) }),
		signal: func(y []float64) {
			y[0], y[1] = AFISignal(1000, 1000, 20, 100, 0.9, 60)
		},
		truth: map[string]float64{"B1": 90},
		tol:   map[string]float64{"ratio": 0.005}, // the TR ≪ T1 approximation of Yarnykh 2007 eq. 4 at T1 = 1000 ms
	},
	"t2-spectrum": {
		acq:    acqOf(32, func(i int, a *volume.Acquisition) { a.EchoTime, a.RepetitionTime = 10*float64(i+1), 4000 }),
		signal: func(y []float64) { expDecay(y, 10, 1000, 80) },
		truth:  map[string]float64{"T2long": 80, "M0": 1000},
		tol:    map[string]float64{"nnls": 0.05}, // regularisation widens the peak (χ² = 1.02·χ²_min)
	},
}

func expDecay(y []float64, esp, m0, t2 float64) {
	for i := range y {
		y[i] = m0 * math.Exp(-esp*float64(i+1)/t2)
	}
}

// TestEveryModel runs every registered model, each method, through the
// same checks: noiseless recovery of the truth, no allocation per voxel,
// protocol errors for a missing varying parameter and too few volumes,
// the gonum cross-check (the same minimum from gonum's optimiser on
// perturbed samples) and identical maps for 1 and 3 workers.
func TestEveryModel(t *testing.T) {
	for _, info := range Models() {
		c, ok := modelCases[info.Name]
		if !ok {
			t.Errorf("%s: no entry in modelCases", info.Name)
			continue
		}
		y := make([]float64, len(c.acq))
		c.signal(y)
		for _, meth := range info.Methods {
			name := info.Name + "/" + meth
			m, err := New(Spec{Model: info.Name, Method: meth})
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			f, err := m.NewFitter(c.acq)
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			res := NewResult(m)
			f.Fit(res, y, Covariates{})
			tol := 1e-6
			if v, ok := c.tol[meth]; ok {
				tol = v
			}
			if res.Status != OK {
				t.Errorf("%s: status %v", name, res.Status)
			}
			checked := 0
			for k, p := range m.Outputs() {
				if want, ok := c.truth[p.Name]; ok {
					checked++
					if got := res.Values[k]; !(math.Abs(got-want) <= tol*math.Abs(want)) {
						t.Errorf("%s: %s = %.9g, want %.9g (tolerance %g)", name, p.Name, got, want, tol)
					}
				}
			}
			if checked == 0 {
				t.Errorf("%s: no output checked", name)
			}
			if a := testing.AllocsPerRun(20, func() { f.Fit(res, y, Covariates{}) }); a != 0 {
				t.Errorf("%s: %v allocations per voxel", name, a)
			}
			checkWorkers(t, name, m, c, y)
		}
		checkProtocolErrors(t, info, c)
		checkGonum(t, info, c, y)
	}
}

// checkProtocolErrors: a protocol without the varying parameter, and one
// with fewer volumes than the model needs, are refused with ErrProtocol.
func checkProtocolErrors(t *testing.T, info ModelInfo, c modelCase) {
	m, _ := New(Spec{Model: info.Name})
	missing := append([]volume.Acquisition(nil), c.acq...)
	for i := range missing {
		switch info.Needs {
		case "EchoTime":
			missing[i].EchoTime = math.NaN()
		case "InversionTime":
			missing[i].InversionTime = math.NaN()
		case "FlipAngle":
			missing[i].FlipAngle = math.NaN()
		case "RepetitionTime":
			missing[i].RepetitionTime = math.NaN()
		default:
			t.Fatalf("%s: unknown varying parameter %q", info.Name, info.Needs)
		}
	}
	for what, acq := range map[string][]volume.Acquisition{"missing " + info.Needs: missing, "one volume": c.acq[:1]} {
		if _, err := m.NewFitter(acq); !errors.Is(err, ErrProtocol) {
			t.Errorf("%s, %s: error %v, want ErrProtocol", info.Name, what, err)
		}
	}
}

// checkGonum: where the model has a nonlinear method that the gonum
// optimiser can run, both solvers reach the same minimum on samples
// perturbed by a fixed ±0.5 % pattern (so the minimum is not the truth).
func checkGonum(t *testing.T, info ModelInfo, c modelCase, y []float64) {
	yp := make([]float64, len(y))
	for i := range y {
		yp[i] = y[i] * (1 + 0.005*float64(i%3-1))
	}
	for _, meth := range info.Methods {
		if meth != "nlls" && meth != "rdnls" {
			continue
		}
		var vals [2][]float64
		for k, gonum := range []bool{false, true} {
			m, err := New(Spec{Model: info.Name, Method: meth, Gonum: gonum})
			if err != nil {
				t.Fatal(err)
			}
			f, err := m.NewFitter(c.acq)
			if err != nil {
				t.Fatal(err)
			}
			res := NewResult(m)
			f.Fit(res, yp, Covariates{})
			if res.Status != OK {
				t.Errorf("%s/%s gonum=%v: status %v", info.Name, meth, gonum, res.Status)
			}
			vals[k] = res.Values
		}
		for i := range vals[0] {
			if d := math.Abs(vals[0][i] - vals[1][i]); !(d <= 1e-3*math.Abs(vals[0][i])) {
				t.Errorf("%s/%s: output %d: dedicated %.9g, gonum %.9g", info.Name, meth, i, vals[0][i], vals[1][i])
			}
		}
	}
}

// checkWorkers fits 700 voxels (the samples scaled and perturbed per
// voxel) with 1 and 3 workers: the maps are identical bit for bit.
func checkWorkers(t *testing.T, name string, m Model, c modelCase, y []float64) {
	const nv = 700
	im := &volume.Image{Dims: [4]int{nv, 1, 1, len(y)}, Data: make([]float32, nv*len(y)), Acq: c.acq}
	for v := 0; v < nv; v++ {
		for k := range y {
			im.Data[k*nv+v] = float32(y[k] * (1 + 0.2*float64(v%7)/7) * (1 + 0.01*math.Sin(float64(v*k+1))))
		}
	}
	var maps [2]*Maps
	for i, w := range []int{1, 3} {
		var err error
		if maps[i], err = Run(context.Background(), im, m, &Options{Workers: w, NoThreshold: true}); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
	}
	for k := range maps[0].Values {
		for v := range maps[0].Values[k] {
			a, b := maps[0].Values[k][v], maps[1].Values[k][v]
			if math.Float32bits(a) != math.Float32bits(b) {
				t.Fatalf("%s: output %d voxel %d: %v with 1 worker, %v with 3", name, k, v, a, b)
			}
		}
	}
}
