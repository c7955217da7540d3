package phantom

import (
	"math"
	"sort"

	"github.com/tauvox/tauvox/volume"
)

// MinCutFraction is the smallest radius, as a fraction of a sphere's
// radius, that a slice must cut through the whole of its thickness for the
// slice to be measured: below it the cut disc is mostly wall and partial
// volume (tauvox's choice; docs/methods.md).
const MinCutFraction = 0.5

// Point3 maps a point of the phantom's frame (x, y in its plane, z along
// its axis, mm from its centre) to the scanner. Face down turns z over
// with x.
func (p *Placement) Point3(x, y, z float64) [3]float64 {
	q := p.Point(x, y)
	if p.Mirrored {
		z = -z
	}
	for d := 0; d < 3; d++ {
		q[d] += z * p.N[d]
	}
	return q
}

// vialCentre returns the scanner position of vial v's centre.
func (p *Placement) vialCentre(v *Vial) [3]float64 {
	if v.IsSphere() {
		return p.Point3(v.X, v.Y, v.Z)
	}
	return p.Point(v.X, v.Y)
}

// sliceThickness returns the spacing of im's slices along the normal n.
func sliceThickness(im *volume.Image, n [3]float64) float64 {
	a := im.Affine
	return math.Abs(a[0][2]*n[0] + a[1][2]*n[1] + a[2][2]*n[2])
}

// CutRadius returns the radius a slab of thickness t at distance d (from
// the slab's middle to the sphere centre) cuts from a sphere of radius r
// through its whole thickness: √(r² − (|d| + t/2)²), 0 when some part of
// the slab misses the sphere's widest disc by more than r.
func CutRadius(r, d, t float64) float64 {
	e := math.Abs(d) + t/2
	if e >= r {
		return 0
	}
	return math.Sqrt(r*r - e*e)
}

// SphereRegion returns the voxels of grid im inside the measurement region
// of a sphere of radius r centred at c (n the slice normal): on each slice
// whose slab cuts a disc of at least MinCutFraction·r through its whole
// thickness, a disc of frac × that cut radius. It returns the slices used
// and the smallest region radius (NaN when no slice is used).
func SphereRegion(im *volume.Image, c, n [3]float64, r, frac float64) (idx []int, used []int, rmin float64) {
	inv, ok := im.Affine.Inverse()
	rmin = math.NaN()
	if !ok {
		return nil, nil, rmin
	}
	t := sliceThickness(im, n)
	_, _, ck := inv.Apply(c[0], c[1], c[2])
	for k := 0; k < im.Dims[2]; k++ {
		d := (float64(k) - ck) * t
		rc := CutRadius(r, d, t)
		if rc < MinCutFraction*r || rc == 0 {
			continue
		}
		rr := frac * rc
		// The sphere centre projected on slice k.
		ci, cj, _ := inv.Apply(c[0], c[1], c[2])
		x, y, z := im.Affine.Apply(ci, cj, float64(k))
		part := VialRegion(im, [3]float64{x, y, z}, n, rr, []int{k})
		if len(part) == 0 {
			continue
		}
		idx = append(idx, part...)
		used = append(used, k)
		if math.IsNaN(rmin) || rr < rmin {
			rmin = rr
		}
	}
	sort.Ints(idx)
	return idx, used, rmin
}

// hasSpheres reports whether any vial of def is a sphere, and the height
// of the spheres' plane: the z_mm shared by most spheres (the smallest in
// size among equally common ones). A slab usually images one layer of
// spheres; with several layers the commonest is taken to be the one
// imaged.
func (d *Definition) hasSpheres() (bool, float64) {
	count := map[float64]int{}
	for i := range d.Vials {
		if d.Vials[i].IsSphere() {
			count[d.Vials[i].Z]++
		}
	}
	if len(count) == 0 {
		return false, 0
	}
	best, bn := 0.0, -1
	for z, n := range count {
		if n > bn || n == bn && (math.Abs(z) < math.Abs(best) || math.Abs(z) == math.Abs(best) && z < best) {
			best, bn = z, n
		}
	}
	return true, best
}

// locatePlane finds the plane of the spheres along the slice normal when
// the image holds several slices: the placement's contrast score on each
// slice peaks where the slices cut the spheres widest; a parabola through
// the best slice and its two neighbours gives the peak to a fraction of a
// slice (the vertex of the parabola through three points, within a slice
// of the best). The placement's centre moves along the normal so
// that the spheres' plane height (hasSpheres) lies on it. It returns the plane's
// fractional slice index.
func locatePlane(sc *scorer, pl *Placement, zbar float64) float64 {
	sl := sc.sl
	nz := sl.im.Dims[2]
	keep := sl.k
	defer sl.setSlice(keep)
	score := make([]float64, nz)
	best := -1
	for k := 0; k < nz; k++ {
		sl.setSlice(k)
		score[k] = sc.score(sl.project(pl.Center), pl.Rotation, pl.Mirrored)
		if best < 0 || score[k] > score[best] {
			best = k
		}
	}
	plane := float64(best)
	if nz >= 3 {
		// Inside a sphere a slice's contrast falls as the disc it cuts,
		// ∝ r² − d²: a parabola in the distance d, whose vertex is the
		// plane. The three slices around the best (kept inside the slab).
		m := min(max(best, 1), nz-2)
		a, b, c := score[m-1], score[m], score[m+1]
		if den := a - 2*b + c; den < 0 {
			v := float64(m) + 0.5*(a-c)/den
			plane = math.Max(float64(best)-1, math.Min(float64(best)+1, v))
		}
	}
	// Move the centre onto the plane, then back by the plane's height.
	inv := sl.inv
	ci, cj, _ := inv.Apply(pl.Center[0], pl.Center[1], pl.Center[2])
	x, y, z := sl.im.Affine.Apply(ci, cj, plane)
	s := 1.0
	if pl.Mirrored {
		s = -1
	}
	pl.Center = [3]float64{x - s*zbar*pl.N[0], y - s*zbar*pl.N[1], z - s*zbar*pl.N[2]}
	pl.Plane = plane
	return plane
}
