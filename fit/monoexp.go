package fit

import (
	"fmt"
	"math"
	"sort"

	"github.com/tauvox/tauvox/volume"
)

// MonoExp is the mono-exponential decay of a multi-echo series,
//
//	S(TE) = M0·exp(−TE/T2) [+ c],
//
// for spin-echo T2 (Carr & Purcell 1954; Meiboom & Gill 1958) or
// gradient-echo T2* (the same equation, with T2* in place of T2). The
// optional constant c absorbs a noise floor or a slow component and
// reduces the bias from imperfect refocusing (Milford et al. 2015).
//
// Outputs: T (T2 or T2*, ms), R (1/s), M0 (arbitrary) and, with Offset, c.
type MonoExp struct {
	// Star selects T2* naming (T2starmap, R2starmap) instead of T2.
	Star bool
	// Estimator is LogLinear, NLLS or ARLO; the zero value means NLLS.
	//
	// ARLO (Pei et al. 2015, MRM 73:843), offered for T2* (Star) only,
	// needs at least 3 evenly spaced echoes. By Simpson's rule over two echo spacings Δ,
	//
	//	∫ S dt from TE_{i−2} to TE_i = T·(S_{i−2} − S_i)
	//	                             ≈ (Δ/3)·(S_{i−2} + 4·S_{i−1} + S_i),
	//
	// so with x_i the right-hand side and d_i = S_{i−2} − S_i the
	// least-squares estimate is T = Σx_i·d_i / Σd_i² (the simple-LS form
	// of check-values §1.1; Pei et al. weight it differently). M0 then
	// follows by linear least squares given T, and the standard errors
	// from the Jacobian of the mono-exponential at (M0, T), as for NLLS.
	// It is closed form (no iterations) and, like Simpson's rule, biased
	// by a small amount that grows with Δ/T (check-values §2.3: 10.0034
	// for T = 10 ms, Δ = 5 ms).
	Estimator Method
	// Offset adds the constant c (NLLS only).
	Offset bool
	// MinT and MaxT bound the plausible time constant in ms; defaults 0.5
	// and 5000. Estimates outside get OutOfBounds.
	MinT, MaxT float64
	// Sigma, when positive, is the SD of the Gaussian noise in each
	// channel of the complex data the magnitudes came from. NLLS then fits
	// the expected Rician magnitude E[M](M0·exp(−TE/T2), σ) instead of the
	// noiseless curve, which removes the bias of the noise floor at late
	// echoes (Gudbjartsson & Patz 1995; see RicianMean). Zero fits the
	// plain curve.
	Sigma float64
	// Solver selects the NLLS engine; the zero value is Dedicated.
	Solver Solver
	// LM tunes the dedicated solver; the zero value is right.
	LM LM
}

var _ Model = (*MonoExp)(nil)

func (m *MonoExp) method() Method {
	if m.Estimator == "" {
		return NLLS
	}
	return m.Estimator
}

func (m *MonoExp) bounds() (lo, hi float64) {
	lo, hi = m.MinT, m.MaxT
	if lo <= 0 {
		lo = 0.5
	}
	if hi <= 0 {
		hi = 5000
	}
	return lo, hi
}

// Name returns "t2" or "t2star".
func (m *MonoExp) Name() string {
	if m.Star {
		return "t2star"
	}
	return "t2"
}

// Method returns the method name.
func (m *MonoExp) Method() string { return string(m.method()) }

// Outputs lists T, R, M0 and, with Offset, the constant.
func (m *MonoExp) Outputs() []Param {
	t, r, what := "T2", "R2", "transverse relaxation time"
	if m.Star {
		t, r, what = "T2star", "R2star", "observed transverse relaxation time"
	}
	out := []Param{
		{Name: t, Unit: "ms", Map: t + "map", Desc: what},
		{Name: r, Unit: "1/s", Map: r + "map", Desc: "relaxation rate 1/" + t},
		{Name: "M0", Unit: "arbitrary", Map: "M0map", Desc: "signal extrapolated to TE = 0"},
	}
	if m.Offset {
		out = append(out, Param{Name: "offset", Unit: "arbitrary", Map: "offset", Desc: "constant signal offset"})
	}
	return out
}

// MinPoints is 2, or 3 with an offset or with ARLO (one more sample than parameters is
// needed for a standard error; with exactly as many, SE is NaN).
func (m *MonoExp) MinPoints() int {
	if m.Offset || m.method() == ARLO {
		return 3
	}
	return 2
}

