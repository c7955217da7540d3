package fit

import (
	"math"

	"github.com/tauvox/tauvox/io/volume"
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
	nv, nt := im.Voxels(), im.Volumes()
	peak := make([]float64, nv)
	top := 0.0
	for v := 0; v < nv; v++ {
		p := math.Inf(-1)
		for t := 0; t < nt; t++ {
			s := float64(im.Data[t*nv+v])
			if s > p && !math.IsInf(s, 0) {
				p = s
			}
		}
		peak[v] = p
		if p > top {
			top = p
		}
	}
	if !(top > 0) {
		return 0
	}
	return otsu(peak, top) / 2
}

// otsu returns Otsu's threshold of the positive values of x on a 256-bin
// histogram over [0, top]: the upper edge of the last background bin,
// taken at the middle of the range of bins that maximise the
// between-class variance.
func otsu(x []float64, top float64) float64 {
	const bins = 256
	var h [bins]float64
	var total float64
	for _, v := range x {
		if !(v > 0) {
			v = 0
		}
		b := int(v / top * (bins - 1))
		if b >= bins {
			b = bins - 1
		}
		h[b]++
		total++
	}
	var sumAll float64
	for i, c := range h {
		sumAll += float64(i) * c
	}
	var wB, sumB, best float64
	bestI, bestJ := 0, 0
	for i := 0; i < bins; i++ {
		wB += h[i]
		if wB == 0 {
			continue
		}
		wF := total - wB
		if wF == 0 {
			break
		}
		sumB += float64(i) * h[i]
		mB := sumB / wB
		mF := (sumAll - sumB) / wF
		between := wB * wF * (mB - mF) * (mB - mF)
		switch {
		case between > best*(1+1e-12):
			best = between
			bestI, bestJ = i, i
		case between >= best*(1-1e-12):
			bestJ = i // on the plateau of an empty gap between the classes
		}
	}
	// Middle of the maximising plateau: with a clean gap between air and
	// object every bin in the gap maximises the criterion equally.
	return (float64(bestI+bestJ)/2 + 1) / (bins - 1) * top
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
	nv, nt := im.Voxels(), im.Volumes()
	var sum float64
	n := 0
	for v := 0; v < nv; v++ {
		peak := math.Inf(-1)
		for t := 0; t < nt; t++ {
			if s := float64(im.Data[t*nv+v]); s > peak && !math.IsInf(s, 0) {
				peak = s
			}
		}
		if !(peak < thr) {
			continue
		}
		for t := 0; t < nt; t++ {
			s := float64(im.Data[t*nv+v])
			if s > 0 && !math.IsInf(s, 0) {
				sum += s
				n++
			}
		}
	}
	if n < 100 {
		return 0, false
	}
	return sum / float64(n) / math.Sqrt(math.Pi/2), true
}
