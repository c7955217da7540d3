package fit

import (
	"fmt"
	"math"

	"github.com/tauvox/tauvox/volume"
)

// VariableFlipAngle is the spoiled gradient-echo (FLASH/SPGR) steady state
// at a fixed TR and several flip angles (Fram et al. 1987; Deoni et al.
// 2003, "DESPOT1"; check-values §1.1),
//
//	S(α) = M0·sin α·(1 − E1)/(1 − E1·cos α),   E1 = exp(−TR/T1),
//
// with the effective angle α = B1·α_nominal, B1 taken per voxel from the
// Covariates (1 when unknown; the BIDS TB1map convention). Ignoring a B1
// below 1 scales T1 down by roughly B1² (check-values §2.4).
//
// Outputs, in Result order: T1 (ms), R1 = 1000/T1 (1/s) and M0 (arbitrary;
// it includes the T2* decay at the echo time).
//
// Methods:
//
//   - Linear (the default, "linear"): the DESPOT1 linearisation
//
//     S/sin α = E1·(S/tan α) + M0·(1 − E1),
//
//     an ordinary least-squares line through (S/tan α, S/sin α) with slope
//     m = E1 and intercept c, so T1 = −TR/ln m and M0 = c/(1 − m). The
//     standard errors are those of the regression (s² from its residuals)
//     carried to T1, R1 and M0 by the delta method.
//
//   - NLLS ("nlls"): Levenberg–Marquardt on (M0, 1/T1) of the signal
//     equation, started from the linear estimate.
//
// A slope outside (0, 1) has no finite positive T1 and gives OutOfBounds.
type VariableFlipAngle struct {
	// Estimator is Linear or NLLS; the zero value means Linear.
	Estimator Method
	// MinT and MaxT bound the plausible T1 in ms; defaults 1 and 10000.
	// Estimates outside get OutOfBounds.
	MinT, MaxT float64
	// Solver selects the NLLS engine; the zero value is Dedicated.
	Solver Solver
	// LM tunes the dedicated solver; the zero value is right.
	LM LM
}

var _ Model = (*VariableFlipAngle)(nil)

func (m *VariableFlipAngle) method() Method {
	if m.Estimator == "" {
		return Linear
	}
	return m.Estimator
}

// Name returns "t1-vfa".
func (m *VariableFlipAngle) Name() string { return "t1-vfa" }

// Method returns the method name, "linear" or "nlls".
func (m *VariableFlipAngle) Method() string { return string(m.method()) }

// Outputs lists T1, R1 and M0.
func (m *VariableFlipAngle) Outputs() []Param {
	return []Param{
		{Name: "T1", Unit: "ms", Map: "T1map", Desc: "longitudinal relaxation time"},
		{Name: "R1", Unit: "1/s", Map: "R1map", Desc: "longitudinal relaxation rate 1/T1"},
		{Name: "M0", Unit: "arbitrary", Map: "M0map", Desc: "equilibrium signal (includes T2* decay at the echo time)"},
	}
}

// MinPoints is 2, the two parameters (with exactly two samples the standard
// errors are NaN).
func (m *VariableFlipAngle) MinPoints() int { return 2 }

// NewFitter checks that every volume has a flip angle in (0°, 180°) and
// the same repetition time, with at least two distinct angles, and returns
// a workspace.
func (m *VariableFlipAngle) NewFitter(acq []volume.Acquisition) (Fitter, error) {
	if len(acq) < 2 {
		return nil, protocolErr("%d volumes; the model needs at least 2 flip angles", len(acq))
	}
	tr := acq[0].RepetitionTime
	n := len(acq)
	alpha := make([]float64, n)
	distinct := false
	for i, a := range acq {
		if !finite(a.FlipAngle) || !(a.FlipAngle > 0 && a.FlipAngle < 180) {
			return nil, protocolErr("flip angle of volume %d is missing or outside (0°, 180°)", i+1)
		}
		if !finite(a.RepetitionTime) || !(a.RepetitionTime > 0) {
			return nil, protocolErr("repetition time of volume %d is missing or invalid", i+1)
		}
		if a.RepetitionTime != tr {
			return nil, protocolErr("repetition time differs between volumes (%g ms in volume 1, %g ms in volume %d)", tr, a.RepetitionTime, i+1)
		}
		if err := spoiledTRErr(m.Name(), a.RepetitionTime, i+1); err != nil {
			return nil, err
		}
		alpha[i] = a.FlipAngle * math.Pi / 180
		if a.FlipAngle != acq[0].FlipAngle {
			distinct = true
		}
	}
	if !distinct {
		return nil, protocolErr("all %d volumes have flip angle %g°; the model needs at least 2 distinct angles", n, acq[0].FlipAngle)
	}
	meth := m.method()
	if meth != Linear && meth != NLLS {
		return nil, fmt.Errorf("%w: model %s has no method %q (linear, nlls)", ErrProtocol, m.Name(), meth)
	}
	lo, hi := t1Bounds(m.MinT, m.MaxT)
	if lo >= hi {
		return nil, fmt.Errorf("%w: T1 bounds %g…%g ms are empty", ErrProtocol, lo, hi)
	}
	f := &vfaFitter{
		m: m, meth: meth, n: n, tr: tr, lo: lo, hi: hi, alpha: alpha,
		nom: newVFATrig(n), b1t: newVFATrig(n),
		xs: make([]float64, n), ys: make([]float64, n),
	}
	f.nom.set(alpha, 1)
	if meth == NLLS {
		f.lms = lmByCount(m.LM, m.MinPoints(), n, 2)
		f.yv = make([]float64, n)
		f.curve = vfaCurve{tr: tr}
		f.csin, f.ccos = make([]float64, n), make([]float64, n)
		if m.Solver == Gonum {
			f.gonum = newGonumSolver(n, 2)
		}
	}
	return f, nil
}

