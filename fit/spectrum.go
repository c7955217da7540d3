package fit

import (
	"fmt"
	"math"

	"github.com/tauvox/tauvox/volume"
)

// Spectrum is the multi-component T2 model of a multi-echo spin echo: the
// decay is a non-negative sum over a fixed log-spaced grid of T2 values,
//
//	y_i = Σ_j s_j·K(t_i; T2_j),   s_j ≥ 0,
//
// with K = exp(−t/T2) or, with EPGBasis, the EPG echo train of a CPMG
// with refocusing angle α (Whittall & MacKay 1989, J Magn Reson 84:134;
// Prasloski et al. 2012, MRM 67:1803; check-values §1.3).
//
// Estimation, per voxel:
//
//  1. With EPGBasis, α is chosen first, by a 1-D search minimising the
//     unregularised NNLS misfit (Prasloski et al. 2012): the misfit is
//     computed on a grid of angles (AngleMin…AngleMax, step AngleStep),
//     the minimum refined by the vertex of the parabola through the best
//     grid angle and its neighbours, then once more by the parabola
//     through exact bases at that vertex and ±AngleStep/5, and the basis
//     recomputed exactly at the final angle.
//  2. The unregularised NNLS solution gives χ²_min = ‖K·s − y‖²
//     (Lawson & Hanson 1974 active-set method; see nnls.go).
//  3. Tikhonov regularisation, min ‖K·s − y‖² + μ‖s‖² over s ≥ 0 (the
//     stacked NNLS of [K; √μ·I], [y; 0]), with μ chosen per voxel so that
//     the misfit grows to Chi2Factor·χ²_min (default 1.02, about 2 %;
//     Whittall & MacKay 1989). χ²(μ) increases with μ, so the search is a
//     bisection on log μ: μ is expressed in units of the mean squared
//     basis column norm, trace(KᵀK)/m; if μ = 10 of these still meets the
//     target it is taken; if μ = 1e-7 already exceeds it (as for noiseless
//     data, where χ²_min is rounding), the unregularised solution is
//     kept; otherwise 8 bisection steps over those 8 decades narrow μ to
//     a factor 10^(8/256) ≈ 1.07, and the largest μ found that meets the
//     target is used. Each NNLS is warm-started from the previous
//     solution's support.
//
// Outputs: MWF, the fraction of the total amplitude Σs in the short
// window T2 < Window (default 40 ms, the myelin-water window at 3 T,
// check-values §1.3 [M]), in percent (0–100), following the BIDS
// recommendation for MWFmap (check-values §3.6); the geometric-mean T2 of
// the short and of the long window (exp of the s-weighted mean of ln T2;
// NaN where the window holds no amplitude); M0 = Σs (the signal at t = 0);
// and with EPGBasis the fitted refocusing angle. The regularised NNLS has
// no closed-form standard error: the SE outputs are NaN.
type Spectrum struct {
	// MinT and MaxT span the T2 basis in ms; defaults 3 and 2000. The
	// lower limit lies well below the usual first echo time so that the
	// regularised peak of a short pool is not cut at the edge of the
	// basis: with 10 ms, the two-pool test (20 and 80 ms, fraction 0.15,
	// SNR 200, TE 10…320 ms) reads a mean MWF of 0.118, with 3 ms 0.146
	// (TestSpectrumTwoPool; amplitude below about ESP/3 is invisible to
	// the data and stays near 0 under the regularisation).
	MinT, MaxT float64
	// BasisSize is the number of log-spaced basis T2 values; default 60.
	BasisSize int
	// Window is the upper T2 limit of the short (myelin-water) window in
	// ms; default 40.
	Window float64
	// Chi2Factor is the allowed misfit increase of the regularisation;
	// default 1.02. 1 switches the regularisation off.
	Chi2Factor float64
	// EPGBasis uses EPG echo trains instead of exponentials, with a
	// fitted refocusing angle.
	EPGBasis bool
	// T1 is the fixed T1 of the EPG basis in ms; default 1000.
	T1 float64
	// AngleMin, AngleMax and AngleStep set the refocusing-angle search of
	// the EPG basis in degrees; defaults 90, 180 and 5.
	AngleMin, AngleMax, AngleStep float64
}

