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
// failed fits) at placement pl: for a cylinder, a cylinder of frac × the
// vial radius through the given slices; for a sphere, on every slice of m
// that cuts it widely enough, a disc of frac × the radius cut
// (SphereRegion). It fills the statistics of each VialQA; a sphere that no
// slice cuts is noted as not in the imaged slab.
func Measure(m *volume.Image, status []uint8, pl *Placement, def *Definition, quantity string, frac float64, slices []int) ([]VialQA, error) {
	if frac <= 0 || frac > 1 {
		return nil, fmt.Errorf("ROI fraction %g outside (0, 1]", frac)
	}
	var out []VialQA
	var scratch []float64
	for i := range def.Vials {
		v := &def.Vials[i]
		c := pl.vialCentre(v)
		r := frac * v.Radius
		var idx []int
		note := "vial outside the image"
		if v.IsSphere() {
			var used []int
			idx, used, r = SphereRegion(m, c, pl.N, v.Radius, frac)
			if len(used) == 0 {
				note = NotInSlab
			}
		} else {
			idx = VialRegion(m, c, pl.N, r, slices)
		}
		var s roi.Stats
		s, scratch = roi.Summarise(m.Data, status, idx, scratch)
		q := VialQA{ID: v.ID, Quantity: quantity, N: s.N, Mean: s.Mean, Median: s.Median, SD: s.SD,
			Failed: s.Failed, CenterMM: c, RadiusMM: r}
		if len(idx) == 0 {
			q.Note = note
		}
		out = append(out, q)
	}
	return out, nil
}

// NotInSlab is the note of a sphere that no slice of the map cuts widely
// enough to measure.
const NotInSlab = "not in the imaged slab"
