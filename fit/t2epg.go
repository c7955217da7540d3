package fit

import (
	"fmt"
	"math"
	"sort"

	"github.com/tauvox/tauvox/volume"
)

// StimulatedEcho is the stimulated-echo corrected T2 model of a CPMG
// multi-echo spin echo (Lebel & Wilman 2010, MRM 64:1005): with imperfect
// refocusing the echoes are not a single exponential, because part of the
// magnetisation is stored along z by one pulse and returned by a later one
// (the stimulated echoes). The model is
//
//	S_k = M0·EPG_k(T2, T1, B1·α_nominal, ESP),   k = 1 … n,
//
// the extended-phase-graph echo train of EPG.CPMG, with T1 fixed (T1,
// default 1000 ms: the train depends on it only weakly) and the refocusing
// angle α = B1·α_nominal scaled by the relative transmit field B1. Per
// voxel it fits T2, B1 and M0; with a measured B1 (Covariates.B1, the
// --b1 map) it fits T2 and M0 only. No slice profile is modelled (the
// refocusing angle is one number per voxel, as for non-selective or
// well-crushed wide-slab refocusing; Lebel & Wilman also model the profile).
//
// The echo train is symmetric about α = 180° (α and 360° − α give the same
// train), so only the effective angle folded into [0°, 180°] can be
// measured: B1 is searched over B1Min … min(B1Max, 180/α_nominal). With the
// default α_nominal = 180° the fitted B1 is at most 1, and a voxel whose
// true B1 is 1.1 reads 0.9.
//
// Echo times: the volumes must be echoes of one CPMG train, TE = k·ESP for
// distinct integers k ≥ 1, where the echo spacing ESP is the smallest
// difference between echo times. A complete train (TE₁ = ESP, evenly
// spaced) is the usual case; echoes left out (--skip-echoes, or samples
// that are not finite) are allowed.
//
// Methods:
//
//   - NLLS (the default, "nlls"): NewFitter precomputes, for the protocol, a
//     dictionary of unit-norm echo trains over a log-spaced T2 grid
//     (GridSize values over MinT…MaxT) and an even B1 grid (step about
//     0.02). Per voxel, M0 follows in closed form for every entry, so the
//     best entry is the one with the largest projection (y·d̂)²; the search
//     runs coarse to fine (every second T2 and B1, then the 3×3
//     neighbourhood of the best). From there Levenberg–Marquardt polishes
//     (M0, T2, B1) on the exact EPG model. Its Jacobian is analytic: the EPG
//     recursion carries the derivatives of every state with respect to T2
//     and α alongside the states (forward-mode differentiation), which
//     costs about three train evaluations, is exact, and is checked against
//     finite differences. Interpolating the dictionary instead would make
//     the polished value depend on the grid.
//   - Dictionary ("dictionary"): the best dictionary entry, no polish
//     (T2 quantised to the grid; no standard errors).
//
// With Sigma > 0 the polish fits the expected Rician magnitude of
// M0·EPG_k (RicianMean), as MonoExp does.
//
// Outputs: T2 (ms), B1 (ratio actual/nominal angle; with a measured B1,
// that value and a NaN standard error) and M0 (arbitrary).
type StimulatedEcho struct {
	// Estimator is NLLS or Dictionary; the zero value means NLLS.
	Estimator Method
	// T1 is the fixed longitudinal relaxation time in ms; default 1000.
	T1 float64
	// RefocusAngle is the nominal refocusing angle in degrees; default
	// 180.
	RefocusAngle float64
	// MinT and MaxT bound the plausible T2 in ms and span the dictionary;
	// defaults 5 and 2000. Estimates outside get OutOfBounds.
	MinT, MaxT float64
	// GridSize is the number of log-spaced T2 values of the dictionary;
	// default 80 (about 7.9 % apart over the default range).
	GridSize int
	// B1Min and B1Max bound B1; defaults 0.5 and 1.3. The upper bound
	// used is min(B1Max, 180/RefocusAngle) (see the type comment).
	B1Min, B1Max float64
	// Sigma, when positive, is the noise SD of the complex data; the
	// polish then fits the Rician expectation (see MonoExp.Sigma).
	Sigma float64
	// Solver selects the polish engine; the zero value is Dedicated.
	Solver Solver
	// LM tunes the dedicated solver; the zero value is right.
	LM LM
}