var _ Model = (*Spectrum)(nil)

// Name returns "t2-spectrum".
func (m *Spectrum) Name() string { return "t2-spectrum" }

// Method returns "nnls".
func (m *Spectrum) Method() string { return "nnls" }

// Outputs lists MWF, T2short, T2long, M0 and, with EPGBasis, the angle.
func (m *Spectrum) Outputs() []Param {
	out := []Param{
		{Name: "MWF", Unit: "%", Map: "MWFmap", Desc: "fraction of the T2 spectrum in the short window (myelin water), percent"},
		{Name: "T2short", Unit: "ms", Map: "T2short", Desc: "geometric-mean T2 of the short window"},
		{Name: "T2long", Unit: "ms", Map: "T2long", Desc: "geometric-mean T2 of the long window"},
		{Name: "M0", Unit: "arbitrary", Map: "M0map", Desc: "total amplitude of the T2 spectrum (signal at t = 0)"},
	}
	if m.EPGBasis {
		out = append(out, Param{Name: "FA", Unit: "deg", Map: "refocusangle", Desc: "fitted refocusing angle of the EPG basis"})
	}
	return out
}

// MinPoints is 4.
func (m *Spectrum) MinPoints() int { return 4 }

type spectrumSettings struct {
	lo, hi, window, chi2, t1 float64
	size                     int
	amin, amax, astep        float64
}

func (m *Spectrum) settings() spectrumSettings {
	s := spectrumSettings{lo: m.MinT, hi: m.MaxT, size: m.BasisSize, window: m.Window, chi2: m.Chi2Factor, t1: m.T1, amin: m.AngleMin, amax: m.AngleMax, astep: m.AngleStep}
	def := func(v *float64, d float64) {
		if !(*v > 0) {
			*v = d
		}
	}
	def(&s.lo, 3)
	def(&s.hi, 2000)
	def(&s.window, 40)
	def(&s.chi2, 1.02)
	def(&s.t1, 1000)
	def(&s.amin, 90)
	def(&s.amax, 180)
	def(&s.astep, 5)
	if s.size <= 0 {
		s.size = 60
	}
	return s
}

// T2Basis returns the basis T2 values (ms) of the spectra.
func (m *Spectrum) T2Basis() []float64 {
	s := m.settings()
	return logGrid(s.lo, s.hi, s.size)
}

func logGrid(lo, hi float64, n int) []float64 {
	g := make([]float64, n)
	step := math.Log(hi/lo) / float64(max(n-1, 1))
	for i := range g {
		g[i] = lo * math.Exp(step*float64(i))
	}
	return g
}

// NewFitter checks the echo times (any for the exponential basis; one
// CPMG train, TE = k·ESP, for the EPG basis) and precomputes the basis.
func (m *Spectrum) NewFitter(acq []volume.Acquisition) (Fitter, error) {
	return m.newFitter(acq)
}

