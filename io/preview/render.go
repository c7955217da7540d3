package preview

import (
	"encoding/binary"
	"fmt"
	"image"
	"image/color"
	"math"
	"math/bits"
	"slices"
	"strconv"
	"strings"
)

// ColorOf returns the display colour of value v in the window [lo, hi]:
// invalid for NaN and ±Inf, the darkest valid colour for v ≤ lo, the
// brightest for v ≥ hi, and the table entry at the fraction (v−lo)/(hi−lo)
// of the table otherwise (the table's n entries split the window into n
// equal bins). When hi ≤ lo every valid value above lo is drawn in the
// brightest colour.
func ColorOf(cm ColorMap, v, lo, hi float64, invalid color.RGBA) color.RGBA {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return invalid
	}
	n := len(cm.Colors)
	if v <= lo {
		return cm.Colors[0]
	}
	if !(hi > lo) || v >= hi {
		return cm.Colors[n-1]
	}
	k := int((v - lo) / (hi - lo) * float64(n))
	if k >= n {
		k = n - 1
	}
	return cm.Colors[k]
}

// Slice draws one slice of a map into dst and returns dst. values holds
// nx·ny samples with i varying fastest (index i + nx·j). The slice is
// scaled to fill dst's bounds by nearest neighbour, so a caller sets the
// zoom and the aspect ratio by the size of dst. Image column x shows
// i = x·nx/w, image row y shows j = ny−1 − y·ny/h (top row is the largest
// j; see the package comment on orientation). Colours follow ColorOf.
//
// If dst is nil an nx×ny image is allocated. Slice allocates nothing
// otherwise. It panics if nx or ny is below 1, if values is shorter than
// nx·ny, or if cm is empty.
func Slice(dst *image.RGBA, values []float32, nx, ny int, cm ColorMap, lo, hi float64, invalid color.RGBA) *image.RGBA {
	if nx < 1 || ny < 1 {
		panic("preview: slice size below 1")
	}
	if len(values) < nx*ny {
		panic("preview: fewer values than nx*ny")
	}
	if len(cm.Colors) == 0 {
		panic("preview: empty colour map")
	}
	if dst == nil {
		dst = image.NewRGBA(image.Rect(0, 0, nx, ny))
	}
	b := dst.Bounds()
	w, h := b.Dx(), b.Dy()
	// ColorOf, written out for the loop (a call per voxel was half the
	// time of a montage), with the same arithmetic, so the same colours.
	n := len(cm.Colors)
	first, last, span, fn := cm.Colors[0], cm.Colors[n-1], hi-lo, float64(n)
	prevJ, prevOff := -1, 0
	for y := 0; y < h; y++ {
		j := ny - 1 - y*ny/h
		off := dst.PixOffset(b.Min.X, b.Min.Y+y)
		if j == prevJ { // a zoomed slice repeats the row above
			copy(dst.Pix[off:off+4*w], dst.Pix[prevOff:prevOff+4*w])
			continue
		}
		prevJ, prevOff = j, off
		row := values[nx*j : nx*j+nx]
		pix := dst.Pix[off : off+4*w]
		// Column x shows voxel i = ⌊x·nx/w⌋, stepped without a division
		// per pixel: rem = x·nx − i·w stays in [0, w).
		i, rem, prevI := 0, 0, -1
		var c uint32
		for x := 0; x < w; x++ {
			if i != prevI {
				prevI = i
				var col color.RGBA
				switch v := float64(row[i]); {
				case math.IsNaN(v) || math.IsInf(v, 0):
					col = invalid
				case v <= lo:
					col = first
				case !(hi > lo) || v >= hi:
					col = last
				default:
					k := int((v - lo) / span * fn)
					if k >= n {
						k = n - 1
					}
					col = cm.Colors[k]
				}
				c = uint32(col.R) | uint32(col.G)<<8 | uint32(col.B)<<16 | uint32(col.A)<<24
			}
			binary.LittleEndian.PutUint32(pix[4*x:], c)
			rem += nx
			for rem >= w {
				rem -= w
				i++
			}
		}
	}
	return dst
}

