package phantom

import (
	"fmt"
	"math"
	"sort"

	"github.com/tauvox/tauvox/roi"
	"github.com/tauvox/tauvox/volume"
)

// DefaultROIFraction is the default measurement radius as a fraction of
// the vial radius: regions of 60–80 % of the vial diameter keep away from
// the wall (check-values §4.2, common practice).
const DefaultROIFraction = 0.7

// VialRegion returns the voxels of grid im whose centres lie on one of the
// given slices and within radius mm of the vial axis through centre c
// (normal n): a cylinder through the slices.
func VialRegion(im *volume.Image, c, n [3]float64, radius float64, slices []int) []int {
	inv, ok := im.Affine.Inverse()
	if !ok {
		return nil
	}
	nx, ny := im.Dims[0], im.Dims[1]
	vs := im.Affine.VoxelSize()
	var idx []int
	for _, k := range slices {
		// Centre of the vial on this slice: intersect the axis with the
		// slice plane (for an axis along the slice normal, the projection).
		ci, cj, _ := inv.Apply(c[0], c[1], c[2])
		ri, rj := radius/vs[0]+1, radius/vs[1]+1
		for j := max(0, int(cj-rj)); j <= min(ny-1, int(cj+rj)+1); j++ {
			for i := max(0, int(ci-ri)); i <= min(nx-1, int(ci+ri)+1); i++ {
				x, y, z := im.Affine.Apply(float64(i), float64(j), float64(k))
				d := [3]float64{x - c[0], y - c[1], z - c[2]}
				along := dot(d, n)
				perp := math.Sqrt(math.Max(0, dot(d, d)-along*along))
				if perp <= radius {
					idx = append(idx, i+nx*(j+ny*k))
				}
			}
		}
	}
	sort.Ints(idx)
	return idx
}

// Measure measures every vial of def in map m (status, when not nil, marks
// failed fits) at placement pl: a cylinder of frac × the vial radius
// through the given slices. It fills the statistics of each VialQA.
func Measure(m *volume.Image, status []uint8, pl *Placement, def *Definition, quantity string, frac float64, slices []int) ([]VialQA, error) {
	if frac <= 0 || frac > 1 {
		return nil, fmt.Errorf("ROI fraction %g outside (0, 1]", frac)
	}
	var out []VialQA
	var scratch []float64
	for i := range def.Vials {
		v := &def.Vials[i]
		c := pl.Point(v.X, v.Y)
		r := frac * v.Radius
		idx := VialRegion(m, c, pl.N, r, slices)
		var s roi.Stats
		s, scratch = roi.Summarise(m.Data, status, idx, scratch)
		q := VialQA{ID: v.ID, Quantity: quantity, N: s.N, Mean: s.Mean, Median: s.Median, SD: s.SD,
			Failed: s.Failed, CenterMM: c, RadiusMM: r}
		if len(idx) == 0 {
			q.Note = "vial outside the image"
		}
		out = append(out, q)
	}
	return out, nil
}