// vfaTrig holds sin, cos, 1/sin and 1/tan of the effective angles.
type vfaTrig struct {
	sin, cos, csc, cot []float64
}

func newVFATrig(n int) vfaTrig {
	return vfaTrig{sin: make([]float64, n), cos: make([]float64, n), csc: make([]float64, n), cot: make([]float64, n)}
}

func (t *vfaTrig) set(alpha []float64, b1 float64) {
	for i, a := range alpha {
		s, c := math.Sincos(b1 * a)
		t.sin[i], t.cos[i] = s, c
		t.csc[i], t.cot[i] = 1/s, c/s
	}
}

// vfaCurve is the SPGR signal with p = (M0, R [1/ms]) at fixed angles.
type vfaCurve struct {
	tr       float64
	sin, cos []float64
}

func (c *vfaCurve) eval(f, jac, p []float64) {
	m0, r := p[0], p[1]
	e := math.Exp(-r * c.tr)
	for i, s := range c.sin {
		co := c.cos[i]
		d := 1 / (1 - e*co)
		g := s * (1 - e) * d
		f[i] = m0 * g
		if jac != nil {
			jac[2*i] = g
			// ∂S/∂E1 = M0·sin α·(cos α − 1)/(1 − E1·cos α)², ∂E1/∂R = −TR·E1
			jac[2*i+1] = m0 * s * (1 - co) * d * d * c.tr * e
		}
	}
}

type vfaFitter struct {
	m      *VariableFlipAngle
	meth   Method
	n      int
	tr     float64
	lo, hi float64
	alpha  []float64 // nominal angles, radians
	nom    vfaTrig   // at the nominal angles (B1 = 1)
	b1t    vfaTrig   // per-voxel scratch for B1 ≠ 1
	xs, ys []float64 // linearised samples

	// NLLS
	lms   []*lm
	gonum *gonumSolver
	curve vfaCurve
	csin  []float64 // effective sin, cos of the finite samples
	ccos  []float64
	yv    []float64
	p     [2]float64
	plo   [2]float64
	phi   [2]float64
	se    [2]float64
}

// Fit fits one voxel. Non-finite samples are dropped.
func (f *vfaFitter) Fit(dst *Result, y []float64, cv Covariates) {
	dst.Iter = 0
	tg := &f.nom
	if b1 := cv.b1(); b1 != 1 {
		tg = &f.b1t
		tg.set(f.alpha, b1)
	}
	// Linearised samples and their means (two passes for accuracy).
	nv := 0
	var mx, my float64
	for i, v := range y {
		if !finite(v) {
			continue
		}
		x, w := v*tg.cot[i], v*tg.csc[i]
		f.xs[nv], f.ys[nv] = x, w
		mx += x
		my += w
		nv++
	}
	if nv < f.m.MinPoints() {
		dst.fail(TooFewPoints)
		return
	}
	fn := float64(nv)
	mx /= fn
	my /= fn
	var sxx, sxy float64
	for k := 0; k < nv; k++ {
		dx, dy := f.xs[k]-mx, f.ys[k]-my
		sxx += dx * dx
		sxy += dx * dy
	}
	if !(sxx > 0) {
		// All finite samples at one angle (or all zero): no line.
		dst.fail(NotConverged)
		return
	}
	slope := sxy / sxx
	icpt := my - slope*mx
	if f.meth == NLLS {
		f.nlls(dst, y, tg, nv, slope, icpt)
		return
	}
	if !(slope > 0 && slope < 1) {
		dst.fail(OutOfBounds)
		return
	}
	lnm := math.Log(slope)
	t1 := -f.tr / lnm
	m0 := icpt / (1 - slope)
	if !(t1 >= f.lo && t1 <= f.hi) || !finite(m0) {
		dst.fail(OutOfBounds)
		return
	}
	// Signal-domain residuals: the fitted line gives S = c·sin α/(1 − m·cos α).
	var rss float64
	for i, v := range y {
		if !finite(v) {
			continue
		}
		d := v - icpt*tg.sin[i]/(1-slope*tg.cos[i])
		rss += d * d
	}
	dst.Values[0] = t1
	dst.Values[1] = -lnm / f.tr * 1000
	dst.Values[2] = m0
	if nv > 2 {
		// Regression covariance: var m = s²/Sxx, var c = s²(1/n + x̄²/Sxx),
		// cov(m, c) = −x̄·s²/Sxx (common practice, e.g. Bevington &
		// Robinson, ch. 6).
		var res2 float64
		for k := 0; k < nv; k++ {
			d := f.ys[k] - my - slope*(f.xs[k]-mx)
			res2 += d * d
		}
		s2 := res2 / (fn - 2)
		vm := s2 / sxx
		vc := s2 * (1/fn + mx*mx/sxx)
		vmc := -mx * s2 / sxx
		seM := math.Sqrt(vm)
		// delta method: dT1/dm = TR/(m·ln²m), dR1/dm = −1/(m·TR),
		// ∂M0/∂c = 1/(1−m), ∂M0/∂m = c/(1−m)².
		dst.SE[0] = seM * f.tr / (slope * lnm * lnm)
		dst.SE[1] = seM / (slope * f.tr) * 1000
		gc, gm := 1/(1-slope), icpt/((1-slope)*(1-slope))
		dst.SE[2] = math.Sqrt(math.Max(0, gc*gc*vc+gm*gm*vm+2*gc*gm*vmc))
	} else {
		dst.SE[0], dst.SE[1], dst.SE[2] = math.NaN(), math.NaN(), math.NaN()
	}
	dst.RSS = rss
	dst.R2 = f.r2(y, rss)
	dst.Status = OK
}

