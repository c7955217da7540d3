package roi

import (
	"math"
	"sort"

	"github.com/tauvox/tauvox/volume"
)

// Stats summarises a map inside a region. Statistics are over the finite
// values; Failed counts the region's voxels whose value is NaN or whose
// status is not ok.
type Stats struct {
	N      int     // finite values used
	Voxels int     // voxels in the region
	Mean   float64 // NaN when N = 0
	SD     float64 // sample SD (n − 1), NaN when N < 2
	Median float64
	Q1, Q3 float64 // quartiles (linear interpolation between order statistics)
	Min    float64
	Max    float64
	CoV    float64 // SD/|Mean|
	Failed float64 // fraction of the region's voxels without a usable value
}

// IQR returns Q3 − Q1.
func (s Stats) IQR() float64 { return s.Q3 - s.Q1 }

// Summarise computes Stats of values[idx]; status, when not nil, marks
// voxels with a non-zero code as failed. scratch is reused when long
// enough (nil allocates).
func Summarise(values []float32, status []uint8, idx []int, scratch []float64) (Stats, []float64) {
	s := Stats{Voxels: len(idx)}
	x := scratch[:0]
	for _, i := range idx {
		v := float64(values[i])
		if math.IsNaN(v) || math.IsInf(v, 0) || (status != nil && status[i] != 0) {
			continue
		}
		x = append(x, v)
	}
	s.N = len(x)
	nan := math.NaN()
	s.Mean, s.SD, s.Median, s.Q1, s.Q3, s.Min, s.Max, s.CoV = nan, nan, nan, nan, nan, nan, nan, nan
	if s.Voxels > 0 {
		s.Failed = float64(s.Voxels-s.N) / float64(s.Voxels)
	}
	if s.N == 0 {
		return s, x
	}
	sort.Float64s(x)
	var sum float64
	for _, v := range x {
		sum += v
	}
	s.Mean = sum / float64(s.N)
	if s.N > 1 {
		var ss float64
		for _, v := range x {
			d := v - s.Mean
			ss += d * d
		}
		s.SD = math.Sqrt(ss / float64(s.N-1))
		s.CoV = s.SD / math.Abs(s.Mean)
	}
	s.Min, s.Max = x[0], x[s.N-1]
	s.Median = quantile(x, 0.5)
	s.Q1 = quantile(x, 0.25)
	s.Q3 = quantile(x, 0.75)
	return s, x
}

// quantile of sorted x by linear interpolation between order statistics
// (Hyndman & Fan 1996 type 7, the default of numpy.percentile and R).
func quantile(x []float64, p float64) float64 {
	h := p * float64(len(x)-1)
	lo := math.Floor(h)
	i := int(lo)
	if i+1 >= len(x) {
		return x[len(x)-1]
	}
	return x[i] + (h-lo)*(x[i+1]-x[i])
}

// Sphere returns the indices of the voxels of one volume of im whose
// centres lie within radius mm of the scanner position c (RAS mm). The
// search is bounded to the sphere's box, clipped to the image.
func Sphere(im *volume.Image, c [3]float64, radius float64) []int {
	return sphere(im, c, radius, math.MaxInt)
}

// sphere is Sphere stopping once more than limit voxels are found (it then
// returns limit+1 of them, enough to tell the caller the limit is passed).
func sphere(im *volume.Image, c [3]float64, radius float64, limit int) []int {
	inv, ok := im.Affine.Inverse()
	if !ok {
		return nil
	}
	ci, cj, ck := inv.Apply(c[0], c[1], c[2])
	vs := im.Affine.VoxelSize()
	lo, hi := [3]int{}, [3]int{}
	for d, cc := range []float64{ci, cj, ck} {
		r := radius / vs[d]
		lo[d] = max(0, int(math.Floor(cc-r))-1)
		hi[d] = min(im.Dims[d]-1, int(math.Ceil(cc+r))+1)
	}
	var idx []int
	r2 := radius * radius
	for k := lo[2]; k <= hi[2]; k++ {
		for j := lo[1]; j <= hi[1]; j++ {
			for i := lo[0]; i <= hi[0]; i++ {
				x, y, z := im.Affine.Apply(float64(i), float64(j), float64(k))
				dx, dy, dz := x-c[0], y-c[1], z-c[2]
				if dx*dx+dy*dy+dz*dz <= r2 {
					if len(idx) > limit {
						return idx
					}
					idx = append(idx, i+im.Dims[0]*(j+im.Dims[1]*k))
				}
			}
		}
	}
	return idx
}
