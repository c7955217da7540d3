package fit

import (
	"math"

	"github.com/tauvox/tauvox/volume"
)

// LookLocker is the three-parameter apparent-T1 model of a Look-Locker
// (inversion followed by a train of small-angle readouts) series
// (Look & Locker 1970; Deichmann & Haase 1992, J Magn Reson 96:608):
//
//	|S(t)| = |A − B·exp(−t/T1*)|,   T1 = T1*·(B/A − 1),
//
// where the readouts make the recovery apparent (T1* < T1); the correction
// is exact for continuous FLASH readouts with TR ≪ T1 and approximate
// otherwise (check-values §2.4: −0.8 % at T1 = 1000 ms, TR 5 ms, α = 10°).
//
// The sample time t of each volume, measured from the inversion, is read
// from Acquisition.InversionTime: the readers put the trigger or sample
// time of a Look-Locker frame there. Samples are magnitudes in any order.
// The fit is that of InversionRecovery (RD-NLS with polarity restoration,
// Barral et al. 2010: a grid search on T1* with A and B in closed form for
// every polarity split, then Levenberg–Marquardt) with a = A, b = −B.
//
// Outputs: T1 and T1* (ms), A (the steady-state signal of the readout
// train, arbitrary units) and B/A (2 for a perfect inversion without
// readout saturation; the T1 correction needs B/A > 1). Standard errors
// come from the covariance of (a, b, 1/T1*) by the delta method.
type LookLocker struct {
	// MinT and MaxT bound both T1* and T1 in ms; defaults 1 and 10000.
	MinT, MaxT float64
	// GridSize is the number of log-spaced T1* values searched; default
	// 160.
	GridSize int
	// Solver selects the nonlinear engine; the zero value is Dedicated.
	Solver Solver
	// LM tunes the dedicated solver; the zero value is right.
	LM LM
}

var _ Model = (*LookLocker)(nil)

// Name returns "t1-ll".
func (m *LookLocker) Name() string { return "t1-ll" }

// Method returns "rdnls".
func (m *LookLocker) Method() string { return string(RDNLS) }

// Outputs lists T1, T1star, A and BA.
func (m *LookLocker) Outputs() []Param {
	return []Param{
		{Name: "T1", Unit: "ms", Map: "T1map", Desc: "longitudinal relaxation time, T1*·(B/A − 1)"},
		{Name: "T1star", Unit: "ms", Map: "T1starmap", Desc: "apparent recovery time T1* of the Look-Locker readout train"},
		{Name: "A", Unit: "arbitrary", Map: "llA", Desc: "steady-state signal A of |A − B·exp(−t/T1*)|"},
		{Name: "BA", Unit: "1", Map: "llBA", Desc: "B/A, 2 for a perfect inversion without readout saturation"},
	}
}

// MinPoints is 4.
func (m *LookLocker) MinPoints() int { return 4 }

// NewFitter checks the sample times (InversionTime) and returns a
// workspace.
func (m *LookLocker) NewFitter(acq []volume.Acquisition) (Fitter, error) {
	ir := &InversionRecovery{Estimator: RDNLS, MinT: m.MinT, MaxT: m.MaxT, GridSize: m.GridSize, Solver: m.Solver, LM: m.LM}
	f, err := ir.NewFitter(acq)
	if err != nil {
		return nil, err
	}
	lo, hi := t1Bounds(m.MinT, m.MaxT)
	return &llFitter{ir: f.(*irFitter), res: NewResult(ir), lo: lo, hi: hi}, nil
}

type llFitter struct {
	ir     *irFitter
	res    *Result
	lo, hi float64
	cov    [maxParams * maxParams]float64
}

// Fit fits one voxel.
func (f *llFitter) Fit(dst *Result, y []float64, c Covariates) {
	r := f.res
	f.ir.Fit(r, y, c)
	dst.Iter = r.Iter
	if r.Status != OK {
		dst.fail(r.Status)
		dst.Iter = r.Iter
		return
	}
	nv := 0
	for _, v := range y {
		if finite(v) {
			nv++
		}
	}
	// (a, b, R) as solved (the sign of (a, b) is free in a magnitude fit;
	// B/A = −b/a and the delta-method variances below do not depend on
	// it).
	a, b, rate := f.ir.p[0], f.ir.p[1], f.ir.p[2]
	ts := 1 / rate
	ba := -b / a
	t1 := ts * (ba - 1)
	if !(ba > 1) || !(t1 >= f.lo && t1 <= f.hi) {
		dst.fail(OutOfBounds)
		dst.Iter = r.Iter
		return
	}
	dst.Values[0], dst.Values[1], dst.Values[2], dst.Values[3] = t1, ts, math.Abs(a), ba
	if covariance(&f.cov, f.ir.lms[nv].jac, nv, 3, r.RSS) {
		const mp = maxParams
		cv := func(i, j int) float64 { return f.cov[i*mp+j] }
		// T1 = (−b/a − 1)/R: ∂/∂a = b/(a²R), ∂/∂b = −1/(aR),
		// ∂/∂R = −(−b/a − 1)/R²; B/A = −b/a: ∂/∂a = b/a², ∂/∂b = −1/a.
		g := [3]float64{b / (a * a * rate), -1 / (a * rate), -(ba - 1) / (rate * rate)}
		q := [3]float64{b / (a * a), -1 / a, 0}
		var v1, vq float64
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				v1 += g[i] * cv(i, j) * g[j]
				vq += q[i] * cv(i, j) * q[j]
			}
		}
		dst.SE[0] = math.Sqrt(math.Max(v1, 0))
		dst.SE[1] = math.Sqrt(cv(2, 2)) * ts * ts
		dst.SE[2] = math.Sqrt(cv(0, 0))
		dst.SE[3] = math.Sqrt(math.Max(vq, 0))
	} else {
		for i := range dst.SE {
			dst.SE[i] = math.NaN()
		}
	}
	dst.RSS = r.RSS
	dst.R2 = r.R2
	dst.Status = OK
}
