package fit

import (
	"fmt"
	"math"

	"github.com/tauvox/tauvox/volume"
)

// SaturationRecovery is the recovery after a saturation pulse, sampled by
// varying the repetition (recovery) time TR from volume to volume
// (textbook form, check-values §1.1),
//
//	S(TR) = M0·(1 − k·exp(−TR/T1)),
//
// with k = 1 for an ideal saturation. With Efficiency, k is fitted too
// (k < 1 for an incomplete saturation; k = 2 would be an inversion).
// Samples may come in any TR order; no inversion time is needed.
//
// Outputs, in Result order: T1 (ms), R1 = 1000/T1 (1/s), M0 (arbitrary)
// and, with Efficiency, SatEff = k. Standard errors come from the Jacobian
// at the solution (package doc).
//
// The only method is NLLS ("nlls"): a search over a log-spaced T1 grid with
// M0 (and k) in closed form, as in the reduced-dimension search of
// InversionRecovery, gives the start; Levenberg–Marquardt on (M0, 1/T1[, k])
// polishes it.
type SaturationRecovery struct {
	// Efficiency fits the saturation efficiency k; without it k = 1.
	Efficiency bool
	// Estimator must be NLLS or empty (NLLS).
	Estimator Method
	// MinT and MaxT bound the plausible T1 in ms; defaults 1 and 10000.
	// Estimates outside get OutOfBounds. The start grid spans
	// MinT/2…2·MaxT.
	MinT, MaxT float64
	// GridSize is the number of log-spaced T1 values of the start search;
	// default 160.
	GridSize int
	// Solver selects the nonlinear engine; the zero value is Dedicated.
	Solver Solver
	// LM tunes the dedicated solver; the zero value is right.
	LM LM
}

var _ Model = (*SaturationRecovery)(nil)

func (m *SaturationRecovery) method() Method {
	if m.Estimator == "" {
		return NLLS
	}
	return m.Estimator
}

// Name returns "t1-sr".
func (m *SaturationRecovery) Name() string { return "t1-sr" }

// Method returns "nlls".
func (m *SaturationRecovery) Method() string { return string(m.method()) }

// Outputs lists T1, R1, M0 and, with Efficiency, SatEff.
func (m *SaturationRecovery) Outputs() []Param {
	out := []Param{
		{Name: "T1", Unit: "ms", Map: "T1map", Desc: "longitudinal relaxation time"},
		{Name: "R1", Unit: "1/s", Map: "R1map", Desc: "longitudinal relaxation rate 1/T1"},
		{Name: "M0", Unit: "arbitrary", Map: "M0map", Desc: "fully recovered signal"},
	}
	if m.Efficiency {
		out = append(out, Param{Name: "SatEff", Unit: "1", Map: "sateff", Desc: "saturation efficiency k of M0·(1 − k·exp(−TR/T1)); 1 for an ideal saturation"})
	}
	return out
}

func (m *SaturationRecovery) params() int {
	if m.Efficiency {
		return 3
	}
	return 2
}

// MinPoints is one more than the number of fitted parameters: 3, or 4 with
// Efficiency (the extra sample gives the standard errors).
func (m *SaturationRecovery) MinPoints() int { return m.params() + 1 }

// NewFitter checks that every volume has a distinct repetition time and
// returns a workspace.
func (m *SaturationRecovery) NewFitter(acq []volume.Acquisition) (Fitter, error) {
	perm, tr, err := recoveryTimes(acq, m.MinPoints(), "repetition time", func(a volume.Acquisition) float64 { return a.RepetitionTime })
	if err != nil {
		return nil, err
	}
	if meth := m.method(); meth != NLLS {
		return nil, fmt.Errorf("%w: model %s has no method %q (nlls)", ErrProtocol, m.Name(), meth)
	}
	lo, hi := t1Bounds(m.MinT, m.MaxT)
	if lo >= hi {
		return nil, fmt.Errorf("%w: T1 bounds %g…%g ms are empty", ErrProtocol, lo, hi)
	}
	size := m.GridSize
	if size <= 0 {
		size = defaultGridSize
	}
	n, np := len(tr), m.params()
	f := &srFitter{
		m: m, n: n, np: np, perm: perm, tr: tr, lo: lo, hi: hi,
		grid: newT1Grid(tr, lo/gridMargin, hi*gridMargin, size),
		y:    make([]float64, n), tv: make([]float64, n), pos: make([]int, n),
		lms: lmByCount(m.LM, m.MinPoints(), n, np),
	}
	f.curve.eff = m.Efficiency
	if m.Solver == Gonum {
		f.gonum = newGonumSolver(n, np)
	}
	return f, nil
}

// srCurve is f = M0·(1 − k·exp(−R·TR)) with p = (M0, R [1/ms]) and k = 1,
// or p = (M0, R, k) with eff.
type srCurve struct {
	tr  []float64
	eff bool
}