// r2 is rsquared over the finite samples of y.
func (f *vfaFitter) r2(y []float64, rss float64) float64 {
	var mean, n float64
	for _, v := range y {
		if finite(v) {
			mean += v
			n++
		}
	}
	mean /= n
	var tss float64
	for _, v := range y {
		if finite(v) {
			d := v - mean
			tss += d * d
		}
	}
	if tss == 0 {
		return math.NaN()
	}
	return 1 - rss/tss
}

// nlls polishes the linear estimate (slope m, intercept c) by
// Levenberg–Marquardt on the signal equation.
func (f *vfaFitter) nlls(dst *Result, y []float64, tg *vfaTrig, nv int, slope, icpt float64) {
	nvk := 0
	for i, v := range y {
		if !finite(v) {
			continue
		}
		f.yv[nvk] = v
		f.csin[nvk], f.ccos[nvk] = tg.sin[i], tg.cos[i]
		nvk++
	}
	c := &f.curve
	c.sin, c.cos = f.csin[:nv], f.ccos[:nv]
	rlo, rhi := 1/(f.hi*10), 10/f.lo
	var m0, r float64
	if slope > 0 && slope < 1 {
		m0, r = icpt/(1-slope), -math.Log(slope)/f.tr
	}
	if !(r >= rlo && r <= rhi) || !finite(m0) {
		// Start from T1 = 1000 ms (a typical tissue value, common
		// practice) with M0 in closed form: M0 = Σy·g/Σg².
		r = 1.0 / 1000
		e := math.Exp(-r * f.tr)
		var syg, sgg float64
		for k := 0; k < nv; k++ {
			g := c.sin[k] * (1 - e) / (1 - e*c.cos[k])
			syg += f.yv[k] * g
			sgg += g * g
		}
		m0 = syg / sgg
	}
	f.p = [2]float64{m0, r}
	f.plo = [2]float64{-math.MaxFloat64, rlo}
	f.phi = [2]float64{math.MaxFloat64, rhi}
	p := f.p[:]
	yv := f.yv[:nv]
	s := f.lms[nv]
	var sol solver = s
	if f.gonum != nil {
		sol = f.gonum
	}
	rss, iters, conv := sol.solve(c, yv, p, f.plo[:], f.phi[:])
	dst.Iter = iters
	if !conv {
		dst.fail(NotConverged)
		return
	}
	if f.gonum != nil {
		rss = s.setPoint(c, yv, p)
	}
	m0, r = p[0], p[1]
	t1 := 1 / r
	if !(t1 >= f.lo && t1 <= f.hi) || !finite(m0) {
		dst.fail(OutOfBounds)
		dst.Iter = iters
		return
	}
	se := f.se[:]
	if !s.covDiag(se, rss) {
		se[0], se[1] = math.NaN(), math.NaN()
	}
	dst.Values[0] = t1
	dst.SE[0] = se[1] * t1 * t1 // delta method: |dT1/dR| = T1²
	dst.Values[1] = r * 1000
	dst.SE[1] = se[1] * 1000
	dst.Values[2] = m0
	dst.SE[2] = se[0]
	dst.RSS = rss
	dst.R2 = rsquared(yv, rss)
	dst.Status = OK
}