func (m *Spectrum) newFitter(acq []volume.Acquisition) (*spectrumFitter, error) {
	st := m.settings()
	if st.lo >= st.hi || st.size < 2 {
		return nil, fmt.Errorf("%w: T2 basis %g…%g ms with %d values is empty", ErrProtocol, st.lo, st.hi, st.size)
	}
	if st.chi2 < 1 {
		return nil, fmt.Errorf("%w: chi-square factor %g is below 1", ErrProtocol, st.chi2)
	}
	nb := st.size
	f := &spectrumFitter{m: m, st: st, nb: nb, t2: logGrid(st.lo, st.hi, nb)}
	f.logT2 = make([]float64, nb)
	for j, t := range f.t2 {
		f.logT2[j] = math.Log(t)
	}
	if !m.EPGBasis {
		te, err := echoTimes(acq, m.MinPoints())
		if err != nil {
			return nil, err
		}
		f.n = len(te)
		k := make([]float64, f.n*nb)
		for i, t := range te {
			for j, t2 := range f.t2 {
				k[i*nb+j] = math.Exp(-t / t2)
			}
		}
		f.angles = []float64{math.NaN()}
		f.ks = [][]float64{k}
	} else {
		if st.amin >= st.amax || st.amax > 180 {
			return nil, fmt.Errorf("%w: refocusing-angle search %g…%g° is empty or beyond 180°", ErrProtocol, st.amin, st.amax)
		}
		esp, idx, err := cpmgEchoes(acq, m.MinPoints())
		if err != nil {
			return nil, err
		}
		f.n, f.idx, f.esp = len(idx), idx, esp
		kmax := 0
		for _, k := range idx {
			kmax = max(kmax, k+1)
		}
		f.epg = NewEPG(kmax)
		f.train = make([]float64, kmax)
		na := int(math.Round((st.amax-st.amin)/st.astep)) + 1
		na = max(na, 3)
		for a := 0; a < na; a++ {
			al := st.amin + (st.amax-st.amin)*float64(a)/float64(na-1)
			k := make([]float64, f.n*nb)
			f.epgBasis(k, al)
			f.angles = append(f.angles, al)
			f.ks = append(f.ks, k)
		}
		f.kw = make([]float64, f.n*nb)
		f.gw = make([]float64, nb*nb)
		f.miss = make([]float64, na)
	}
	for _, k := range f.ks {
		g := make([]float64, nb*nb)
		gram(g, k, f.n, nb)
		f.gs = append(f.gs, g)
	}
	f.h = make([]float64, nb)
	f.gm = make([]float64, nb*nb)
	f.sol = newNNLS(nb)
	f.s = make([]float64, nb)
	f.fit = make([]float64, f.n)
	return f, nil
}

// epgBasis writes the EPG basis for refocusing angle a (degrees) into k.
func (f *spectrumFitter) epgBasis(k []float64, a float64) {
	nb := f.nb
	for j, t2 := range f.t2 {
		f.epg.CPMG(f.train, a, f.esp, f.st.t1, t2)
		for i, e := range f.idx {
			k[i*nb+j] = f.train[e]
		}
	}
}

// gram writes g = KᵀK (nb×nb) for the n×nb row-major k.
func gram(g, k []float64, n, nb int) {
	for i := range g {
		g[i] = 0
	}
	for i := 0; i < n; i++ {
		row := k[i*nb : i*nb+nb]
		for a, va := range row {
			ga := g[a*nb : a*nb+nb]
			for b := a; b < nb; b++ {
				ga[b] += va * row[b]
			}
		}
	}
	for a := 0; a < nb; a++ {
		for b := 0; b < a; b++ {
			g[a*nb+b] = g[b*nb+a]
		}
	}
}

type spectrumFitter struct {
	m      *Spectrum
	st     spectrumSettings
	n, nb  int
	t2     []float64
	logT2  []float64
	angles []float64   // EPG basis angles (NaN for the exponential basis)
	ks, gs [][]float64 // basis and Gram matrix per angle

	// EPG basis
	idx    []int
	esp    float64
	epg    *EPG
	train  []float64
	kw, gw []float64 // basis at the refined angle
	miss   []float64 // misfit per grid angle

	// per voxel
	h, gm []float64
	sol   *nnls
	s     []float64
	fit   []float64
	angle float64
}

// misfit returns ‖K·x − y‖² for the solution x in f.sol.x.
func (f *spectrumFitter) misfit(k, y []float64) float64 {
	nb := f.nb
	x := f.sol.x
	var chi float64
	for i, v := range y {
		row := k[i*nb : i*nb+nb]
		var s float64
		for _, j := range f.sol.p {
			s += row[j] * x[j]
		}
		f.fit[i] = s
		d := s - v
		chi += d * d
	}
	return chi
}