func (c *srCurve) eval(f, jac, p []float64) {
	m0, r := p[0], p[1]
	k, np := 1.0, 2
	if c.eff {
		k, np = p[2], 3
	}
	for i, t := range c.tr {
		e := math.Exp(-r * t)
		f[i] = m0 * (1 - k*e)
		if jac != nil {
			row := jac[i*np : i*np+np]
			row[0] = 1 - k*e
			row[1] = m0 * k * t * e
			if c.eff {
				row[2] = -m0 * e
			}
		}
	}
}

type srFitter struct {
	m      *SaturationRecovery
	n, np  int
	perm   []int     // perm[k]: volume of the k-th shortest TR
	tr     []float64 // sorted TRs
	lo, hi float64
	grid   *t1Grid
	curve  srCurve
	lms    []*lm
	gonum  *gonumSolver

	y   []float64 // finite samples by TR
	tv  []float64 // their TRs
	pos []int     // their sorted positions (grid columns)
	p   [3]float64
	plo [3]float64
	phi [3]float64
	se  [3]float64
}

// search returns the grid start (M0, R, k) for the nv finite samples in
// f.y, or ok false when no grid row is usable.
func (f *srFitter) search(nv int) (m0, r, k float64, ok bool) {
	g := f.grid
	y := f.y[:nv]
	full := nv == f.n
	n := f.n
	var sy float64
	for _, v := range y {
		sy += v
	}
	best := math.Inf(-1)
	bestG := -1
	var bm0, bk float64
	for gi := range g.t1 {
		row := g.e[gi*n : gi*n+n]
		var se, see, sye float64
		if full {
			se, see = g.se[gi], g.see[gi]
			for j, v := range y {
				sye += v * row[j]
			}
		} else {
			for j, p := range f.pos[:nv] {
				e := row[p]
				se += e
				see += e * e
				sye += y[j] * e
			}
		}
		var q, a, kk float64
		if f.curve.eff {
			// a + b·e by linear least squares; M0 = a, k = −b/a.
			q11, q12, q22, okRow := inv2(float64(nv), se, see)
			if !okRow {
				continue
			}
			a = q11*sy + q12*sye
			b := q12*sy + q22*sye
			q = a*sy + b*sye
			kk = -b / a
		} else {
			// M0·g with g = 1 − e: M0 = Σy·g/Σg², q = (Σy·g)²/Σg².
			sgg := float64(nv) - 2*se + see
			if !(sgg > 0) {
				continue
			}
			syg := sy - sye
			a = syg / sgg
			q = syg * a
			kk = 1
		}
		if q > best {
			best, bestG, bm0, bk = q, gi, a, kk
		}
	}
	if bestG < 0 || !finite(bm0) || !finite(bk) {
		return 0, 0, 0, false
	}
	return bm0, 1 / g.t1[bestG], bk, true
}

// Fit fits one voxel. Non-finite samples are dropped.
func (f *srFitter) Fit(dst *Result, y []float64, _ Covariates) {
	dst.Iter = 0
	nv := 0
	for k, vol := range f.perm {
		v := y[vol]
		if !finite(v) {
			continue
		}
		f.y[nv] = v
		f.tv[nv] = f.tr[k]
		f.pos[nv] = k
		nv++
	}
	if nv < f.m.MinPoints() {
		dst.fail(TooFewPoints)
		return
	}
	m0, r, k, ok := f.search(nv)
	if !ok {
		dst.fail(NotConverged)
		return
	}
	np := f.np
	f.curve.tr = f.tv[:nv]
	f.p = [3]float64{m0, r, k}
	f.plo = [3]float64{-math.MaxFloat64, 1 / (f.hi * 10), -math.MaxFloat64}
	f.phi = [3]float64{math.MaxFloat64, 10 / f.lo, math.MaxFloat64}
	p := f.p[:np]
	yv := f.y[:nv]
	s := f.lms[nv]
	var sol solver = s
	if f.gonum != nil {
		sol = f.gonum
	}
	rss, iters, conv := sol.solve(&f.curve, yv, p, f.plo[:np], f.phi[:np])
	dst.Iter = iters
	if !conv {
		dst.fail(NotConverged)
		return
	}
	if f.gonum != nil {
		rss = s.setPoint(&f.curve, yv, p)
	}
	t1 := 1 / p[1]
	if !(t1 >= f.lo && t1 <= f.hi) || !finite(p[0]) || (np == 3 && !finite(p[2])) {
		dst.fail(OutOfBounds)
		dst.Iter = iters
		return
	}
	se := f.se[:np]
	if !s.covDiag(se, rss) {
		for i := range se {
			se[i] = math.NaN()
		}
	}
	dst.Values[0] = t1
	dst.SE[0] = se[1] * t1 * t1 // delta method: |dT1/dR| = T1²
	dst.Values[1] = p[1] * 1000
	dst.SE[1] = se[1] * 1000
	dst.Values[2] = p[0]
	dst.SE[2] = se[0]
	if np == 3 {
		dst.Values[3] = p[2]
		dst.SE[3] = se[2]
	}
	dst.RSS = rss
	dst.R2 = rsquared(yv, rss)
	dst.Status = OK
}