// AutoRange returns a robust display window for values: the 1st and 99th
// percentiles of the finite values, each the linear interpolation between
// the two nearest order statistics (Hyndman & Fan 1996, definition 7, the
// default of numpy.percentile). Non-finite values are ignored. When no
// value is finite it returns 0, 1; when the percentiles are equal it
// widens the window by 5 % of the value on each side (or to 0..1 for 0).
//
// The result is exact, as a sort would give it: a first pass counts the
// finite values in 65,536 bins of their order-preserving bit pattern
// (sign, exponent and the top 7 bits of the mantissa: each bin spans
// under 1 % of its values), which tells the bins that hold the four order
// statistics; a second pass copies only the values of those bins, and
// selection orders them. On a map of a million voxels that is a few
// thousand values instead of a copy and selection of all of them. A zero
// is counted as +0.
func AutoRange(values []float32) (lo, hi float64) {
	var hist [1 << 16]int32
	n := 0
	for _, v := range values {
		b := math.Float32bits(v)
		if b&expMask == expMask { // NaN or ±Inf
			continue
		}
		hist[orderKey(b)>>16]++
		n++
	}
	if n == 0 {
		return 0, 1
	}
	lo, hi = quantiles(values, &hist, n, 0.01, 0.99)
	if hi <= lo {
		if lo == 0 {
			return 0, 1
		}
		d := 0.05 * math.Abs(lo)
		lo, hi = lo-d, lo+d
	}
	return lo, hi
}

const expMask = 0x7f80_0000 // exponent bits of a float32

// orderKey maps the bits of a finite float32 to a uint32 in the order of
// the values: negative values below positive ones, larger magnitudes of
// negative values lower. −0 is taken as +0.
func orderKey(b uint32) uint32 {
	if b == 0x8000_0000 {
		b = 0
	}
	if b&0x8000_0000 != 0 {
		return ^b
	}
	return b | 0x8000_0000
}

// quantiles returns the p- and q-quantiles (definition 7, as percentile)
// of the n finite values among values, whose bins by orderKey>>16 are
// counted in hist.
func quantiles(values []float32, hist *[1 << 16]int32, n int, p, q float64) (float64, float64) {
	// The order statistics k and k+1 of each quantile (0-based).
	var ranks [4]int
	var frac [2]float64
	for i, x := range [2]float64{p, q} {
		h := x * float64(n-1)
		k := int(math.Floor(h))
		ranks[2*i], ranks[2*i+1] = k, min(k+1, n-1)
		frac[i] = h - float64(k)
	}
	// The bin of each rank, and the number of values before that bin.
	bin, before := [4]int{-1, -1, -1, -1}, [4]int{}
	c := 0
	for j := range hist {
		next := c + int(hist[j])
		for i, k := range ranks {
			if bin[i] < 0 && k < next {
				bin[i], before[i] = j, c
			}
		}
		c = next
	}
	// Copy the values of the bins bin[0]..bin[1] (no value lies in a bin
	// between them: their ranks are adjacent) and bin[2]..bin[3].
	var low, high []float32
	for _, v := range values {
		b := math.Float32bits(v)
		if b&expMask == expMask {
			continue
		}
		if v == 0 {
			v = 0 // +0
		}
		j := int(orderKey(b) >> 16)
		if j >= bin[0] && j <= bin[1] {
			low = append(low, v)
		}
		if j >= bin[2] && j <= bin[3] {
			high = append(high, v)
		}
	}
	// As percentile, on the copied values: rank k of the whole is rank
	// k − before in the copy.
	interp := func(s []float32, from, i int) float64 {
		k := ranks[2*i] - from
		selectKth(s, k)
		a := float64(s[k])
		if ranks[2*i+1] == ranks[2*i] {
			return a
		}
		return a + frac[i]*(float64(slices.Min(s[k+1:]))-a)
	}
	return interp(low, before[0], 0), interp(high, before[2], 1)
}

// percentile returns the p-quantile (0 ≤ p ≤ 1) of s by linear
// interpolation between the order statistics k and k+1, h = p·(n−1)
// (Hyndman–Fan definition 7). It reorders s: the order statistics are
// found by selection, so that calls for increasing p reuse the order the
// earlier calls left.
func percentile[F float32 | float64](s []F, p float64) float64 {
	h := p * float64(len(s)-1)
	k := int(math.Floor(h))
	if k >= len(s)-1 {
		selectKth(s, len(s)-1)
		return float64(s[len(s)-1])
	}
	selectKth(s, k)
	next := s[k+1]
	for _, v := range s[k+2:] {
		next = min(next, v)
	}
	return float64(s[k]) + (h-float64(k))*(float64(next)-float64(s[k]))
}