// project writes h = Kᵀy.
func (f *spectrumFitter) project(k, y []float64) {
	nb := f.nb
	for j := range f.h {
		f.h[j] = 0
	}
	for i, v := range y {
		row := k[i*nb : i*nb+nb]
		for j, e := range row {
			f.h[j] += e * v
		}
	}
}

// regularised solves with G + μI and returns the misfit.
func (f *spectrumFitter) regularised(k, g, y []float64, mu float64) (float64, bool) {
	nb := f.nb
	copy(f.gm, g)
	for j := 0; j < nb; j++ {
		f.gm[j*nb+j] += mu
	}
	_, ok := f.sol.solve(f.gm, f.h, true)
	return f.misfit(k, y), ok
}

// vertex returns the offset from the middle point of the vertex of the
// parabola through three misfits spaced h apart,
//
//	h·(m₋ − m₊)/(2·(m₋ − 2m₀ + m₊)),
//
// clamped to ±h/2 (0 when the points are not convex).
func vertex(h, mm, m0, mp float64) float64 {
	den := mm - 2*m0 + mp
	if !(den > 0) {
		return 0
	}
	return math.Max(-h/2, math.Min(h/2, h*(mm-mp)/(2*den)))
}

// exactMisfit writes into dst the unregularised NNLS misfit of y on the
// EPG basis at angle a (degrees), computed into f.kw and f.gw.
func (f *spectrumFitter) exactMisfit(y []float64, a float64, dst *float64) bool {
	f.epgBasis(f.kw, math.Min(a, 180))
	gram(f.gw, f.kw, f.n, f.nb)
	f.project(f.kw, y)
	if _, ok := f.sol.solve(f.gw, f.h, true); !ok {
		return false
	}
	*dst = f.misfit(f.kw, y)
	return true
}

// spectrum fits y and leaves the spectrum in f.s; it returns the misfit
// of the chosen solution and false when an NNLS failed.
func (f *spectrumFitter) spectrum(y []float64) (float64, bool) {
	k, g := f.ks[0], f.gs[0]
	f.angle = math.NaN()
	x := f.sol.x
	if f.m.EPGBasis {
		best := 0
		for a := range f.angles {
			f.project(f.ks[a], y)
			if _, ok := f.sol.solve(f.gs[a], f.h, a > 0); !ok {
				return 0, false
			}
			f.miss[a] = f.misfit(f.ks[a], y)
			if f.miss[a] < f.miss[best] {
				best = a
			}
		}
		f.angle = f.angles[best]
		k, g = f.ks[best], f.gs[best]
		if best > 0 && best < len(f.angles)-1 {
			// Refine by parabolic interpolation twice: through the grid
			// angles around the best, then through exact bases at the
			// vertex and ±h/5 (the misfit is not a parabola over a whole
			// grid step: very short T2 components absorb part of an angle
			// error on one side).
			h := f.angles[1] - f.angles[0]
			a1 := f.angle + vertex(h, f.miss[best-1], f.miss[best], f.miss[best+1])
			d := h / 5
			var mm [3]float64
			for i := range mm {
				if !f.exactMisfit(y, a1+d*float64(i-1), &mm[i]) {
					return 0, false
				}
			}
			f.angle = math.Min(a1+vertex(d, mm[0], mm[1], mm[2]), f.st.amax)
			f.epgBasis(f.kw, f.angle)
			gram(f.gw, f.kw, f.n, f.nb)
			k, g = f.kw, f.gw
		}
	}
	f.project(k, y)
	for j := range x {
		x[j] = 0
	}
	if _, ok := f.sol.solve(g, f.h, false); !ok {
		return 0, false
	}
	chiMin := f.misfit(k, y)
	copy(f.s, x)
	chi := chiMin
	if f.st.chi2 > 1 {
		var tr float64
		for j := 0; j < f.nb; j++ {
			tr += g[j*f.nb+j]
		}
		scale := tr / float64(f.nb)
		target := f.st.chi2 * chiMin
		// μ = scale·10^e, e in [−7, 1].
		lo, hi := -7.0, 1.0
		c, ok := f.regularised(k, g, y, scale*math.Pow(10, hi))
		if !ok {
			return 0, false
		}
		if c <= target {
			copy(f.s, x)
			chi = c
		} else {
			c, ok = f.regularised(k, g, y, scale*math.Pow(10, lo))
			if !ok {
				return 0, false
			}
			if c <= target {
				copy(f.s, x)
				chi = c
				for it := 0; it < 8; it++ {
					mid := (lo + hi) / 2
					c, ok = f.regularised(k, g, y, scale*math.Pow(10, mid))
					if !ok {
						return 0, false
					}
					if c <= target {
						lo = mid
						copy(f.s, x)
						chi = c
					} else {
						hi = mid
					}
				}
			}
		}
	}
	return chi, true
}