// echoTimes checks a multi-echo protocol and returns its echo times.
func echoTimes(acq []volume.Acquisition, min int) ([]float64, error) {
	if len(acq) < min {
		return nil, protocolErr("%d volumes; the model needs at least %d echoes", len(acq), min)
	}
	te := make([]float64, len(acq))
	for i, a := range acq {
		if math.IsNaN(a.EchoTime) || math.IsInf(a.EchoTime, 0) || a.EchoTime < 0 {
			return nil, protocolErr("echo time of volume %d is missing or invalid", i+1)
		}
		te[i] = a.EchoTime
	}
	s := append([]float64(nil), te...)
	sort.Float64s(s)
	for i := 1; i < len(s); i++ {
		if s[i] == s[i-1] {
			return nil, protocolErr("echo time %g ms appears twice", s[i])
		}
	}
	return te, nil
}

// NewFitter checks the echo times and returns a workspace.
func (m *MonoExp) NewFitter(acq []volume.Acquisition) (Fitter, error) {
	te, err := echoTimes(acq, m.MinPoints())
	if err != nil {
		return nil, err
	}
	meth := m.method()
	switch meth {
	case LogLinear:
		if m.Sigma > 0 {
			return nil, fmt.Errorf("%w: the log-linear method cannot model the Rician noise floor; use nlls", ErrProtocol)
		}
		if m.Offset {
			return nil, fmt.Errorf("%w: the log-linear method cannot fit an offset; use nlls", ErrProtocol)
		}
	case NLLS:
	case ARLO:
		if !m.Star {
			return nil, fmt.Errorf("%w: model %s has no method %q (loglinear, nlls)", ErrProtocol, m.Name(), meth)
		}
		if m.Sigma > 0 || m.Offset {
			return nil, fmt.Errorf("%w: the arlo method fits neither an offset nor the Rician noise floor; use nlls", ErrProtocol)
		}
		if _, even := evenSpacing(te); !even {
			return nil, fmt.Errorf("%w: the arlo method needs evenly spaced echo times", ErrProtocol)
		}
	default:
		methods := "loglinear, nlls"
		if m.Star {
			methods += ", arlo"
		}
		return nil, fmt.Errorf("%w: model %s has no method %q (%s)", ErrProtocol, m.Name(), meth, methods)
	}
	lo, hi := m.bounds()
	np := 2
	if m.Offset {
		np = 3
	}
	f := &monoExpFitter{
		m: m, te: te, lo: lo, hi: hi, np: np,
		curve: newMonoExpCurve(te, m.Offset, m.Sigma),
	}
	if meth == NLLS && !m.Offset && m.Sigma == 0 && m.Solver == Dedicated {
		f.fast = &expLM{c: &f.curve, set: m.LM, rlo: 1 / (hi * 10), rhi: 1 / (lo / 10)}
	}
	if meth == NLLS {
		f.lm = newLM(m.LM, len(te), np)
		f.solver = f.lm
		if m.Solver == Gonum {
			f.solver = newGonumSolver(len(te), np)
		}
	}
	return f, nil
}

// monoExpCurve is f = M0·exp(−R·TE) + c with p = (M0, R [1/ms], c), or,
// with sigma > 0, the Rician expectation of that amplitude.
type monoExpCurve struct {
	te     []float64
	offset bool
	sigma  float64
	// uniform is set when the echo times are evenly spaced by step; then
	// exp(−R·TE_i) = exp(−R·TE_0)·q^i with q = exp(−R·step), two
	// exponentials per evaluation instead of one per echo (the product
	// accumulates at most n ulps of relative error).
	uniform bool
	step    float64
	ex      []float64
}

func newMonoExpCurve(te []float64, offset bool, sigma float64) monoExpCurve {
	c := monoExpCurve{te: te, offset: offset, sigma: sigma, ex: make([]float64, len(te))}
	c.step, c.uniform = evenSpacing(te)
	return c
}

// evenSpacing reports whether te is evenly spaced and returns the step.
func evenSpacing(te []float64) (float64, bool) {
	if len(te) < 3 {
		return 0, false
	}
	step := (te[len(te)-1] - te[0]) / float64(len(te)-1)
	if step == 0 {
		return 0, false
	}
	for i, t := range te {
		if math.Abs(t-(te[0]+step*float64(i))) > 1e-9*math.Abs(step) {
			return 0, false
		}
	}
	return step, true
}