// selectKth reorders s (no NaN) so that s[k] is its k-th smallest value
// (from 0), every value before it ≤ s[k] and every value after it ≥ s[k]:
// Hoare's quickselect with a median-of-three pivot, falling back to a
// sort of the remaining range after 2·log2(n) rounds.
func selectKth[F float32 | float64](s []F, k int) {
	lo, hi := 0, len(s)-1
	for depth := 2 * bits.Len(uint(len(s))); hi > lo; depth-- {
		if depth == 0 {
			slices.Sort(s[lo : hi+1])
			return
		}
		mid := lo + (hi-lo)/2
		if s[mid] < s[lo] {
			s[mid], s[lo] = s[lo], s[mid]
		}
		if s[hi] < s[lo] {
			s[hi], s[lo] = s[lo], s[hi]
		}
		if s[hi] < s[mid] {
			s[hi], s[mid] = s[mid], s[hi]
		}
		pivot := s[mid]
		i, j := lo, hi
		for i <= j {
			for s[i] < pivot {
				i++
			}
			for s[j] > pivot {
				j--
			}
			if i <= j {
				s[i], s[j] = s[j], s[i]
				i++
				j--
			}
		}
		// Now s[lo..j] ≤ pivot ≤ s[i..hi], and s[j+1..i-1] = pivot.
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return
		}
	}
}

// Window is an explicit display window. The zero value asks for AutoRange.
type Window struct {
	Lo, Hi float64
}

// IsAuto reports whether w is the zero window (choose automatically).
func (w Window) IsAuto() bool { return w.Lo == 0 && w.Hi == 0 }

// Resolve returns w's limits, or AutoRange(values) for the zero window.
func (w Window) Resolve(values []float32) (lo, hi float64) {
	if w.IsAuto() {
		return AutoRange(values)
	}
	return w.Lo, w.Hi
}

// Windows are the display windows of the maps of a folder: QUANTITY=LO,HI
// sets the window of the maps of one quantity (T2, T1, M0, R2, ...; the
// name as the map's sidecar gives it, any case); a bare LO,HI sets the
// window of every map in ms (the time constants). Every other map keeps
// its automatic window (AutoRange). The zero value is automatic for all.
type Windows struct {
	ByQuantity map[string]Window // by lower-case quantity
	Times      Window            // maps in ms without their own window
}

// For returns the window of a map of quantity q in unit.
func (w Windows) For(q, unit string) Window {
	if x, ok := w.ByQuantity[strings.ToLower(q)]; ok {
		return x
	}
	if unit == "ms" {
		return w.Times
	}
	return Window{}
}

// ParseWindows parses the values of the --range flag (each "LO,HI" or
// "QUANTITY=LO,HI").
func ParseWindows(list []string) (Windows, error) {
	var w Windows
	for _, s := range list {
		q, r, named := strings.Cut(s, "=")
		if !named {
			r = s
		}
		x, err := ParseWindow(r)
		if err != nil {
			return Windows{}, err
		}
		if !named {
			w.Times = x
			continue
		}
		q = strings.TrimSpace(q)
		if q == "" {
			return Windows{}, fmt.Errorf("range %q: want QUANTITY=LO,HI", s)
		}
		if w.ByQuantity == nil {
			w.ByQuantity = map[string]Window{}
		}
		w.ByQuantity[strings.ToLower(q)] = x
	}
	return w, nil
}

// ParseWindow parses a display window written "LO,HI" or "LO:HI" (the
// form of a --range option), e.g. "0,2000". LO must be below HI and both
// finite.
func ParseWindow(s string) (Window, error) {
	sep := ","
	if !strings.Contains(s, ",") {
		sep = ":"
	}
	a, b, ok := strings.Cut(s, sep)
	if !ok {
		return Window{}, fmt.Errorf("range %q: want LO,HI", s)
	}
	lo, err1 := strconv.ParseFloat(strings.TrimSpace(a), 64)
	hi, err2 := strconv.ParseFloat(strings.TrimSpace(b), 64)
	if err1 != nil || err2 != nil || math.IsInf(lo, 0) || math.IsInf(hi, 0) || math.IsNaN(lo) || math.IsNaN(hi) {
		return Window{}, fmt.Errorf("range %q: want two finite numbers LO,HI", s)
	}
	if !(lo < hi) {
		return Window{}, fmt.Errorf("range %q: LO must be below HI", s)
	}
	return Window{Lo: lo, Hi: hi}, nil
}