var _ Model = (*StimulatedEcho)(nil)

// epgB1Step is the target spacing of the B1 dictionary grid (the grid is
// even between the bounds with about this step); about 2 % of B1 = 1, so
// the start of the polish is within 1 % of the B1 of the best entry.
const epgB1Step = 0.02

// epgFTol sets the default LM.FTol of the polish to epgFTol/(n − 3): the
// solver stops when an iteration lowers the cost by less than 1e-4 of the
// residual variance RSS/(n − 3). Near the fold (α ≈ 180°) B1 is poorly
// determined and the cost has a long curved valley in which
// Levenberg–Marquardt crawls (the curvature of the model times the
// residual, which Gauss–Newton ignores, is as large as JᵀJ along the valley);
// with the default FTol of 1e-12 a few percent of such voxels at SNR 100
// needed 300 iterations. A cost change of 1e-4·σ̂² moves the parameters by
// about 1 % of their standard error, so this test stops where further
// iterations no longer matter statistically; on noiseless data the
// convergence is quadratic and the estimates agree to 1e-6 or better
// (TestStimulatedEchoNoiseless).
const epgFTol = 1e-4

// epgMaxEchoes bounds the train length k_max·ESP that NewFitter simulates.
const epgMaxEchoes = 512

func (m *StimulatedEcho) method() Method {
	if m.Estimator == "" {
		return NLLS
	}
	return m.Estimator
}

// Name returns "t2-epg".
func (m *StimulatedEcho) Name() string { return "t2-epg" }

// Method returns "nlls" or "dictionary".
func (m *StimulatedEcho) Method() string { return string(m.method()) }

// Outputs lists T2, B1 and M0.
func (m *StimulatedEcho) Outputs() []Param {
	return []Param{
		{Name: "T2", Unit: "ms", Map: "T2map", Desc: "transverse relaxation time, stimulated-echo corrected (EPG)"},
		{Name: "B1", Unit: "1", Map: "B1map", Desc: "relative refocusing angle, actual/nominal (folded to at most 180°)"},
		{Name: "M0", Unit: "arbitrary", Map: "M0map", Desc: "signal amplitude of the echo train model"},
	}
}

// MinPoints is 4: three parameters and one degree of freedom.
func (m *StimulatedEcho) MinPoints() int { return 4 }

// settings returns the defaults filled in.
func (m *StimulatedEcho) settings() (t1, alpha, lo, hi float64, size int, b1lo, b1hi float64) {
	t1, alpha = m.T1, m.RefocusAngle
	if !(t1 > 0) {
		t1 = 1000
	}
	if !(alpha > 0) {
		alpha = 180
	}
	lo, hi = m.MinT, m.MaxT
	if !(lo > 0) {
		lo = 5
	}
	if !(hi > 0) {
		hi = 2000
	}
	size = m.GridSize
	if size <= 0 {
		size = 80
	}
	b1lo, b1hi = m.B1Min, m.B1Max
	if !(b1lo > 0) {
		b1lo = 0.5
	}
	if !(b1hi > 0) {
		b1hi = 1.3
	}
	b1hi = math.Min(b1hi, 180/alpha)
	return
}

// cpmgEchoes checks that the echo times are k·ESP for distinct integers
// k ≥ 1 and returns ESP and, per volume, the index k−1.
func cpmgEchoes(acq []volume.Acquisition, min int) (esp float64, idx []int, err error) {
	te, err := echoTimes(acq, min)
	if err != nil {
		return 0, nil, err
	}
	s := append([]float64(nil), te...)
	sort.Float64s(s)
	esp = math.Inf(1)
	for i := 1; i < len(s); i++ {
		esp = math.Min(esp, s[i]-s[i-1])
	}
	if !(s[0] > 0) {
		return 0, nil, protocolErr("echo time %g ms is not after the excitation", s[0])
	}
	idx = make([]int, len(te))
	for i, t := range te {
		k := math.Round(t / esp)
		if k < 1 || math.Abs(t-k*esp) > 1e-6*esp {
			return 0, nil, protocolErr("echo time %g ms is not a multiple of the echo spacing %g ms: the model needs the echoes of one CPMG train, TE = k·ESP", t, esp)
		}
		if k > epgMaxEchoes {
			return 0, nil, protocolErr("echo time %g ms is echo %g of the train; at most %d are supported", t, k, epgMaxEchoes)
		}
		idx[i] = int(k) - 1
	}
	return esp, idx, nil
}

