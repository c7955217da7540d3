package fit

import (
	"math"

	"github.com/tauvox/tauvox/internal/halves"
	"github.com/tauvox/tauvox/volume"
)

// The automatic mask keeps every voxel whose largest finite sample (its
// peak) reaches a threshold. Two rules set the threshold:
//
//   - "noise": when the image holds enough air whose peaks follow the
//     distribution of the largest of n Rayleigh samples, σ is estimated
//     from that air and the threshold is the level that a voxel of pure
//     air exceeds with probability AirRate (see NoiseThreshold). Every
//     voxel whose signal stands clearly above the noise is fitted,
//     however dim it is beside the brightest material.
//   - "otsu": otherwise (no air, air set to zero, air that is not Rayleigh
//     distributed, as after a sum-of-squares coil combination) half of
//     Otsu's threshold of the peaks (Otsu 1979, IEEE Trans Syst Man
//     Cybern 9:62), the rule tauvox used before the noise rule.

// AirRate is the designed false-exceedance rate of the noise rule: the
// probability that a voxel holding only air (Rayleigh noise in every
// volume) is fitted. One air voxel in a thousand trades a few speckles in
// the air for sensitivity: with n = 10 volumes the threshold is 4.29 σ, so
// a voxel whose true signal is 5 σ in a single volume is kept with
// probability ≈ 0.77, and one at 6 σ with ≈ 0.96 (Rician sample; Gudbjartsson
// & Patz 1995, Magn Reson Med 34:910).
const AirRate = 1e-3

// minAir is the least number of air voxels (positive peak below the Otsu
// level) the noise rule needs.
const minAir = 200

// rayleighTol is the largest relative difference between the air peaks'
// quartiles and those of the fitted distribution for the air to count as
// Rayleigh noise.
const rayleighTol = 0.1

// fineBins is the number of bins of the peak histogram the noise rule reads.
const fineBins = 1 << 16

// AutoMask is the automatic mask of a series: its rule, threshold and, for
// the noise rule, the noise level it was derived from.
type AutoMask struct {
	Threshold float64 // the level a voxel's peak must reach (0: none)
	Rule      string  // "noise" or "otsu" ("" when no sample is positive)
	Sigma     float64 // noise SD from the air (noise rule), 0 otherwise
	Rate      float64 // designed false-exceedance rate per air voxel (noise rule)
	Air       int     // air voxels the noise estimate used (noise rule)
	Otsu      float64 // half of Otsu's threshold of the peaks
	// Why says why the noise rule was not used (otsu rule).
	Why string
}

// AutoThreshold returns the automatic masking threshold of a series:
// AutoMaskOf(im).Threshold.
func AutoThreshold(im *volume.Image) float64 {
	return AutoMaskOf(im).Threshold
}

// AutoMaskOf returns the automatic mask of a whole series.
func AutoMaskOf(im *volume.Image) AutoMask {
	var p PeakHistogram
	peaks := p.Peaks(nil, im)
	p.Add(peaks)
	return p.Mask()
}

// PeaksMask returns the automatic mask from the per-voxel peaks of a whole
// series of n volumes (as Peaks, or ResetPeaks and MaxInto per volume,
// give them): AutoMaskOf that series.
func PeaksMask(peaks []float32, n int) AutoMask {
	var p PeakHistogram
	p.Volumes = n
	if len(peaks) < 1<<18 {
		p.Raise(peaks)
		p.Add(peaks)
		return p.Mask()
	}
	// A large series: the two halves of the voxels on two CPUs, into two
	// histograms with the same top, then added. Counts are whole numbers,
	// so the sum is exactly the count of the whole.
	var q PeakHistogram
	a, b := peaks[:len(peaks)/2], peaks[len(peaks)/2:]
	halves.Both(func() { p.Raise(a) }, func() { q.Raise(b) })
	p.h.Top = max(p.h.Top, q.h.Top)
	q.h.Top = p.h.Top
	halves.Both(func() { p.Add(a) }, func() { q.Add(b) })
	for i, c := range q.h.Count {
		p.h.Count[i] += c
	}
	p.h.Total += q.h.Total
	for i, c := range q.fine.count {
		p.fine.count[i] += c
	}
	return p.Mask()
}

// RayleighMaxCDF is the distribution function of the largest of n
// independent Rayleigh samples of unit σ: (1 − exp(−x²/2))ⁿ (the Rayleigh
// distribution of magnitude air: Henkelman 1985, Med Phys 12:232).
func RayleighMaxCDF(x float64, n int) float64 {
	if !(x > 0) {
		return 0
	}
	return math.Pow(-math.Expm1(-x*x/2), float64(n))
}

