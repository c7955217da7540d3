package fit

import (
	"math"

	"github.com/tauvox/tauvox/volume"
)

// AutoThreshold returns the automatic masking threshold of a series: half
// of Otsu's threshold (Otsu 1979, IEEE Trans Syst Man Cybern 9:62) of the
// histogram of each voxel's largest finite sample. Otsu's threshold
// separates air from object; half of it keeps dim tissue and vial edges
// that lie just above the noise. The largest sample rather than the first
// volume is used so that a protocol whose first volume is dark (a short
// inversion time near the null, a small flip angle) still masks correctly.
// It returns 0 (no masking) when the image holds no positive finite sample.
func AutoThreshold(im *volume.Image) float64 {
	var p PeakHistogram
	return PeaksThreshold(p.Peaks(nil, im))
}

// PeaksThreshold returns the automatic threshold of the per-voxel peaks of
// a whole series (as Peaks, or ResetPeaks and MaxInto per volume, give
// them): AutoThreshold of that series.
func PeaksThreshold(peaks []float32) float64 {
	var p PeakHistogram
	p.Raise(peaks)
	p.Add(peaks)
	return p.Threshold()
}

// OtsuThreshold returns Otsu's threshold (Otsu 1979) of values on a
// 256-bin histogram over [0, largest finite value], non-positive values in
// the lowest bin, taken at the middle of the range of bins that maximise the
// between-class variance (with a clean gap between two classes every bin in
// the gap maximises it equally). It returns 0 when no value is positive.
func OtsuThreshold(values []float32) float64 {
	var p PeakHistogram
	for _, s := range values {
		if f := float64(s); f > p.top && !math.IsInf(f, 0) {
			p.top = f
		}
	}
	if !(p.top > 0) {
		return 0
	}
	p.Add(values)
	return otsuHist(&p.h, p.total, p.top)
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