// NewFitter checks the echo times, builds the dictionary and returns a
// workspace.
func (m *StimulatedEcho) NewFitter(acq []volume.Acquisition) (Fitter, error) {
	meth := m.method()
	if meth != NLLS && meth != Dictionary {
		return nil, fmt.Errorf("%w: model %s has no method %q (nlls, dictionary)", ErrProtocol, m.Name(), meth)
	}
	if meth == Dictionary && m.Sigma > 0 {
		return nil, fmt.Errorf("%w: the dictionary method cannot model the Rician noise floor; use nlls", ErrProtocol)
	}
	esp, idx, err := cpmgEchoes(acq, m.MinPoints())
	if err != nil {
		return nil, err
	}
	t1, alpha, lo, hi, size, b1lo, b1hi := m.settings()
	if lo >= hi {
		return nil, fmt.Errorf("%w: T2 bounds %g…%g ms are empty", ErrProtocol, lo, hi)
	}
	if b1lo >= b1hi {
		return nil, fmt.Errorf("%w: B1 bounds %g…%g are empty (the upper bound is at most 180/refocusing angle)", ErrProtocol, b1lo, b1hi)
	}
	kmax := 0
	for _, k := range idx {
		kmax = max(kmax, k+1)
	}
	n := len(idx)
	nb := int(math.Round((b1hi-b1lo)/epgB1Step)) + 1
	nb = max(nb, 2)
	f := &epgFitter{
		m: m, meth: meth, n: n, idx: idx,
		lo: lo, hi: hi, b1lo: b1lo, b1hi: b1hi,
		t2g: make([]float64, size), b1g: make([]float64, nb),
		atoms: make([]float64, size*nb*n), norm: make([]float64, size*nb),
	}
	f.curve = epgCurve{
		epg: NewEPG(kmax), idx: idx, esp: esp, t1: t1, alpha: alpha * math.Pi / 180,
		sigma: m.Sigma,
		s:     make([]float64, kmax), sT: make([]float64, kmax), sA: make([]float64, kmax),
	}
	step := math.Log(hi/lo) / float64(size-1)
	for t := range f.t2g {
		f.t2g[t] = lo * math.Exp(step*float64(t))
	}
	for b := range f.b1g {
		f.b1g[b] = b1lo + (b1hi-b1lo)*float64(b)/float64(nb-1)
	}
	full := make([]float64, kmax)
	for b, b1 := range f.b1g {
		for t, t2 := range f.t2g {
			f.curve.epg.CPMG(full, b1*alpha, esp, t1, t2)
			a := f.atoms[(b*size+t)*n : (b*size+t+1)*n]
			var ss float64
			for i, k := range idx {
				a[i] = full[k]
				ss += full[k] * full[k]
			}
			nrm := math.Sqrt(ss)
			f.norm[b*size+t] = nrm
			if nrm > 0 {
				for i := range a {
					a[i] /= nrm
				}
			}
		}
	}
	if meth == NLLS {
		set := m.LM
		if set.FTol == 0 {
			set.FTol = epgFTol / float64(n-3)
		}
		f.lm3 = newLM(set, n, 3)
		f.lm2 = newLM(set, n, 2)
		if m.Solver == Gonum {
			f.g3 = newGonumSolver(n, 3)
			f.g2 = newGonumSolver(n, 2)
		}
	}
	return f, nil
}

