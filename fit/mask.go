package fit

import (
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