// decay writes exp(−r·TE_i) into c.ex.
func (c *monoExpCurve) decay(r float64) {
	if c.uniform && r >= 0 {
		e := expNeg(-r * c.te[0])
		q := expNeg(-r * c.step)
		for i := range c.ex {
			c.ex[i] = e
			e *= q
		}
		return
	}
	for i, t := range c.te {
		c.ex[i] = math.Exp(-r * t)
	}
}

func (c *monoExpCurve) eval(f, jac, p []float64) {
	m0, r := p[0], p[1]
	np := 2
	var off float64
	if c.offset {
		np = 3
		off = p[2]
	}
	c.decay(r)
	for i, t := range c.te {
		e := c.ex[i]
		a := m0*e + off
		d := 1.0 // ∂f/∂a
		if c.sigma > 0 {
			a, d = ricianMeanDeriv(a, c.sigma)
		}
		f[i] = a
		if jac != nil {
			row := jac[i*np : i*np+np]
			row[0] = d * e
			row[1] = -d * m0 * t * e
			if c.offset {
				row[2] = d
			}
		}
	}
}

type monoExpFitter struct {
	m      *MonoExp
	te     []float64
	lo, hi float64 // bounds on T, ms
	np     int
	curve  monoExpCurve
	lm     *lm
	fast   *expLM // two-parameter fast path, nil when not applicable
	solver solver
	p      [3]float64
	plo    [3]float64
	phi    [3]float64
	se     [3]float64
}

// logLinear fits ln y = ln M0 − R·TE with weights y² (the variance of ln y
// is about σ²/y², so the weights undo the noise amplification of the log;
// common practice, e.g. Bevington & Robinson, Data Reduction and Error
// Analysis, §6). Samples that are not positive, finite and normal get
// weight 0. It returns M0, R (1/ms),
// the standard errors of R and M0, the number of samples used, and whether
// the fit was possible. One pass; the weighted residual sum comes from the
// accumulated moments.
func logLinear(te, y []float64) (m0, r, seR, seM0 float64, used int, ok bool) {
	var sw, sx, sy, sxx, sxy, syy float64
	for i, v := range y {
		if !logUsable(v) {
			continue
		}
		w := v * v
		l := logPos(v)
		t := te[i]
		wt, wl := w*t, w*l
		sw += w
		sx += wt
		sy += wl
		sxx += wt * t
		sxy += wt * l
		syy += wl * l
		used++
	}
	if used < 2 {
		return 0, 0, 0, 0, used, false
	}
	mx := sx / sw
	my := sy / sw
	dxx := sxx - sx*mx
	if !(dxx > 0) {
		return 0, 0, 0, 0, used, false
	}
	dxy := sxy - sx*my
	slope := dxy / dxx
	icpt := my - slope*mx
	m0 = expFast(icpt)
	r = -slope
	seR, seM0 = math.NaN(), math.NaN()
	if used > 2 {
		// Σw·(l − icpt − slope·t)² = Syy − Sxy²/Sxx (centred moments).
		chi := math.Max(syy-sy*my-dxy*slope, 0)
		s2 := chi / float64(used-2)
		seR = math.Sqrt(s2 / dxx)
		seM0 = m0 * math.Sqrt(s2*(1/sw+mx*mx/dxx))
	}
	return m0, r, seR, seM0, used, true
}