// Fit fits one voxel.
func (f *spectrumFitter) Fit(dst *Result, y []float64, _ Covariates) {
	dst.Iter = 0
	for _, v := range y {
		if !finite(v) {
			dst.fail(TooFewPoints)
			return
		}
	}
	chi, ok := f.spectrum(y)
	if !ok {
		dst.fail(NotConverged)
		return
	}
	var tot, ss, sl, ls, ll float64
	for j, v := range f.s {
		if v <= 0 {
			continue
		}
		tot += v
		if f.t2[j] < f.st.window {
			ss += v
			ls += v * f.logT2[j]
		} else {
			sl += v
			ll += v * f.logT2[j]
		}
	}
	if !(tot > 0) {
		dst.fail(NotConverged)
		return
	}
	nan := math.NaN()
	dst.Values[0] = 100 * ss / tot
	dst.Values[1], dst.Values[2] = nan, nan
	if ss > 0 {
		dst.Values[1] = math.Exp(ls / ss)
	}
	if sl > 0 {
		dst.Values[2] = math.Exp(ll / sl)
	}
	dst.Values[3] = tot
	if f.m.EPGBasis {
		dst.Values[4] = f.angle
	}
	for i := range dst.SE {
		dst.SE[i] = nan
	}
	dst.RSS = chi
	dst.R2 = rsquared(y, chi)
	dst.Status = OK
}

// Spectra fits the voxels of im with the given indices (into one volume,
// NIfTI order) and writes each voxel's spectrum, the amplitudes on
// T2Basis(), into dst[k] (allocated when dst is nil or short, and each
// row when nil or short), and returns dst. A voxel with a non-finite
// sample or a failed fit gets a row of NaN. It runs on the calling
// goroutine. It returns an error for a protocol the model cannot use or an
// index outside the image.
func (m *Spectrum) Spectra(dst [][]float64, im *volume.Image, voxels []int) ([][]float64, error) {
	if len(im.Acq) != im.Volumes() {
		return nil, fmt.Errorf("%w: %d volumes but %d acquisition entries", ErrProtocol, im.Volumes(), len(im.Acq))
	}
	f, err := m.newFitter(im.Acq)
	if err != nil {
		return nil, err
	}
	if cap(dst) < len(voxels) {
		dst = make([][]float64, len(voxels))
	}
	dst = dst[:len(voxels)]
	nv, nt := im.Voxels(), im.Volumes()
	y := make([]float64, nt)
	for k, v := range voxels {
		if v < 0 || v >= nv {
			return nil, fmt.Errorf("fit: voxel index %d outside the image (%d voxels)", v, nv)
		}
		if cap(dst[k]) < f.nb {
			dst[k] = make([]float64, f.nb)
		}
		row := dst[k][:f.nb]
		dst[k] = row
		good := true
		for t := 0; t < nt; t++ {
			y[t] = float64(im.Data[t*nv+v])
			good = good && finite(y[t])
		}
		if good {
			_, good = f.spectrum(y)
		}
		if !good {
			for j := range row {
				row[j] = math.NaN()
			}
			continue
		}
		copy(row, f.s)
	}
	return dst, nil
}