// epgCurve is f_i = M0·EPG_{k_i}(T2, T1, α) with p = (M0, T2, x), where
// x = sin²(α/2); or, when fixed, p = (M0, T2) with α = b1·α_nominal. With
// sigma > 0, f is the Rician mean of that amplitude.
//
// The polish works in x rather than B1 because the train is an even
// function of α − 180° (TestEPGFold), hence a smooth function of
// x = sin²(α/2) = (1 − cos α)/2 with a non-zero slope at x = 1: in B1 the
// cost would be flat to second order at the fold, and Levenberg–Marquardt
// would crawl there (it did: 100 iterations without convergence for
// voxels near 180°). ∂f/∂x = (∂f/∂α)/(½·sin α), and x stays below
// sin²(epgMaxAngle/2) so that the division is well conditioned.
type epgCurve struct {
	epg       *EPG
	idx       []int
	esp, t1   float64
	alpha     float64 // nominal angle, radians
	sigma     float64
	fixed     bool
	b1        float64 // used when fixed
	s, sT, sA []float64
}

// epgMaxAngle is the largest refocusing angle of the polish, degrees: at
// 180° − 1e-4° the relative rounding of ∂f/∂x is about 1e-16/sin α ≈ 1e-10,
// and the train differs from the one at 180° by about 1e-12.
const epgMaxAngle = 180 - 1e-4

// angleOf returns α (radians) for x = sin²(α/2).
func angleOf(x float64) float64 {
	x = math.Min(math.Max(x, 0), 1)
	return 2 * math.Asin(math.Sqrt(x))
}

func (c *epgCurve) eval(f, jac, p []float64) {
	m0, t2 := p[0], p[1]
	alpha, np := c.b1*c.alpha, 2
	if !c.fixed {
		alpha, np = angleOf(p[2]), 3
	}
	if jac == nil {
		c.epg.train(c.s, nil, nil, alpha, c.esp, c.t1, t2)
	} else {
		c.epg.train(c.s, c.sT, c.sA, alpha, c.esp, c.t1, t2)
	}
	dxa := 2 / math.Sin(alpha) // dα/dx
	for i, k := range c.idx {
		a := m0 * c.s[k]
		d := 1.0
		if c.sigma > 0 {
			a, d = ricianMeanDeriv(a, c.sigma)
		}
		f[i] = a
		if jac != nil {
			row := jac[i*np : i*np+np]
			row[0] = d * c.s[k]
			row[1] = d * m0 * c.sT[k]
			if np == 3 {
				row[2] = d * m0 * c.sA[k] * dxa
			}
		}
	}
}

type epgFitter struct {
	m          *StimulatedEcho
	meth       Method
	n          int
	idx        []int
	lo, hi     float64
	b1lo, b1hi float64
	t2g, b1g   []float64
	atoms      []float64 // [b1][t2][echo], unit norm
	norm       []float64 // [b1][t2] norm of the train before scaling
	curve      epgCurve
	lm2, lm3   *lm
	g2, g3     *gonumSolver
	p          [3]float64
	plo, phi   [3]float64
	se         [3]float64
}

// dot returns y·â of entry (b, t).
func (f *epgFitter) dot(y []float64, b, t int) float64 {
	n := f.n
	a := f.atoms[(b*len(f.t2g)+t)*n : (b*len(f.t2g)+t+1)*n]
	a = a[:len(y)]
	var s0, s1 float64
	i := 0
	for ; i+1 < len(y); i += 2 {
		s0 += y[i] * a[i]
		s1 += y[i+1] * a[i+1]
	}
	if i < len(y) {
		s0 += y[i] * a[i]
	}
	return s0 + s1
}

// search returns the entry (b, t) with the largest positive projection
// and the projection, over B1 rows blo…bhi (inclusive).
func (f *epgFitter) search(y []float64, blo, bhi int) (bb, bt int, best float64) {
	nt := len(f.t2g)
	bb, bt, best = -1, -1, 0
	try := func(b, t int) {
		if d := f.dot(y, b, t); d > best {
			bb, bt, best = b, t, d
		}
	}
	for b := blo; b <= bhi; b += 2 {
		for t := 0; t < nt; t += 2 {
			try(b, t)
		}
		if (nt-1)%2 != 0 {
			try(b, nt-1)
		}
	}
	if (bhi-blo)%2 != 0 {
		for t := 0; t < nt; t += 2 {
			try(bhi, t)
		}
	}
	if bb < 0 {
		return
	}
	cb, ct := bb, bt
	for b := max(cb-1, blo); b <= min(cb+1, bhi); b++ {
		for t := max(ct-1, 0); t <= min(ct+1, nt-1); t++ {
			try(b, t)
		}
	}
	return
}