func (f *monoExpFitter) Fit(dst *Result, y []float64, _ Covariates) {
	if f.m.method() == ARLO {
		f.arlo(dst, y)
		return
	}
	m0, r, seR, seM0, used, ok := logLinear(f.te, y)
	if used < f.m.MinPoints() && f.m.method() == LogLinear {
		dst.fail(TooFewPoints)
		return
	}
	if f.m.method() == LogLinear {
		if !ok {
			dst.fail(NotConverged)
			return
		}
		f.curve.decay(r)
		var rss float64
		for i, e := range f.curve.ex {
			d := y[i] - m0*e
			rss += d * d
		}
		f.write(dst, m0, r, 0, seM0, seR, 0, y, rss, 0)
		return
	}
	// NLLS: start from the log-linear estimate when it is usable.
	if !ok || !(r > 0) || math.IsInf(m0, 0) {
		// Fall back to a start from the first sample and the echo spacing.
		m0, r = y[0], 1/(f.te[len(f.te)-1]+1)
	}
	if f.fast != nil {
		rss, iters, conv := f.fast.solve(y, &m0, &r)
		if !conv {
			dst.fail(NotConverged)
			dst.Iter = iters
			return
		}
		seM0, seR := f.fast.se(rss, len(y))
		f.write(dst, m0, r, 0, seM0, seR, 0, y, rss, iters)
		return
	}
	f.p[0], f.p[1] = m0, r
	f.plo[0], f.phi[0] = -math.MaxFloat64, math.MaxFloat64
	f.plo[1], f.phi[1] = 1/(f.hi*10), 1/(f.lo/10)
	if f.m.Offset {
		f.p[2] = 0
		f.plo[2], f.phi[2] = -math.MaxFloat64, math.MaxFloat64
	}
	p := f.p[:f.np]
	rss, iters, conv := f.solver.solve(&f.curve, y, p, f.plo[:f.np], f.phi[:f.np])
	dst.Iter = iters
	if !conv {
		dst.fail(NotConverged)
		return
	}
	se := f.se[:f.np]
	if f.m.Solver == Gonum {
		// The cross-check solver keeps no Jacobian: evaluate it once here.
		f.lm.setPoint(&f.curve, y, p)
	}
	if !f.lm.covDiag(se, rss) {
		for k := range se {
			se[k] = math.NaN()
		}
	}
	var off, seOff float64
	if f.m.Offset {
		off, seOff = p[2], se[2]
	}
	f.write(dst, p[0], p[1], off, se[0], se[1], seOff, y, rss, iters)
}

// write fills dst from (M0, R [1/ms], c) and their standard errors, and
// applies the bounds.
func (f *monoExpFitter) write(dst *Result, m0, r, off, seM0, seR, seOff float64, y []float64, rss float64, iters int) {
	t := 1 / r
	if !(t >= f.lo && t <= f.hi) || math.IsNaN(m0) {
		dst.fail(OutOfBounds)
		dst.Iter = iters
		return
	}
	dst.Values[0] = t
	dst.SE[0] = seR * t * t // delta method: |dT/dR| = T²
	dst.Values[1] = r * 1000
	dst.SE[1] = seR * 1000
	dst.Values[2] = m0
	dst.SE[2] = seM0
	if f.m.Offset {
		dst.Values[3] = off
		dst.SE[3] = seOff
	}
	dst.RSS = rss
	dst.R2 = rsquared(y, rss)
	dst.Iter = iters
	dst.Status = OK
}

// arlo fits by auto-regression on linear operations (see
// MonoExp.Estimator): T = Σx_i·d_i/Σd_i², then M0 = Σy·e/Σe² with
// e = exp(−TE/T), and the standard errors of (M0, R) from the 2×2 normal
// matrix of the mono-exponential at the solution.
func (f *monoExpFitter) arlo(dst *Result, y []float64) {
	step := f.curve.step
	var sxd, sdd float64
	for i := 2; i < len(y); i++ {
		x := step / 3 * (y[i-2] + 4*y[i-1] + y[i])
		d := y[i-2] - y[i]
		sxd += x * d
		sdd += d * d
	}
	t := sxd / sdd
	if !(sdd > 0) || !finite(t) {
		dst.fail(NotConverged)
		return
	}
	if !(t > 0) {
		dst.fail(OutOfBounds)
		return
	}
	r := 1 / t
	f.curve.decay(r)
	var sye, see float64
	for i, e := range f.curve.ex {
		sye += y[i] * e
		see += e * e
	}
	if !(see > 0) {
		dst.fail(NotConverged)
		return
	}
	m0 := sye / see
	var rss, a11, a12, a22 float64
	for i, e := range f.curve.ex {
		d := y[i] - m0*e
		j2 := -m0 * f.te[i] * e
		rss += d * d
		a11 += e * e
		a12 += e * j2
		a22 += j2 * j2
	}
	seM0, seR := math.NaN(), math.NaN()
	if det := a11*a22 - a12*a12; len(y) > 2 && det > 0 {
		s2 := rss / float64(len(y)-2)
		seM0, seR = math.Sqrt(s2*a22/det), math.Sqrt(s2*a11/det)
	}
	f.write(dst, m0, r, 0, seM0, seR, 0, y, rss, 0)
}