// RayleighMaxQuantile inverts RayleighMaxCDF: the x (in units of σ) below
// which the largest of n Rayleigh samples falls with probability p.
func RayleighMaxQuantile(p float64, n int) float64 {
	switch {
	case !(p > 0):
		return 0
	case p >= 1:
		return math.Inf(1)
	}
	// 1 − p^(1/n), kept accurate for p near 1.
	q := -math.Expm1(math.Log(p) / float64(n))
	return math.Sqrt(-2 * math.Log(q))
}

// NoiseThreshold returns the noise rule's threshold for noise SD sigma and
// n volumes: the level the peak of an air voxel exceeds with probability
// AirRate.
func NoiseThreshold(sigma float64, n int) float64 {
	return sigma * RayleighMaxQuantile(1-AirRate, n)
}

// BackgroundSigma estimates the noise SD σ of the complex channels from
// the air around the object: every finite, non-zero sample of the voxels
// whose largest sample is below thr (in all volumes). In air the magnitude
// is Rayleigh distributed with mean σ·√(π/2) (Henkelman 1985, Med Phys
// 12:232; check-values §1.4), so σ = mean/√(π/2). Exact zeros are left
// out, because some scanners zero the air. It reports false when fewer than
// 100 samples qualify. For sum-of-squares multi-coil images the air is not
// Rayleigh distributed and this estimate is biased (Constantinides et al.
// 1997).
func BackgroundSigma(im *volume.Image, thr float64) (float64, bool) {
	var b Background
	b.Add(im, thr)
	return b.Sigma()
}

// fineHist is a histogram of positive peaks over (0, top] in fineBins bins.
type fineHist struct {
	count []uint32
	top   float64
}

func (h *fineHist) add(peaks []float32, top float64) {
	if !(top > 0) {
		return
	}
	if h.count == nil {
		h.count = make([]uint32, fineBins)
		h.top = top
	}
	scale := (fineBins - 1) / h.top
	for _, s := range peaks {
		v := float64(s)
		if !(v > 0) || math.IsInf(v, 0) {
			continue
		}
		b := int(v * scale)
		if b >= fineBins {
			b = fineBins - 1
		}
		h.count[b]++
	}
}

// below returns the number of peaks in the bins wholly below x, and that
// bin index.
func (h *fineHist) below(x float64) (int, int) {
	end := min(int(x/h.top*(fineBins-1)), fineBins)
	n := 0
	for _, c := range h.count[:max(end, 0)] {
		n += int(c)
	}
	return n, max(end, 0)
}

// quantile returns the level below which a fraction p of the first end
// bins' n peaks lie, interpolating linearly within a bin.
func (h *fineHist) quantile(p float64, end, n int) float64 {
	want := p * float64(n)
	w := h.top / (fineBins - 1)
	cum := 0.0
	for b, c := range h.count[:end] {
		if c == 0 {
			continue
		}
		if cum+float64(c) >= want {
			return (float64(b) + (want-cum)/float64(c)) * w
		}
		cum += float64(c)
	}
	return float64(end) * w
}

// noiseMask tries the noise rule on the histogram of peaks of n volumes,
// starting from the air below otsu (half Otsu's threshold). It returns
// the mask and "" or the reason the rule does not apply.
func (h *fineHist) noiseMask(otsu float64, n int) (AutoMask, string) {
	if h.count == nil || !(otsu > 0) || n < 1 {
		return AutoMask{}, "no air"
	}
	// Fixed point: σ from the median of the peaks below t, corrected for
	// the truncation at t (the median of the truncated distribution is the
	// quantile ½·F(t/σ)); then t = NoiseThreshold(σ). The air's median is
	// robust to a minority of dim material below the Otsu level, which
	// the first step's t, when it is high, lets in; once t is set by σ such
	// material lies above it.
	t := otsu
	sigma := 0.0
	var air, end int
	for it := 0; it < 50; it++ {
		air, end = h.below(t)
		if air < minAir {
			return AutoMask{}, "too little air"
		}
		m := h.quantile(0.5, end, air)
		s := m / RayleighMaxQuantile(0.5, n)
		for k := 0; k < 20; k++ {
			s = m / RayleighMaxQuantile(0.5*RayleighMaxCDF(t/s, n), n)
		}
		nt := NoiseThreshold(s, n)
		done := sigma > 0 && math.Abs(s-sigma) <= 1e-9*sigma
		sigma = s
		if done {
			break
		}
		t = nt
	}
	// The air must look like Rayleigh noise: both quartiles of the air's
	// peaks within rayleighTol of the fitted distribution's.
	ft := RayleighMaxCDF(t/sigma, n)
	for _, p := range []float64{0.25, 0.75} {
		want := sigma * RayleighMaxQuantile(p*ft, n)
		got := h.quantile(p, end, air)
		if math.Abs(got/want-1) > rayleighTol {
			return AutoMask{}, "air not Rayleigh distributed"
		}
	}
	thr := NoiseThreshold(sigma, n)
	return AutoMask{Threshold: thr, Rule: "noise", Sigma: sigma, Rate: AirRate, Air: air, Otsu: otsu}, ""
}