// Fit fits one voxel.
func (f *epgFitter) Fit(dst *Result, y []float64, c Covariates) {
	dst.Iter = 0
	for _, v := range y {
		if !finite(v) {
			dst.fail(TooFewPoints)
			return
		}
	}
	measured := c.B1 > 0 && finite(c.B1)
	blo, bhi := 0, len(f.b1g)-1
	if measured {
		// Start from the nearest B1 row; the polish uses the value itself.
		k := int(math.Round((c.B1 - f.b1lo) / (f.b1g[1] - f.b1g[0])))
		k = min(max(k, 0), bhi)
		blo, bhi = k, k
	}
	b, t, proj := f.search(y, blo, bhi)
	if b < 0 {
		dst.fail(NotConverged)
		return
	}
	nt := len(f.t2g)
	m0 := proj / f.norm[b*nt+t]
	if f.meth == Dictionary {
		var yy float64
		for _, v := range y {
			yy += v * v
		}
		rss := math.Max(yy-proj*proj, 0)
		b1 := f.b1g[b]
		if measured {
			b1 = c.B1
		}
		f.write(dst, f.t2g[t], b1, m0, math.NaN(), math.NaN(), math.NaN(), y, rss, 0)
		return
	}
	cv := &f.curve
	cv.fixed = measured
	np := 3
	s, lmS := solver(f.lm3), f.lm3
	if measured {
		np = 2
		cv.b1 = c.B1
		s, lmS = f.lm2, f.lm2
		if f.g2 != nil {
			s = f.g2
		}
	} else if f.g3 != nil {
		s = f.g3
	}
	an := f.curve.alpha
	xOf := func(b1 float64) float64 { return math.Pow(math.Sin(b1*an/2), 2) }
	f.p = [3]float64{m0, f.t2g[t], xOf(f.b1g[b])}
	f.plo = [3]float64{0, f.lo / 2, xOf(f.b1lo)}
	f.phi = [3]float64{math.MaxFloat64, f.hi * 2, xOf(math.Min(f.b1hi, epgMaxAngle*math.Pi/180/an))}
	p := f.p[:np]
	rss, iters, conv := s.solve(cv, y, p, f.plo[:np], f.phi[:np])
	if !conv {
		dst.fail(NotConverged)
		dst.Iter = iters
		return
	}
	if f.m.Solver == Gonum {
		// The cross-check solver keeps no Jacobian: evaluate it here.
		lmS.setPoint(cv, y, p)
	}
	se := f.se[:np]
	if !lmS.covDiag(se, rss) {
		for k := range se {
			se[k] = math.NaN()
		}
	}
	b1, seB1 := c.B1, math.NaN()
	if np == 3 {
		// B1 = α/α_nominal, dB1/dx = (dα/dx)/α_nominal = 2/(sin α·α_nominal).
		a := angleOf(p[2])
		b1, seB1 = a/an, se[2]*2/(math.Sin(a)*an)
	}
	f.write(dst, p[1], b1, p[0], se[1], seB1, se[0], y, rss, iters)
}

func (f *epgFitter) write(dst *Result, t2, b1, m0, seT2, seB1, seM0 float64, y []float64, rss float64, iters int) {
	if !(t2 >= f.lo && t2 <= f.hi) || !(m0 > 0) || !finite(m0) {
		dst.fail(OutOfBounds)
		dst.Iter = iters
		return
	}
	dst.Values[0], dst.SE[0] = t2, seT2
	dst.Values[1], dst.SE[1] = b1, seB1
	dst.Values[2], dst.SE[2] = m0, seM0
	dst.RSS = rss
	dst.R2 = rsquared(y, rss)
	dst.Iter = iters
	dst.Status = OK
}
