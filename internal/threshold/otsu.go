// Package threshold finds the level that separates an image's object from
// its background: Otsu's threshold on a fixed histogram, built in one pass
// or in parts. It is used by the fit engine's automatic mask and by the
// phantom's vial localisation.
package threshold

import "math"

// Bins is the number of histogram bins between 0 and the top.
const Bins = 256

// Histogram bins non-negative values over [0, Top]: a value v falls in bin
// ⌊v/Top·(Bins−1)⌋, non-positive (and NaN) values in the lowest bin. Set
// Top (the largest value to bin) before adding. The zero value is ready
// once Top is set.
type Histogram struct {
	Top   float64
	Count [Bins]float64
	Total float64
}

// Raise raises Top to the largest finite value of values.
func (h *Histogram) Raise(values []float32) {
	for _, s := range values {
		if f := float64(s); f > h.Top && !math.IsInf(f, 0) {
			h.Top = f
		}
	}
}

// Add bins values. It does nothing while Top is not positive.
func (h *Histogram) Add(values []float32) {
	if !(h.Top > 0) {
		return
	}
	for _, s := range values {
		v := float64(s)
		if !(v > 0) {
			v = 0
		}
		b := int(v / h.Top * (Bins - 1))
		if b >= Bins {
			b = Bins - 1
		}
		h.Count[b]++
		h.Total++
	}
}

// Otsu returns Otsu's threshold of the histogram (Otsu 1979, IEEE Trans
// Syst Man Cybern 9:62): the level maximising the between-class variance,
// taken at the middle of the range of bins that maximise it equally (with
// a clean gap between two classes every bin in the gap does). It returns 0
// when Top is not positive.
func (h *Histogram) Otsu() float64 {
	if !(h.Top > 0) {
		return 0
	}
	var sumAll float64
	for i, c := range h.Count {
		sumAll += float64(i) * c
	}
	var wB, sumB, best float64
	bestI, bestJ := 0, 0
	for i := 0; i < Bins; i++ {
		wB += h.Count[i]
		if wB == 0 {
			continue
		}
		wF := h.Total - wB
		if wF == 0 {
			break
		}
		sumB += float64(i) * h.Count[i]
		mB := sumB / wB
		mF := (sumAll - sumB) / wF
		between := wB * wF * (mB - mF) * (mB - mF)
		switch {
		case between > best*(1+1e-12):
			best = between
			bestI, bestJ = i, i
		case between >= best*(1-1e-12):
			bestJ = i
		}
	}
	return (float64(bestI+bestJ)/2 + 1) / (Bins - 1) * h.Top
}

// Otsu returns Otsu's threshold of values on a Bins-bin histogram over
// [0, largest finite value]; 0 when no value is positive.
func Otsu(values []float32) float64 {
	var h Histogram
	h.Raise(values)
	h.Add(values)
	return h.Otsu()
}
